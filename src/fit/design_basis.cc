#include "fit/design_basis.h"

#include <algorithm>
#include <cmath>
#include <string>

#include "boldsum/error.h"

namespace boldsum {
namespace fit {

namespace {

// D a with D = L + L' (L the lag-1 shift): (D a)_k = a_{k-1} + a_{k+1}, missing terms 0.
Eigen::MatrixXd ApplyLagSum(const Eigen::MatrixXd& a) {
  const Eigen::Index n = a.rows();
  Eigen::MatrixXd out = Eigen::MatrixXd::Zero(n, a.cols());
  if (n > 1) {
    out.bottomRows(n - 1) += a.topRows(n - 1);
    out.topRows(n - 1) += a.bottomRows(n - 1);
  }
  return out;
}

void CheckFinite(const Eigen::MatrixXd& x) {
  for (Eigen::Index j = 0; j < x.cols(); ++j) {
    for (Eigen::Index i = 0; i < x.rows(); ++i) {
      if (!std::isfinite(x(i, j))) {
        throw Error("design matrix: non-finite value " + std::to_string(x(i, j)) +
                    " at row " + std::to_string(i) + ", column " + std::to_string(j) +
                    "; every entry must be finite");
      }
    }
  }
}

}  // namespace

KeptGram SelectKept(const DesignGram& gram, const std::vector<int>& kept) {
  const Eigen::Index r = static_cast<Eigen::Index>(kept.size());
  KeptGram g{Eigen::MatrixXd(r, r), Eigen::MatrixXd(r, r), Eigen::MatrixXd(r, r)};
  for (Eigen::Index j = 0; j < r; ++j) {
    for (Eigen::Index i = 0; i < r; ++i) {
      g.xtx(i, j) = gram.xtx(kept[i], kept[j]);
      g.lag(i, j) = gram.lag(kept[i], kept[j]);
      g.ends(i, j) = gram.ends(kept[i], kept[j]);
    }
  }
  return g;
}

DesignBasis AnalyseDesign(const Eigen::MatrixXd& x) {
  DesignBasis b;
  b.n = static_cast<int>(x.rows());
  b.p = static_cast<int>(x.cols());
  if (b.n == 0 || b.p == 0) {
    throw Error("design matrix is empty (" + std::to_string(b.n) + " rows, " +
                std::to_string(b.p) + " columns)");
  }
  CheckFinite(x);
  const Eigen::Index n = b.n;

  // Rank decision on unit-norm columns, so that it does not depend on column units.
  Eigen::VectorXd norms = x.colwise().norm().transpose();
  Eigen::MatrixXd xs = x;
  for (Eigen::Index j = 0; j < x.cols(); ++j) {
    if (norms(j) > 0) xs.col(j) /= norms(j);
  }
  Eigen::ColPivHouseholderQR<Eigen::MatrixXd> qr(xs);
  qr.setThreshold(kRankTolerance);
  b.rank = static_cast<int>(qr.rank());
  if (b.rank == 0) throw Error("design matrix has rank 0 (every column is zero)");
  if (b.n <= b.rank) {
    throw Error("design matrix has " + std::to_string(b.n) + " volumes but rank " +
                std::to_string(b.rank) + "; the fit needs more volumes than the rank");
  }
  for (int i = 0; i < b.rank; ++i) b.kept.push_back(qr.colsPermutation().indices()(i));
  std::sort(b.kept.begin(), b.kept.end());
  const Eigen::Index r = b.rank;

  Eigen::MatrixXd xk(n, r);
  for (Eigen::Index i = 0; i < r; ++i) xk.col(i) = x.col(b.kept[i]);
  const Eigen::MatrixXd dx = ApplyLagSum(x);
  b.gram.xtx = x.transpose() * x;
  b.gram.lag = x.transpose() * dx;
  b.gram.ends = x.row(0).transpose() * x.row(0) + x.row(n - 1).transpose() * x.row(n - 1);
  b.kept_gram = SelectKept(b.gram, b.kept);
  b.first_k = xk.row(0).transpose();
  b.last_k = xk.row(n - 1).transpose();
  b.z.resize(n, 2 * r);
  b.z.leftCols(r) = xk;
  b.z.rightCols(r) = ApplyLagSum(xk);
  b.ols.compute(b.kept_gram.xtx);
  if (b.ols.info() != Eigen::Success) {
    throw Error("design matrix: the Gram matrix of the kept columns is not positive "
                "definite (numerical breakdown)");
  }

  // Bias-correction system from an orthonormal basis Q (N x r) of the column space:
  // H = QQ', tr(RR) = N - r, tr(RD) = -tr(Q'DQ), tr(RDRD) = tr(DD) - 2 tr(HDD) +
  // tr(HDHD) = 2(N - 1) - 2 ||DQ||_F^2 + ||Q'DQ||_F^2.
  const Eigen::MatrixXd q = qr.householderQ() * Eigen::MatrixXd::Identity(n, r);
  const Eigen::MatrixXd dq = ApplyLagSum(q);
  const Eigen::MatrixXd qdq = q.transpose() * dq;
  b.m(0, 0) = static_cast<double>(n - r);
  b.m(0, 1) = -qdq.trace();
  b.m(1, 0) = b.m(0, 1);
  b.m(1, 1) = 2.0 * static_cast<double>(n - 1) - 2.0 * dq.squaredNorm() + qdq.squaredNorm();

  // The constant series in the span of the kept columns.
  const Eigen::VectorXd ones = Eigen::VectorXd::Ones(n);
  // The QR solve sets the coefficients of the columns not kept to zero.
  const Eigen::VectorXd a_scaled = qr.solve(ones);
  b.constant_k.resize(r);
  for (Eigen::Index i = 0; i < r; ++i) {
    b.constant_k(i) = a_scaled(b.kept[i]) / norms(b.kept[i]);
  }
  b.has_constant = (xk * b.constant_k - ones).norm() <= 1e-9 * std::sqrt(static_cast<double>(n));
  if (!b.has_constant) b.constant_k.setZero();
  return b;
}

}  // namespace fit
}  // namespace boldsum
