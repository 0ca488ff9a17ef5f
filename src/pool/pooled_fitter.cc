#include "pool/pooled_fitter.h"

#include <cmath>
#include <limits>

namespace boldsum {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();
// Columns of Z whose pivot falls below this fraction of the largest pivot count as
// dependent, and the voxel is not fitted (the contrasts would not be estimable).
constexpr double kRankThreshold = 1e-10;

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
    : z_(z), method_(method), options_(options), k_(static_cast<int>(z.cols())) {
  a_.resize(k_, k_);
  c_.resize(k_, k_);
  b_.resize(k_, k_);
  bc_.resize(k_, k_);
  g_.resize(k_);
  gamma_.resize(k_);
  llt_ = Eigen::LLT<Eigen::MatrixXd>(k_);
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
  Derivatives d;
  d.score = 0.5 * (ypy2 - trace_p);
  d.expected = 0.5 * trace_pp;
  d.observed = ypppy - 0.5 * trace_pp;
  return d;
}

// REML for tau2 (Harville 1977, JASA 72:320-338; for the random-effects meta-analysis
// form and its Fisher scoring, Viechtbauer 2005, J. Educ. Behav. Stat. 30:261-293).
// The maximum lies at tau2 = 0 when the score there is <= 0. Otherwise the score root
// is found by Newton steps (observed information; expected information where the
// observed one is not positive, which still points uphill) kept inside a bracket
// [lo, hi] with score(lo) > 0 > score(hi), bisecting whenever a step leaves it.
// Stops when |step| <= relative_tolerance * tau2.
double PooledFitter::SolveReml(int* iterations, bool* converged) {
  *iterations = 0;
  *converged = true;
  Derivatives d = Evaluate(0.0);
  if (!(d.score > 0)) return 0.0;
  const int m = static_cast<int>(y_.size());
  // Start from the moment guess s2 - mean(v) (exact when all v_i are equal), else from 0.
  gamma_.noalias() = q_.transpose() * y_;
  const double s2 = (y_ - q_ * gamma_).squaredNorm() / (m - k_);
  double x = s2 - v_.mean();
  double lo = 0.0, hi = kInf;
  if (x > 0) {
    d = Evaluate(x);
  } else {
    x = 0.0;
  }
  for (int it = 1; it <= options_.max_iterations; ++it) {
    if (d.score > 0) {
      lo = x;
    } else if (d.score < 0) {
      hi = x;
    } else {
      return x;
    }
    const double step = d.score / (d.observed > 0 ? d.observed : d.expected);
    double next = x + step;
    if (!(next > lo && next < hi)) next = 0.5 * (lo + hi);
    *iterations = it;
    const double change = std::abs(next - x);
    x = next;
    if (change <= options_.relative_tolerance * x) return x;
    d = Evaluate(x);
  }
  *converged = false;
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
