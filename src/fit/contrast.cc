// EstimateContrast: C beta and sigma^2 C (X'V^-1 X)^- C' per voxel, rebuilt from the
// run's Gram matrices at each voxel's rho: with V, M(rho) of design_basis.h,
// C_k (X_k'V^-1 X_k)^-1 C_k' = (V'C_k')' M(rho)^-1 (V'C_k').
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "boldsum/error.h"
#include "boldsum/fit.h"
#include "fit/design_basis.h"
#include "fit/parallel.h"

namespace boldsum {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Relative tolerance of the estimability test below: it compares quantities computed from
// normal equations (relative error ~ eps * cond(X_kept)^2, at most ~1e-2 at the rank
// tolerance but ~1e-12 for ordinary designs), so it is looser than the rank tolerance.
constexpr double kEstimableTolerance = 1e-6;

// Rows of C lie in the row space of X. With unit-norm columns X_s = X diag(1/n) and the
// columns not kept written as X_s,d = X_s,k T (T from the normal equations of the kept
// columns), the row space is {(u, T'u)}: so a row c is estimable iff, with c_s = c ./ n,
// || c_s,d - T' c_s,k || <= tol * || c_s ||. Zero columns (n = 0) have zero T rows.
bool AreRowsEstimable(const DesignGram& gram, const std::vector<int>& kept,
                      const Eigen::MatrixXd& c) {
  const Eigen::Index p = gram.xtx.rows();
  std::vector<char> is_kept(static_cast<size_t>(p), 0);
  for (int k : kept) is_kept[static_cast<size_t>(k)] = 1;
  std::vector<int> dropped;
  for (int j = 0; j < p; ++j) {
    if (!is_kept[static_cast<size_t>(j)]) dropped.push_back(j);
  }
  if (dropped.empty()) return true;
  const Eigen::VectorXd norms = gram.xtx.diagonal().cwiseSqrt();
  auto unit = [&](int j) { return norms(j) > 0 ? 1.0 / norms(j) : 0.0; };
  const Eigen::Index r = static_cast<Eigen::Index>(kept.size());
  const Eigen::Index d = static_cast<Eigen::Index>(dropped.size());
  Eigen::MatrixXd kk(r, r), kd(r, d);
  for (Eigen::Index i = 0; i < r; ++i) {
    for (Eigen::Index j = 0; j < r; ++j) {
      kk(i, j) = gram.xtx(kept[i], kept[j]) * unit(kept[i]) * unit(kept[j]);
    }
    for (Eigen::Index j = 0; j < d; ++j) {
      kd(i, j) = gram.xtx(kept[i], dropped[j]) * unit(kept[i]) * unit(dropped[j]);
    }
  }
  const Eigen::MatrixXd t = kk.llt().solve(kd);  // r x d
  for (Eigen::Index row = 0; row < c.rows(); ++row) {
    Eigen::VectorXd ck(r), cd(d);
    for (Eigen::Index i = 0; i < r; ++i) {
      ck(i) = norms(kept[i]) > 0 ? c(row, kept[i]) / norms(kept[i]) : 0.0;
    }
    for (Eigen::Index j = 0; j < d; ++j) {
      // A weight on a zero column can never be estimated.
      if (norms(dropped[j]) == 0) {
        if (c(row, dropped[j]) != 0) return false;
        cd(j) = 0;
      } else {
        cd(j) = c(row, dropped[j]) / norms(dropped[j]);
      }
    }
    const double scale = std::sqrt(ck.squaredNorm() + cd.squaredNorm());
    if ((cd - t.transpose() * ck).norm() > kEstimableTolerance * scale) return false;
  }
  return true;
}

}  // namespace

bool IsContrastEstimable(const RunFit& fit, const Eigen::MatrixXd& c) {
  if (c.rows() < 1 || c.cols() != fit.beta.rows()) {
    throw Error("contrast matrix is " + std::to_string(c.rows()) + " x " +
                std::to_string(c.cols()) + "; it needs at least one row and " +
                std::to_string(fit.beta.rows()) + " columns (one per design column)");
  }
  return AreRowsEstimable(fit.gram, fit.kept_columns, c);
}

std::vector<ContrastEstimate> EstimateContrasts(const RunFit& fit,
                                                const std::vector<Eigen::MatrixXd>& contrasts,
                                                const FitOptions& options) {
  const Eigen::Index p = fit.beta.rows();
  const Eigen::Index n_vox = fit.beta.cols();
  if (options.threads < 1) {
    throw Error("FitOptions::threads = " + std::to_string(options.threads) +
                "; it must be at least 1");
  }
  for (const Eigen::MatrixXd& c : contrasts) {
    if (c.rows() < 1 || c.cols() != p) {
      throw Error("contrast matrix is " + std::to_string(c.rows()) + " x " +
                  std::to_string(c.cols()) + "; it needs at least one row and " +
                  std::to_string(p) + " columns (one per design column)");
    }
    if (!c.allFinite()) throw Error("contrast matrix has a non-finite weight");
  }
  const Eigen::Index r = static_cast<Eigen::Index>(fit.kept_columns.size());
  std::vector<ContrastEstimate> out(contrasts.size());
  // Per estimable contrast: C on the kept columns (q x r) and V'C_k' (r x q).
  std::vector<size_t> estimable;
  std::vector<Eigen::MatrixXd> ck(contrasts.size()), ct(contrasts.size());
  for (size_t k = 0; k < contrasts.size(); ++k) {
    const Eigen::MatrixXd& c = contrasts[k];
    const Eigen::Index q = c.rows();
    ContrastEstimate& e = out[k];
    e.q = static_cast<int>(q);
    e.dof = fit.dof;
    e.estimable = AreRowsEstimable(fit.gram, fit.kept_columns, c);
    e.effect = Eigen::MatrixXd::Constant(q, n_vox, kNaN);
    e.covariance = Eigen::MatrixXd::Constant(q * q, n_vox, kNaN);
    e.valid.assign(static_cast<size_t>(n_vox), 0);
    if (!e.estimable) continue;
    estimable.push_back(k);
    ck[k].resize(q, r);
    for (Eigen::Index i = 0; i < r; ++i) ck[k].col(i) = c.col(fit.kept_columns[i]);
  }
  if (estimable.empty()) return out;
  const fit::DiagonalGram diagonal =
      fit::DiagonaliseGram(fit::SelectKept(fit.gram, fit.kept_columns));
  for (size_t k : estimable) ct[k] = diagonal.v.transpose() * ck[k].transpose();

  // One factorisation of M(rho) per voxel serves every contrast; each contrast's
  // arithmetic is the same as when it is estimated alone.
  fit::ForEachChunk(n_vox, options.threads, [&](Eigen::Index v0, Eigen::Index v1) {
    fit::WhitenedSolver solver(r);
    std::vector<Eigen::MatrixXd> cov(contrasts.size());
    for (size_t k : estimable) cov[k].resize(contrasts[k].rows(), contrasts[k].rows());
    Eigen::VectorXd beta_k(r);
    for (Eigen::Index v = v0; v < v1; ++v) {
      if (!fit.valid[static_cast<size_t>(v)]) continue;
      if (!solver.Factor(diagonal, fit.rho(v))) continue;
      for (Eigen::Index i = 0; i < r; ++i) beta_k(i) = fit.beta(fit.kept_columns[i], v);
      for (size_t k : estimable) {
        ContrastEstimate& e = out[k];
        const Eigen::Index q = e.q;
        solver.InverseForm(ct[k], &cov[k]);
        cov[k] *= fit.sigma2(v);
        e.effect.col(v).noalias() = ck[k] * beta_k;
        e.covariance.col(v) = Eigen::Map<const Eigen::VectorXd>(cov[k].data(), q * q);
        bool ok = true;
        for (Eigen::Index i = 0; i < q; ++i) {
          ok = ok && cov[k](i, i) > 0 && std::isfinite(cov[k](i, i));
        }
        e.valid[static_cast<size_t>(v)] = ok;
      }
    }
  });
  return out;
}

ContrastEstimate EstimateContrast(const RunFit& fit, const Eigen::MatrixXd& c,
                                  const FitOptions& options) {
  return EstimateContrasts(fit, {c}, options).front();
}

}  // namespace boldsum
