// The streamed autocorrelations equal the batch ones for any split into blocks; the
// Ljung-Box arguments are checked. (Values against statsmodels: test_ljung_box.py.)
#include "stats/ljung_box.h"

#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <cmath>

#include "boldsum/error.h"

namespace boldsum {
namespace {

RC_GTEST_PROP(Autocorrelations, StreamedEqualsBatchForAnyBlocks, ()) {
  const int n = *rc::gen::inRange(7, 200);
  const int lags = *rc::gen::inRange(1, 6);
  const int series = *rc::gen::inRange(1, 4);
  Eigen::MatrixXd x(n, series);
  for (int j = 0; j < series; ++j) {
    for (int t = 0; t < n; ++t) x(t, j) = *rc::gen::inRange(-1000, 1000) / 100.0;
  }
  AutocorrelationAccumulator accumulator(series, lags);
  for (int start = 0; start < n;) {
    const int rows = std::min(n - start, *rc::gen::inRange(1, 40));
    accumulator.Add(x.middleRows(start, rows));
    start += rows;
  }
  const Eigen::MatrixXd streamed = accumulator.Autocorrelations();
  for (int j = 0; j < series; ++j) {
    const Eigen::VectorXd column = x.col(j);
    const std::vector<double> batch = SampleAutocorrelations(column.data(), n, lags);
    const double mean = column.mean();
    const double variance = (column.array() - mean).square().mean();
    for (int k = 0; k < lags; ++k) {
      if (std::isnan(batch[k])) {
        RC_ASSERT(std::isnan(streamed(k, j)));
      } else if (!std::isnan(streamed(k, j))) {
        // Both are exact in arithmetic. The streamed sums are centred at the end, so their
        // rounding grows with n (mean / sd)^2 times eps: allow 64 n eps (1 + mean^2 / var).
        const double tolerance = 64.0 * n * 2.2e-16 * (1.0 + mean * mean / variance);
        RC_ASSERT(std::abs(streamed(k, j) - batch[k]) <= tolerance);
      }
    }
  }
}

TEST(Autocorrelations, ConstantSeriesHasNone) {
  const std::vector<double> x(20, 3.0);
  for (double r : SampleAutocorrelations(x.data(), 20, 5)) EXPECT_TRUE(std::isnan(r));
}

TEST(LjungBox, ChecksItsArguments) {
  const std::vector<double> r = {0.1, -0.05, 0.02, 0.0, 0.01};
  EXPECT_THROW(LjungBox(r, 5, 1), Error);    // n must exceed the lags
  EXPECT_THROW(LjungBox(r, 100, 5), Error);  // no degrees of freedom left
  EXPECT_THROW(LjungBox(r, 100, -1), Error);
  const LjungBoxResult ok = LjungBox(r, 100, 1);
  EXPECT_EQ(ok.dof, 4);
  EXPECT_GT(ok.p, 0.0);
  EXPECT_LT(ok.p, 1.0);
  const LjungBoxResult missing = LjungBox({0.1, std::nan(""), 0, 0, 0}, 100, 1);
  EXPECT_TRUE(std::isnan(missing.q) && std::isnan(missing.p));
}

}  // namespace
}  // namespace boldsum
