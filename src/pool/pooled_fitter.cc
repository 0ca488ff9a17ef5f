#include "pool/pooled_fitter.h"

#include <algorithm>
#include <cmath>
#include <limits>

namespace boldsum {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();
// Columns of Z whose pivot falls below this fraction of the largest pivot count as
// dependent, and the voxel is not fitted (the contrasts would not be estimable).
constexpr double kRankThreshold = 1e-10;
// REML: ratio of the scan grid in tau2 + c, and the largest Newton step in
// log(tau2 + c) (see PooledFitter::SolveReml and Search).
constexpr double kGridRatio = 1.6487212707001282;  // e^(1/2)
constexpr double kMaxLogStep = 3.0;

void MarkInvalid(int n, int k, PooledFit* out) {
  out->valid = false;
  out->n = n;
  out->tau2 = kNaN;
  out->sigma2 = kNaN;
  out->beta.setConstant(k, kNaN);
  out->covariance.setConstant(k, k, kNaN);
  out->iterations = 0;
  out->converged = true;
}

}  // namespace

const char* PoolMethodName(PoolMethod method) {
  switch (method) {
    case PoolMethod::kMixed: return "mixed";
    case PoolMethod::kOls: return "ols";
    case PoolMethod::kFixed: return "fixed";
  }
  return "?";
}

PooledFitter::PooledFitter(const Eigen::MatrixXd& z, PoolMethod method,
                           const RemlOptions& options)
    : z_(z),
      method_(method),
      options_(options),
      k_(static_cast<int>(z.cols())),
      llt_(z.cols()) {
  a_.resize(k_, k_);
  c_.resize(k_, k_);
  b_.resize(k_, k_);
  bc_.resize(k_, k_);
  g_.resize(k_);
  gamma_.resize(k_);
}

bool PooledFitter::PrepareBasis() {
  if (rows_ == basis_rows_) return basis_full_rank_;
  basis_rows_ = rows_;
  const int m = static_cast<int>(rows_.size());
  Eigen::MatrixXd kept(m, k_);
  for (int i = 0; i < m; ++i) kept.row(i) = z_.row(rows_[i]);
  Eigen::ColPivHouseholderQR<Eigen::MatrixXd> qr(kept);
  qr.setThreshold(kRankThreshold);
  basis_full_rank_ = qr.rank() == k_;
  if (!basis_full_rank_) return false;
  q_ = qr.householderQ() * Eigen::MatrixXd::Identity(m, k_);
  const Eigen::MatrixXd r_inverse =
      qr.matrixR().topLeftCorner(k_, k_).triangularView<Eigen::Upper>().solve(
          Eigen::MatrixXd::Identity(k_, k_));
  t_ = qr.colsPermutation() * r_inverse;
  return true;
}

void PooledFitter::Fit(const double* y, const double* v, PooledFit* out) {
  const int n = static_cast<int>(z_.rows());
  rows_.clear();
  for (int i = 0; i < n; ++i) {
    if (std::isfinite(y[i]) && std::isfinite(v[i]) && v[i] > 0) rows_.push_back(i);
  }
  const int m = static_cast<int>(rows_.size());
  if (m <= k_ || !PrepareBasis()) {
    MarkInvalid(m, k_, out);
    return;
  }
  y_.resize(m);
  v_.resize(m);
  for (int i = 0; i < m; ++i) {
    y_[i] = y[rows_[i]];
    v_[i] = v[rows_[i]];
  }
  out->valid = true;
  out->n = m;
  out->iterations = 0;
  out->converged = true;
  out->sigma2 = kNaN;
  if (method_ == PoolMethod::kOls) {
    // Ordinary least squares in the orthonormal basis: gamma = Q'y, Cov = sigma2 I.
    gamma_.noalias() = q_.transpose() * y_;
    const double rss = (y_ - q_ * gamma_).squaredNorm();
    out->tau2 = kNaN;
    out->sigma2 = rss / (m - k_);
    out->beta.noalias() = t_ * gamma_;
    out->covariance.noalias() = out->sigma2 * t_ * t_.transpose();
    return;
  }
  double tau2 = 0.0;
  if (method_ == PoolMethod::kMixed) tau2 = SolveReml(&out->iterations, &out->converged);
  out->tau2 = tau2;
  w_ = (v_.array() + tau2).inverse();
  WeightedFit(w_, out);
}

// Weighted least squares (Aitken 1935, Proc. R. Soc. Edinburgh 55:42-48) in the basis:
// gamma = (Q'WQ)^-1 Q'Wy with covariance (Q'WQ)^-1, then beta = T gamma.
void PooledFitter::WeightedFit(const Eigen::VectorXd& w, PooledFit* out) {
  a_.noalias() = q_.transpose() * w.asDiagonal() * q_;
  g_.noalias() = q_.transpose() * (w.array() * y_.array()).matrix();
  llt_.compute(a_);
  b_ = llt_.solve(Eigen::MatrixXd::Identity(k_, k_));
  gamma_.noalias() = b_ * g_;
  out->beta.noalias() = t_ * gamma_;
  out->covariance.noalias() = t_ * b_ * t_.transpose();
}

PooledFitter::Derivatives PooledFitter::Evaluate(double tau2) {
  const int m = static_cast<int>(y_.size());
  w_ = (v_.array() + tau2).inverse();
  a_.setZero();
  c_.setZero();
  g_.setZero();
  for (int i = 0; i < m; ++i) {
    const double wi = w_[i];
    for (int b = 0; b < k_; ++b) {
      const double qib = q_(i, b);
      g_[b] += wi * qib * y_[i];
      for (int a = b; a < k_; ++a) {
        a_(a, b) += wi * q_(i, a) * qib;
        c_(a, b) += wi * wi * q_(i, a) * qib;
      }
    }
  }
  a_.triangularView<Eigen::StrictlyUpper>() = a_.transpose();
  c_.triangularView<Eigen::StrictlyUpper>() = c_.transpose();
  llt_.compute(a_);
  b_ = llt_.solve(Eigen::MatrixXd::Identity(k_, k_));
  gamma_.noalias() = b_ * g_;
  // p = P y = W (y - Q gamma); s_i = q_i' B q_i, so the leverage is h_i = w_i s_i.
  p_.resize(m);
  s_.resize(m);
  double trace_p = 0, trace_pp = 0, ypy2 = 0, wpp = 0;
  g_.setZero();
  for (int i = 0; i < m; ++i) {
    const double wi = w_[i];
    double fitted = 0, si = 0;
    for (int a = 0; a < k_; ++a) {
      fitted += q_(i, a) * gamma_[a];
      double bq = 0;
      for (int b = 0; b < k_; ++b) bq += b_(a, b) * q_(i, b);
      si += q_(i, a) * bq;
    }
    const double pi = wi * (y_[i] - fitted);
    p_[i] = pi;
    s_[i] = si;
    trace_p += wi * (1.0 - wi * si);
    trace_pp += wi * wi * (1.0 - 2.0 * wi * si);
    ypy2 += pi * pi;
    wpp += wi * pi * pi;
    for (int a = 0; a < k_; ++a) g_[a] += wi * pi * q_(i, a);
  }
  // tr(PP) = sum w^2 - 2 sum w^3 s + tr(BCBC) with C = Q'W^2 Q;
  // y'PPPy = p'Pp = sum w p^2 - g'Bg with g = Q'Wp.
  bc_.noalias() = b_ * c_;
  trace_pp += (bc_.array() * bc_.transpose().array()).sum();
  const double ypppy = wpp - g_.dot(b_ * g_);
  // Restricted log-likelihood up to a constant: -1/2 [log|V| + log|Q'WQ| + y'Py], with
  // y'Py = y'p (log|Z'WZ| differs from log|Q'WQ| by a constant).
  double log_det_v = 0, ypy = 0;
  for (int i = 0; i < m; ++i) {
    log_det_v -= std::log(w_[i]);
    ypy += y_[i] * p_[i];
  }
  const double log_det_a = 2 * llt_.matrixLLT().diagonal().array().log().sum();
  Derivatives d;
  d.log_likelihood = -0.5 * (log_det_v + log_det_a + ypy);
  d.score = 0.5 * (ypy2 - trace_p);
  d.expected = 0.5 * trace_pp;
  d.observed = ypppy - 0.5 * trace_pp;
  return d;
}

// REML for tau2 (Harville 1977, JASA 72:320-338; for the random-effects meta-analysis
// form, Viechtbauer 2005, J. Educ. Behav. Stat. 30:261-293): the maximum of the
// restricted likelihood over tau2 >= 0. It need not be unimodal when the v_i differ
// widely, so the likelihood is first scanned on a geometric grid of tau2 + c
// (c = min v, ratio kGridRatio) from tau2 = 0 up to the bound U = s2 + max(v) beyond
// which the score is negative (s2 = RSS_ols / (n - k); see below). At the best grid
// point: tau2 = 0 when that is tau2 = 0 and the score there is <= 0 (the boundary);
// otherwise the neighbour on its uphill side closes a bracket [lo, hi] with
// score(lo) > 0 > score(hi), and Search refines the root inside it.
// The bound: with P = W^1/2 M W^1/2 (M an orthogonal projection of rank n - k),
// y'PPy <= w_max y'Py <= w_max^2 RSS_ols and tr P >= w_min (n - k), so the score
// (y'PPy - tr P) / 2 < 0 whenever (tau2 + min v)^2 > s2 (tau2 + max v), which holds for
// every tau2 >= s2 + max v.
// iterations counts likelihood evaluations after the one at 0 (grid and Newton steps).
double PooledFitter::SolveReml(int* iterations, bool* converged) {
  *iterations = 0;
  *converged = true;
  const int m = static_cast<int>(y_.size());
  gamma_.noalias() = q_.transpose() * y_;
  const double s2 = (y_ - q_ * gamma_).squaredNorm() / (m - k_);
  const double c = v_.minCoeff();
  const double upper = s2 + v_.maxCoeff();
  grid_x_.clear();
  grid_d_.clear();
  grid_x_.push_back(0.0);
  grid_d_.push_back(Evaluate(0.0));
  size_t best = 0;
  // The first scan point sits at most 9 decades below the bound, so that one tiny v_i
  // cannot stretch the scan (anything below it is inside the first bracket).
  const double first = std::max(c, 1e-9 * upper) * kGridRatio;
  for (double s = first; grid_x_.back() < upper; s *= kGridRatio) {
    grid_x_.push_back(s - c);
    grid_d_.push_back(Evaluate(grid_x_.back()));
    ++*iterations;
    if (grid_d_.back().log_likelihood > grid_d_[best].log_likelihood) best = grid_x_.size() - 1;
  }
  const Derivatives& at_best = grid_d_[best];
  if (best == 0 && !(at_best.score > 0)) return 0.0;
  double lo, hi;
  if (at_best.score > 0) {
    lo = grid_x_[best];
    hi = best + 1 < grid_x_.size() ? grid_x_[best + 1] : kInf;
  } else {
    lo = grid_x_[best - 1];
    hi = grid_x_[best];
  }
  const double x = Search(grid_x_[best], at_best, lo, hi, iterations, converged);
  if (last_likelihood_ < at_best.log_likelihood - 1e-12 * std::abs(at_best.log_likelihood)) {
    // Only when the bracket's lower end had no positive score (a maximum narrower than
    // the grid step), beyond rounding: keep the best point seen and say so.
    *converged = false;
    return grid_x_[best];
  }
  return x;
}

// Refines a score root inside [lo, hi] from x (with its derivatives d); lo and hi move
// to every new point by the sign of its score. Newton steps are taken in
// theta = log(tau2 + c), c = min(v): with all v_i equal the restricted likelihood is
// concave in theta. There l_theta = s S and l_theta_theta = s S - s^2 J (s = tau2 + c,
// S the score, J the observed information), so the step is S / (s J - S); where that
// denominator is not positive, S / (s I) with the expected information I (uphill as
// well). A step that leaves the bracket is replaced by its midpoint in theta. Stops when
// |step| <= relative_tolerance * tau2. Leaves the log-likelihood at the result in
// last_likelihood_.
double PooledFitter::Search(double x, Derivatives d, double lo, double hi, int* iterations,
                            bool* converged) {
  const double c = v_.minCoeff();
  for (int it = 1;; ++it) {
    if (d.score > 0) {
      lo = x;
    } else if (d.score < 0) {
      hi = x;
    } else {
      break;
    }
    if (it > options_.max_iterations) {
      *converged = false;
      break;
    }
    const double s = x + c;
    const double curvature = s * d.observed - d.score;
    double step = d.score / (curvature > 0 ? curvature : s * d.expected);
    step = std::clamp(step, -kMaxLogStep, kMaxLogStep);
    double next = s * std::exp(step) - c;
    if (!(next > lo && next < hi)) {
      // A step too small to move x off a bracket end has converged.
      if (hi == kInf || next == x) break;
      next = std::sqrt((lo + c) * (hi + c)) - c;
    }
    ++*iterations;
    const double change = std::abs(next - x);
    x = next;
    d = Evaluate(x);
    if (change <= options_.relative_tolerance * x) break;
  }
  last_likelihood_ = d.log_likelihood;
  return x;
}

PooledFit FitPooled(const Eigen::MatrixXd& z, const Eigen::VectorXd& y, const Eigen::VectorXd& v,
                    PoolMethod method, const RemlOptions& options) {
  if (y.size() != z.rows() || v.size() != z.rows()) {
    throw Error("FitPooled: z has " + std::to_string(z.rows()) + " rows but y has " +
                std::to_string(y.size()) + " and v " + std::to_string(v.size()) + " values");
  }
  PooledFitter fitter(z, method, options);
  PooledFit fit;
  fitter.Fit(y.data(), v.data(), &fit);
  return fit;
}

}  // namespace boldsum
