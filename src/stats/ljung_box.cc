#include "stats/ljung_box.h"

#include <algorithm>
#include <boost/math/distributions/chi_squared.hpp>
#include <cmath>
#include <limits>
#include <string>

#include "boldsum/error.h"
#include "stats/boost_policy.h"

namespace boldsum {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

void RequireLags(int n, int max_lag) {
  if (max_lag < 1 || n <= max_lag) {
    throw Error("autocorrelations up to lag " + std::to_string(max_lag) + " need more than " +
                std::to_string(max_lag) + " values; the series has " + std::to_string(n));
  }
}

}  // namespace

std::vector<double> SampleAutocorrelations(const double* x, int n, int max_lag) {
  RequireLags(n, max_lag);
  double mean = 0.0;
  for (int t = 0; t < n; ++t) mean += x[t];
  mean /= n;
  double c0 = 0.0;
  for (int t = 0; t < n; ++t) c0 += (x[t] - mean) * (x[t] - mean);
  std::vector<double> r(static_cast<size_t>(max_lag), kNaN);
  if (!(c0 > 0.0) || !std::isfinite(c0)) return r;
  for (int k = 1; k <= max_lag; ++k) {
    double ck = 0.0;
    for (int t = k; t < n; ++t) ck += (x[t] - mean) * (x[t - k] - mean);
    r[static_cast<size_t>(k - 1)] = ck / c0;
  }
  return r;
}

AutocorrelationAccumulator::AutocorrelationAccumulator(int n_series, int max_lag)
    : max_lag_(max_lag),
      sum_(Eigen::RowVectorXd::Zero(n_series)),
      sum_squares_(Eigen::RowVectorXd::Zero(n_series)),
      lagged_(Eigen::MatrixXd::Zero(std::max(max_lag, 1), n_series)),
      head_(Eigen::MatrixXd::Zero(std::max(max_lag, 1), n_series)),
      recent_(Eigen::MatrixXd::Zero(std::max(max_lag, 1), n_series)) {
  if (max_lag < 1) throw Error("autocorrelations need a maximum lag of at least 1");
}

void AutocorrelationAccumulator::Add(const Eigen::MatrixXd& block) {
  if (block.cols() != sum_.size()) {
    throw Error("autocorrelation block has " + std::to_string(block.cols()) + " series; expected " +
                std::to_string(sum_.size()));
  }
  const int b = static_cast<int>(block.rows());
  if (b == 0) return;
  const int before = std::min(n_, max_lag_);  // values kept from earlier blocks
  const int keep = std::min(max_lag_, before + b);
  joined_.resize(static_cast<size_t>(before + b));
  // One series at a time (its values are contiguous), with no allocation per block.
  for (Eigen::Index j = 0; j < block.cols(); ++j) {
    double* joined = joined_.data();
    const double* x = block.col(j).data();
    std::copy(recent_.col(j).data(), recent_.col(j).data() + before, joined);
    std::copy(x, x + b, joined + before);
    for (int k = 1; k <= max_lag_; ++k) {
      // Rows of this block whose value k steps back exists.
      double s = 0.0;
      for (int t = std::max(before, k); t < before + b; ++t) s += joined[t] * joined[t - k];
      lagged_(k - 1, j) += s;
    }
    double sum = 0.0, squares = 0.0;
    for (int t = 0; t < b; ++t) {
      sum += x[t];
      squares += x[t] * x[t];
    }
    sum_(j) += sum;
    sum_squares_(j) += squares;
    for (int t = n_; t < max_lag_ && t - n_ < b; ++t) head_(t, j) = x[t - n_];
    std::copy(joined + before + b - keep, joined + before + b, recent_.col(j).data());
  }
  n_ += b;
}

Eigen::MatrixXd AutocorrelationAccumulator::Autocorrelations() const {
  RequireLags(n_, max_lag_);
  const Eigen::Index series = sum_.size();
  Eigen::MatrixXd r(max_lag_, series);
  const double n = n_;
  for (Eigen::Index j = 0; j < series; ++j) {
    const double mean = sum_(j) / n;
    // sum (x - m)^2 and, per lag, sum_{t>=k} (x_t - m)(x_{t-k} - m)
    //   = S_k - m (sum_{t>=k} x_t + sum_{t<n-k} x_t) + (n - k) m^2.
    const double c0 = sum_squares_(j) - n * mean * mean;
    // A spread lost in the rounding of the sum of squares counts as none (constant).
    const bool spread = c0 > 64.0 * n * std::numeric_limits<double>::epsilon() * sum_squares_(j);
    double head_part = 0.0, tail_part = 0.0;
    for (int k = 1; k <= max_lag_; ++k) {
      head_part += head_(k - 1, j);                 // sum_{t<k} x_t
      tail_part += recent_(max_lag_ - k, j);  // sum_{t>=n-k} x_t (n > max_lag)
      const double ck = lagged_(k - 1, j) - mean * ((sum_(j) - head_part) + (sum_(j) - tail_part)) +
                        (n - k) * mean * mean;
      r(k - 1, j) = (spread && std::isfinite(c0)) ? ck / c0 : kNaN;
    }
  }
  return r;
}

LjungBoxResult LjungBox(const std::vector<double>& r, int n, int model_df) {
  const int h = static_cast<int>(r.size());
  if (h < 1 || n <= h || model_df < 0 || model_df >= h) {
    throw Error("Ljung-Box test of " + std::to_string(h) + " lags on " + std::to_string(n) +
                " values with " + std::to_string(model_df) +
                " fitted parameters; it needs n > lags > fitted parameters >= 0");
  }
  LjungBoxResult result;
  result.dof = h - model_df;
  double sum = 0.0;
  for (int k = 1; k <= h; ++k)
    sum += r[static_cast<size_t>(k - 1)] * r[static_cast<size_t>(k - 1)] / (n - k);
  result.q = static_cast<double>(n) * (n + 2.0) * sum;
  if (!std::isfinite(result.q)) {
    result.q = kNaN;
    result.p = kNaN;
    return result;
  }
  const boost::math::chi_squared_distribution<double, StatsPolicy> chi2(result.dof);
  result.p = boost::math::cdf(boost::math::complement(chi2, result.q));
  return result;
}

}  // namespace boldsum
