#include "design/drift.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>

namespace boldsum {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

TEST(CosineDriftCount, FollowsTheContractFormula) {
  // J = floor(2 N TR / cutoff), worked by hand from the contract.
  EXPECT_EQ(CosineDriftCount(100, 2.0, 128.0), 3);   // 400 / 128 = 3.125
  EXPECT_EQ(CosineDriftCount(200, 0.8, 100.0), 3);   // 320 / 100 = 3.2
  EXPECT_EQ(CosineDriftCount(64, 2.0, 128.0), 2);    // 256 / 128 = 2 exactly
  EXPECT_EQ(CosineDriftCount(10, 2.5, 128.0), 0);    // 50 / 128
  EXPECT_EQ(CosineDriftCount(400, 0.72, 90.0), 6);   // 576 / 90 = 6.4
  bool capped = true;
  EXPECT_EQ(CosineDriftCount(300, 2.0, 128.0, &capped), 9);  // 1200 / 128 = 9.375
  EXPECT_FALSE(capped);
  // Cap at N - 1: j = N would be identically zero.
  EXPECT_EQ(CosineDriftCount(10, 2.0, 1.0, &capped), 9);
  EXPECT_TRUE(capped);
}

TEST(CosineDrift, OrthonormalAndOrthogonalToTheIntercept) {
  for (int n : {5, 64, 257, 2000}) {
    const int count = std::min(n - 1, 40);
    const Eigen::MatrixXd d = CosineDrift(n, count);
    const Eigen::MatrixXd gram = d.transpose() * d;
    // DCT-II basis vectors are exactly orthonormal; rounding grows like eps * sqrt(N).
    EXPECT_LT((gram - Eigen::MatrixXd::Identity(count, count)).cwiseAbs().maxCoeff(),
              64 * kEps * std::sqrt(n));
    EXPECT_LT((d.transpose() * Eigen::VectorXd::Ones(n)).cwiseAbs().maxCoeff(), 64 * kEps * n);
  }
}

TEST(CosineDrift, ValuesFollowTheContract) {
  const Eigen::MatrixXd d = CosineDrift(10, 3);
  const double pi = std::acos(-1.0);
  for (int j = 1; j <= 3; ++j) {
    for (int n = 0; n < 10; ++n) {
      EXPECT_NEAR(d(n, j - 1), std::sqrt(0.2) * std::cos(pi * j * (n + 0.5) / 10), 4 * kEps);
    }
  }
}

TEST(LegendreDrift, MatchesClosedForms) {
  // P1 = x, P2 = (3x^2 - 1)/2, P3 = (5x^3 - 3x)/2, P4 = (35x^4 - 30x^2 + 3)/8 (closed forms
  // recalled from memory; test_design_probe.py also checks numpy.polynomial.legendre).
  const int n = 11;
  const Eigen::MatrixXd d = LegendreDrift(n, 4);
  for (int i = 0; i < n; ++i) {
    const double x = -1.0 + 2.0 * i / (n - 1);
    EXPECT_NEAR(d(i, 0), x, 4 * kEps);
    EXPECT_NEAR(d(i, 1), (3 * x * x - 1) / 2, 8 * kEps);
    EXPECT_NEAR(d(i, 2), (5 * x * x * x - 3 * x) / 2, 16 * kEps);
    EXPECT_NEAR(d(i, 3), (35 * std::pow(x, 4) - 30 * x * x + 3) / 8, 32 * kEps);
  }
  EXPECT_EQ(LegendreDrift(1, 2)(0, 0), 0.0);  // a single volume sits at x = 0
  EXPECT_EQ(LegendreDrift(7, 0).cols(), 0);
}

}  // namespace
}  // namespace boldsum
