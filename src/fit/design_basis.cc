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
        throw Error("design matrix: non-finite value " + std::to_string(x(i, j)) + " at row " +
                    std::to_string(i) + ", column " + std::to_string(j) +
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

DiagonalGram DiagonaliseGram(const KeptGram& g) {
  const Eigen::Index r = g.xtx.rows();
  // Unit-diagonal scaling first, so that column units do not enter the eigensolver's
  // rounding; V is scaled back afterwards (V = S^-1 V_s keeps V' xtx V = I).
  Eigen::VectorXd inv_norm(r);
  for (Eigen::Index i = 0; i < r; ++i) {
    if (!(g.xtx(i, i) > 0)) {
      throw Error("design matrix: a kept column has zero norm (numerical breakdown)");
    }
    inv_norm(i) = 1.0 / std::sqrt(g.xtx(i, i));
  }
  const Eigen::MatrixXd b = inv_norm.asDiagonal() * g.xtx * inv_norm.asDiagonal();
  const Eigen::MatrixXd a = inv_norm.asDiagonal() * g.lag * inv_norm.asDiagonal();
  Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> solver(
      a, b, Eigen::ComputeEigenvectors | Eigen::Ax_lBx);
  if (solver.info() != Eigen::Success) {
    throw Error(
        "design matrix: the Gram matrix of the kept columns is not positive "
        "definite (numerical breakdown)");
  }
  DiagonalGram out;
  out.v = inv_norm.asDiagonal() * solver.eigenvectors();
  // Rayleigh quotients of L + L' lie in (-2, 2); clamping only removes rounding.
  out.lambda = solver.eigenvalues().cwiseMax(-2.0).cwiseMin(2.0);
  const Eigen::MatrixXd ends = out.v.transpose() * g.ends * out.v;
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> ends_solver(0.5 * (ends + ends.transpose()));
  out.f = Eigen::MatrixXd::Zero(r, 2);
  for (Eigen::Index k = 0; k < std::min<Eigen::Index>(2, r); ++k) {
    const Eigen::Index i = r - 1 - k;  // eigenvalues ascending: the two largest
    out.f.col(k) =
        std::sqrt(std::max(ends_solver.eigenvalues()(i), 0.0)) * ends_solver.eigenvectors().col(i);
  }
  return out;
}

// The three functions below run once per voxel (and contrast): plain loops over r, as
// Eigen's expressions of dynamic size cost more than the arithmetic at r ~ 20-30.
bool WhitenedSolver::Factor(const DiagonalGram& g, double rho) {
  // d_i = 1 + rho^2 - rho lambda_i as a sum of two non-negative terms, so that it keeps
  // its relative accuracy as rho -> +-1 and lambda -> +-2; d_i >= (1 - |rho|)^2 > 0 for
  // |rho| < 1 (the fit clamps rho to [-0.99, 0.99]).
  if (!(std::abs(rho) < 1.0)) return false;
  const Eigen::Index r = g.lambda.size();
  const double* lambda = g.lambda.data();
  double* inv_d = inv_d_.data();
  if (rho >= 0) {
    const double a = (1.0 - rho) * (1.0 - rho);
    for (Eigen::Index i = 0; i < r; ++i) inv_d[i] = 1.0 / (a + rho * (2.0 - lambda[i]));
  } else {
    const double a = (1.0 + rho) * (1.0 + rho);
    for (Eigen::Index i = 0; i < r; ++i) inv_d[i] = 1.0 / (a - rho * (2.0 + lambda[i]));
  }
  rank2_ = rho != 0;
  if (!rank2_) return true;
  // D^-1 G with G = rho F, and K = I - G' D^-1 G.
  const double* f0 = g.f.data();
  const double* f1 = f0 + r;
  double* dg0 = dg_.data();
  double* dg1 = dg0 + r;
  double s00 = 0, s10 = 0, s11 = 0;
  for (Eigen::Index i = 0; i < r; ++i) {
    dg0[i] = rho * inv_d[i] * f0[i];
    dg1[i] = rho * inv_d[i] * f1[i];
    s00 += f0[i] * dg0[i];
    s10 += f1[i] * dg0[i];
    s11 += f1[i] * dg1[i];
  }
  const double k00 = 1.0 - rho * s00;
  const double k10 = -rho * s10;
  const double k11 = 1.0 - rho * s11;
  if (!(k00 > 0)) return false;
  k00_ = std::sqrt(k00);
  k10_ = k10 / k00_;
  const double rest = k11 - k10_ * k10_;
  if (!(rest > 0)) return false;
  k11_ = std::sqrt(rest);
  return true;
}

double WhitenedSolver::SolveInPlace(Eigen::Ref<Eigen::VectorXd> x) const {
  // M^-1 x = D^-1 x + D^-1 G K^-1 G' D^-1 x; x' M^-1 x = x' D^-1 x + |L^-1 G' D^-1 x|^2.
  const Eigen::Index r = inv_d_.size();
  const double* inv_d = inv_d_.data();
  double* v = x.data();
  double quad = 0;
  if (!rank2_) {
    for (Eigen::Index i = 0; i < r; ++i) {
      quad += v[i] * inv_d[i] * v[i];
      v[i] *= inv_d[i];
    }
    return quad;
  }
  const double* dg0 = dg_.data();
  const double* dg1 = dg0 + r;
  double s0 = 0, s1 = 0;
  for (Eigen::Index i = 0; i < r; ++i) {
    quad += v[i] * inv_d[i] * v[i];
    s0 += dg0[i] * v[i];
    s1 += dg1[i] * v[i];
  }
  const double t0 = s0 / k00_;
  const double t1 = (s1 - k10_ * t0) / k11_;
  quad += t0 * t0 + t1 * t1;
  // K^-1 s = L^-T (L^-1 s).
  const double u1 = t1 / k11_;
  const double u0 = (t0 - k10_ * u1) / k00_;
  for (Eigen::Index i = 0; i < r; ++i) v[i] = v[i] * inv_d[i] + (u0 * dg0[i] + u1 * dg1[i]);
  return quad;
}

void WhitenedSolver::InverseForm(const Eigen::MatrixXd& c, Eigen::MatrixXd* out) const {
  // c' M^-1 c = c' D^-1 c + T'T with T = L^-1 G' D^-1 c (2 x q).
  const Eigen::Index r = c.rows();
  const Eigen::Index q = c.cols();
  const double* inv_d = inv_d_.data();
  const double* dg0 = dg_.data();
  const double* dg1 = dg0 + r;
  if (t_.size() < 2 * q) t_.resize(2 * q);
  for (Eigen::Index j = 0; j < q; ++j) {
    const double* cj = c.data() + j * r;
    for (Eigen::Index i = 0; i <= j; ++i) {
      const double* ci = c.data() + i * r;
      double sum = 0;
      for (Eigen::Index k = 0; k < r; ++k) sum += ci[k] * inv_d[k] * cj[k];
      (*out)(i, j) = (*out)(j, i) = sum;
    }
    if (!rank2_) continue;
    double a = 0, b = 0;
    for (Eigen::Index k = 0; k < r; ++k) {
      a += dg0[k] * cj[k];
      b += dg1[k] * cj[k];
    }
    t_(2 * j) = a / k00_;
    t_(2 * j + 1) = (b - k10_ * t_(2 * j)) / k11_;
    for (Eigen::Index i = 0; i <= j; ++i) {
      (*out)(i, j) += t_(2 * i) * t_(2 * j) + t_(2 * i + 1) * t_(2 * j + 1);
      (*out)(j, i) = (*out)(i, j);
    }
  }
}

DesignBasis AnalyseDesign(const Eigen::MatrixXd& x) {
  DesignBasis b;
  b.n = static_cast<int>(x.rows());
  b.p = static_cast<int>(x.cols());
  if (b.n == 0 || b.p == 0) {
    throw Error("design matrix is empty (" + std::to_string(b.n) + " rows, " + std::to_string(b.p) +
                " columns)");
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
  b.diagonal = DiagonaliseGram(b.kept_gram);
  const Eigen::MatrixXd& v = b.diagonal.v;
  b.first_t = v.transpose() * xk.row(0).transpose();
  b.last_t = v.transpose() * xk.row(n - 1).transpose();
  b.z.resize(n, 2 * r);
  b.z.leftCols(r) = xk * v;
  b.z.rightCols(r) = ApplyLagSum(b.z.leftCols(r));

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

  // The constant series in the span of the kept columns, by least squares on them (full
  // column rank). Not qr.solve() on all columns: it counts pivots against its own
  // eps-sized threshold, not kRankTolerance, so an exactly duplicated column can enter
  // the solve through a rounding-level pivot and spoil the result.
  const Eigen::VectorXd ones = Eigen::VectorXd::Ones(n);
  Eigen::MatrixXd xk_scaled(n, r);
  for (Eigen::Index i = 0; i < r; ++i) xk_scaled.col(i) = xs.col(b.kept[i]);
  const Eigen::VectorXd a_scaled = xk_scaled.householderQr().solve(ones);
  b.constant_k.resize(r);
  for (Eigen::Index i = 0; i < r; ++i) b.constant_k(i) = a_scaled(i) / norms(b.kept[i]);
  b.has_constant = (xk * b.constant_k - ones).norm() <= 1e-9 * std::sqrt(static_cast<double>(n));
  if (!b.has_constant) b.constant_k.setZero();
  return b;
}

}  // namespace fit
}  // namespace boldsum
