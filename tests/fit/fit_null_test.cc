// False-positive rate on null data: AR(1) noise, cosine drift, no signal.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <random>

#include "boldsum/fit.h"
#include "fit_test_util.h"

namespace boldsum {
namespace {

double FractionAbove(const Eigen::VectorXd& z, double threshold) {
  int count = 0;
  for (Eigen::Index v = 0; v < z.size(); ++v) count += std::abs(z(v)) > threshold;
  return static_cast<double>(count) / static_cast<double>(z.size());
}

// N = 200 volumes (TR 2 s) of a two-condition block design with cosine drift; 4000
// voxels of AR(1) noise, rho uniform in [0.2, 0.6], plus a slow drift in the span of the
// cosine columns; fixed seed. A two-sided test at |z| > 1.96 should reject ~5% of
// voxels (the nominal level). With the bias-corrected AR(1) model the rate must stay at
// most 7%; OLS ignores the positive autocorrelation and is expected far above.
TEST(FitNull, FalsePositiveRateIsNominalWithAr1) {
  const int n = 200, v = 4000;
  const Eigen::MatrixXd x = fit_test::BlockDesign(n, 2.0);
  std::mt19937_64 rng(20240611);
  std::uniform_real_distribution<double> uniform(0.2, 0.6);
  Eigen::VectorXd rhos(v);
  for (int i = 0; i < v; ++i) rhos(i) = uniform(rng);
  Eigen::MatrixXd y = fit_test::Ar1Noise(n, rhos, &rng);
  std::normal_distribution<double> normal;
  for (int i = 0; i < v; ++i) y.col(i).array() += 800.0 + 2.0 * normal(rng) * x.col(2).array();
  y = fit_test::AsFloat(y);
  Eigen::MatrixXd c = Eigen::MatrixXd::Zero(1, x.cols());
  c(0, 0) = 1.0;
  double rate[2];
  for (NoiseModel noise : {NoiseModel::kAr1, NoiseModel::kNone}) {
    FitOptions options;
    options.noise = noise;
    options.threads = 2;
    MatrixSource source(y);
    const RunFit fit = FitRun(x, &source, options);
    ASSERT_EQ(fit.n_constant + fit.n_nonfinite, 0);
    const ContrastTest test = TestContrast(EstimateContrast(fit, c, options), false, 2);
    rate[noise == NoiseModel::kNone] = FractionAbove(test.z, 1.96);
  }
  std::printf("null |z| > 1.96: AR(1) %.2f%%, OLS (noise none) %.2f%% of %d voxels\n",
              100 * rate[0], 100 * rate[1], v);
  EXPECT_LE(rate[0], 0.07);
  // Binomial(4000, 0.05) has sd 0.34%: a rate below 3.5% would mean over-correction.
  EXPECT_GE(rate[0], 0.035);
  EXPECT_GT(rate[1], rate[0]);
}

}  // namespace
}  // namespace boldsum
