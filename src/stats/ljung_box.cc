#include "stats/ljung_box.h"

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
      lagged_(Eigen::MatrixXd::Zero(max_lag, n_series)),
      head_(0, n_series),
      recent_(0, n_series) {
  if (max_lag < 1) throw Error("autocorrelations need a maximum lag of at least 1");
}

void AutocorrelationAccumulator::Add(const Eigen::MatrixXd& block) {
  if (block.cols() != sum_.size()) {
    throw Error("autocorrelation block has " + std::to_string(block.cols()) + " series; expected " +
                std::to_string(sum_.size()));
  }
  const Eigen::Index b = block.rows();
  if (b == 0) return;
  const Eigen::Index before = recent_.rows();
  Eigen::MatrixXd joined(before + b, block.cols());
  joined << recent_, block;
  for (int k = 1; k <= max_lag_; ++k) {
    // Rows of this block whose value k steps back exists.
    const Eigen::Index start = std::max<Eigen::Index>(before, k);
    const Eigen::Index rows = before + b - start;
    if (rows <= 0) continue;
    lagged_.row(k - 1) +=
        (joined.middleRows(start, rows).array() * joined.middleRows(start - k, rows).array())
            .colwise()
            .sum()
            .matrix();
  }
  sum_ += block.colwise().sum();
  sum_squares_ += block.array().square().colwise().sum().matrix();
  if (head_.rows() < max_lag_) {
    const Eigen::Index take = std::min<Eigen::Index>(max_lag_ - head_.rows(), b);
    Eigen::MatrixXd head(head_.rows() + take, block.cols());
    head << head_, block.topRows(take);
    head_.swap(head);
  }
  const Eigen::Index keep = std::min<Eigen::Index>(max_lag_, joined.rows());
  recent_ = joined.bottomRows(keep);
  n_ += static_cast<int>(b);
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
      tail_part += recent_(recent_.rows() - k, j);  // sum_{t>=n-k} x_t
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
