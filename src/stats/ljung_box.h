// Serial correlation left in a residual series: sample autocorrelations and the
// portmanteau statistic of Ljung & Box (1978, Biometrika 65:297-303).
#pragma once

#include <Eigen/Dense>
#include <vector>

namespace boldsum {

// Sample autocorrelations r_1..r_max_lag of x_0..x_{n-1} about the series mean m:
//   r_k = sum_{t=k}^{n-1} (x_t - m)(x_{t-k} - m) / sum_{t=0}^{n-1} (x_t - m)^2
// (Box & Jenkins; the definition of statsmodels' acf with demean=True). Requires
// n > max_lag >= 1. Every r_k is NaN when the series is constant or not finite.
std::vector<double> SampleAutocorrelations(const double* x, int n, int max_lag);

// The same autocorrelations for many series at once, from one pass over blocks of
// consecutive values (rows = time, columns = series), so that no series is ever held
// whole. Sums are kept about zero and centred at the end, which is exact in
// arithmetic; rounding grows with n (mean / sd)^2 eps, negligible for residuals, whose
// mean is small against their spread. A series whose spread is lost in that rounding
// counts as constant (NaN).
class AutocorrelationAccumulator {
 public:
  AutocorrelationAccumulator(int n_series, int max_lag);
  // Appends the next rows of every series. Throws Error on a column-count mismatch.
  void Add(const Eigen::MatrixXd& block);
  int n_values() const { return n_; }
  // max_lag x n_series; column j as SampleAutocorrelations gives for series j.
  // Throws Error unless more than max_lag values were added.
  Eigen::MatrixXd Autocorrelations() const;

 private:
  int max_lag_;
  int n_ = 0;
  Eigen::RowVectorXd sum_, sum_squares_;
  Eigen::MatrixXd lagged_;  // row k-1: sum_{t>=k} x_t x_{t-k}
  Eigen::MatrixXd head_;    // rows 0..min(n, max_lag)-1: the first values
  Eigen::MatrixXd recent_;  // rows 0..min(n, max_lag)-1: the last values, oldest first
  std::vector<double> joined_;  // one series' recent values and its new block
};

struct LjungBoxResult {
  double q = 0.0;  // Q = n (n + 2) sum_{k=1}^{h} r_k^2 / (n - k)
  int dof = 0;     // h - model_df
  double p = 0.0;  // P(chi2_dof > Q), the upper tail
};

// Q from the autocorrelations r_1..r_h of a series of n values, referred to chi-square
// with h - model_df degrees of freedom (Ljung & Box 1978, eq. 2.2; model_df is the number
// of fitted ARMA parameters, as in statsmodels' acorr_ljungbox). Requires n > h and
// 0 <= model_df < h; NaN autocorrelations give NaN q and p.
LjungBoxResult LjungBox(const std::vector<double>& r, int n, int model_df);

}  // namespace boldsum
