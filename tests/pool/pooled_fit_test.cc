// FitPooled: exact fits first, then the published closed forms and identities, then
// properties on random data. Naive references are written out with dense matrices.
#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <cmath>
#include <limits>
#include <random>

#include "boldsum/pool.h"
#include "pool_test_util.h"

namespace boldsum {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

TEST(FitPooledExact, NoiseFreeEstimatesGiveTauZeroAndExactBeta) {
  // y = Z beta exactly: y'PPy = 0 < tr P, so the REML score at 0 is negative and the
  // maximum sits on the boundary; WLS then reproduces beta.
  std::mt19937_64 random(1);
  const Eigen::MatrixXd z = RandomDesign(12, 3, &random);
  const Eigen::Vector3d beta(0.5, -2.0, 3.0);
  const Eigen::VectorXd y = z * beta;
  const Eigen::VectorXd v = RandomVariances(12, &random);
  for (PoolMethod method : {PoolMethod::kMixed, PoolMethod::kFixed, PoolMethod::kOls}) {
    const PooledFit fit = FitPooled(z, y, v, method);
    ASSERT_TRUE(fit.valid);
    EXPECT_EQ(fit.n, 12);
    // 100 eps: a few orthogonal transformations and triangular solves of a
    // well-conditioned 12 x 3 design.
    EXPECT_LE((fit.beta - beta).norm(), 100 * kEps * beta.norm()) << PoolMethodName(method);
    if (method != PoolMethod::kOls) {
      EXPECT_EQ(fit.tau2, 0.0);
    }
  }
}

TEST(FitPooledExact, FixedIsWeightedLeastSquares) {
  // Aitken (1935) generalised least squares with W = diag(1/v), against the normal
  // equations solved densely.
  std::mt19937_64 random(2);
  const Eigen::MatrixXd z = RandomDesign(15, 2, &random);
  const Eigen::VectorXd v = RandomVariances(15, &random);
  const Eigen::VectorXd y = RandomEstimates(z, v, 0.7, &random);
  const PooledFit fit = FitPooled(z, y, v, PoolMethod::kFixed);
  const Eigen::MatrixXd w = v.cwiseInverse().asDiagonal();
  const Eigen::MatrixXd cov = (z.transpose() * w * z).inverse();
  const Eigen::VectorXd beta = cov * z.transpose() * w * y;
  EXPECT_LE((fit.beta - beta).norm(), 1e-12 * beta.norm());
  EXPECT_LE((fit.covariance - cov).norm(), 1e-12 * cov.norm());
}

TEST(FitPooledExact, OlsMatchesNormalEquations) {
  std::mt19937_64 random(3);
  const Eigen::MatrixXd z = RandomDesign(20, 3, &random);
  const Eigen::VectorXd v = RandomVariances(20, &random);
  const Eigen::VectorXd y = RandomEstimates(z, v, 1.0, &random);
  const PooledFit fit = FitPooled(z, y, v, PoolMethod::kOls);
  const Eigen::MatrixXd ztz_inverse = (z.transpose() * z).inverse();
  const Eigen::VectorXd beta = ztz_inverse * z.transpose() * y;
  const double sigma2 = (y - z * beta).squaredNorm() / (20 - 3);
  EXPECT_LE((fit.beta - beta).norm(), 1e-12 * beta.norm());
  EXPECT_NEAR(fit.sigma2, sigma2, 1e-12 * sigma2);
  EXPECT_LE((fit.covariance - sigma2 * ztz_inverse).norm(), 1e-12 * sigma2 * ztz_inverse.norm());
  EXPECT_TRUE(std::isnan(fit.tau2));
}

// With equal first-level variances v, Var(y) = (tau2 + v) I is a single variance
// component, whose REML estimate is RSS / (n - k) (Patterson & Thompson 1971,
// Biometrika 58:545-554; Harville 1977, JASA 72:320-338). The restricted likelihood is
// unimodal in tau2 + v, so under tau2 >= 0: tau2 = max(0, s2 - v), s2 = RSS_ols / (n - k).
RC_GTEST_PROP(FitPooledProperty, EqualVariancesGiveTheClosedForm, ()) {
  std::mt19937_64 random(*rc::gen::inRange<uint64_t>(0, 1u << 30));
  const int k = *rc::gen::inRange(1, 4);
  const int n = *rc::gen::inRange(k + 2, 40);
  const double v = *rc::gen::inRange(1, 400) / 100.0;
  const double tau2 = *rc::gen::inRange(0, 5) * 0.5;
  const Eigen::MatrixXd z = RandomDesign(n, k, &random);
  const Eigen::VectorXd vs = Eigen::VectorXd::Constant(n, v);
  const Eigen::VectorXd y = RandomEstimates(z, vs, tau2, &random);
  const Eigen::VectorXd beta_ols = z.colPivHouseholderQr().solve(y);
  const double s2 = (y - z * beta_ols).squaredNorm() / (n - k);
  const double expected = std::max(0.0, s2 - v);
  const PooledFit fit = FitPooled(z, y, vs, PoolMethod::kMixed);
  RC_ASSERT(fit.valid && fit.converged);
  if (expected == 0) {
    RC_ASSERT(fit.tau2 == 0.0);
  } else {
    // 1e-9: REML stops at a 1e-10 relative step; s2 itself carries ~n eps.
    RC_ASSERT(std::abs(fit.tau2 - expected) <= 1e-9 * expected);
  }
  // Equal weights: beta is the OLS estimate whatever tau2 is.
  RC_ASSERT((fit.beta - beta_ols).norm() <= 1e-10 * (1 + beta_ols.norm()));
}

// The REML estimate maximises the restricted log-likelihood (Harville 1977)
// -1/2 [sum log(tau2 + v_i) + log|Z'WZ| + y'Py], evaluated here densely, over tau2 >= 0.
RC_GTEST_PROP(FitPooledProperty, RemlMaximisesTheRestrictedLikelihood, ()) {
  std::mt19937_64 random(*rc::gen::inRange<uint64_t>(0, 1u << 30));
  const int k = *rc::gen::inRange(1, 4);
  const int n = *rc::gen::inRange(k + 2, 30);
  const double tau2_true = *rc::gen::inRange(0, 8) * 0.25;
  const Eigen::MatrixXd z = RandomDesign(n, k, &random);
  const Eigen::VectorXd v = RandomVariances(n, &random);
  const Eigen::VectorXd y = RandomEstimates(z, v, tau2_true, &random);
  const PooledFit fit = FitPooled(z, y, v, PoolMethod::kMixed);
  RC_ASSERT(fit.valid && fit.converged);
  const double best = RestrictedLogLikelihood(z, y, v, fit.tau2);
  const double scale = v.mean() + fit.tau2;
  // Nothing higher on a fine scan (ratio 1.1) from 0 to 100 times the scale. Allowance:
  // rounding of a sum of n logs; the likelihood is flat at the optimum, so a neighbour
  // may tie to this level.
  for (double tau2 = 0; tau2 < 100 * scale; tau2 = tau2 == 0 ? 1e-4 * scale : tau2 * 1.1) {
    RC_ASSERT(RestrictedLogLikelihood(z, y, v, tau2) <= best + 1e-10 * n);
  }
  if (fit.tau2 > 0) {
    // Stationary: the central-difference slope vanishes against the curvature scale.
    const double h = 1e-4 * fit.tau2;
    const double slope = (RestrictedLogLikelihood(z, y, v, fit.tau2 + h) -
                          RestrictedLogLikelihood(z, y, v, fit.tau2 - h)) / (2 * h);
    RC_ASSERT(std::abs(slope) * fit.tau2 <= 1e-5 * n);
  }
  // beta and its covariance are the WLS ones at that tau2.
  const Eigen::MatrixXd w = (v.array() + fit.tau2).inverse().matrix().asDiagonal();
  const Eigen::MatrixXd cov = (z.transpose() * w * z).inverse();
  RC_ASSERT((fit.covariance - cov).norm() <= 1e-10 * cov.norm());
  RC_ASSERT((fit.beta - cov * z.transpose() * w * y).norm() <= 1e-10 * (1 + fit.beta.norm()));
}

// First-level variances spread over six orders of magnitude and tau2 anywhere in that
// range: the likelihood can then have several maxima; the scan still finds the highest
// and the refinement converges. (Beyond ~8 decades the likelihood differences near
// tau2 = 0 fall to rounding level and a voxel may be flagged not converged.)
RC_GTEST_PROP(FitPooledProperty, ConvergesForWidelySpreadVariances, ()) {
  std::mt19937_64 random(*rc::gen::inRange<uint64_t>(0, 1u << 30));
  const int n = *rc::gen::inRange(4, 30);
  const double tau2_true = std::pow(10.0, *rc::gen::inRange(-3, 4));
  std::uniform_real_distribution<double> exponent(-3, 3);
  Eigen::VectorXd v(n);
  for (int i = 0; i < n; ++i) v[i] = std::pow(10.0, exponent(random));
  const Eigen::MatrixXd z = RandomDesign(n, 2, &random);
  const Eigen::VectorXd y = RandomEstimates(z, v, tau2_true, &random);
  const PooledFit fit = FitPooled(z, y, v, PoolMethod::kMixed);
  RC_ASSERT(fit.valid && fit.converged);
  // The scan spans up to ~6.5 decades of tau2 + min(v) in steps of e^(1/2) (~30 points).
  RC_ASSERT(fit.iterations <= 80);
  const double best = RestrictedLogLikelihood(z, y, v, fit.tau2);
  // A local maximum (or the boundary), at least as high as every point of the scan the
  // documented algorithm makes (tau2 + min v on a grid of ratio e^(1/2) up to
  // s2 + max v). Narrower maxima between scan points are not promised.
  const double allowance = 1e-9 * n;  // rounding of sums of n logs
  for (double factor : {0.999, 1.001}) {
    RC_ASSERT(RestrictedLogLikelihood(z, y, v, factor * fit.tau2 + (fit.tau2 == 0 ? 1e-9 : 0)) <=
              best + allowance);
  }
  const Eigen::VectorXd beta_ols = z.colPivHouseholderQr().solve(y);
  const double upper = (y - z * beta_ols).squaredNorm() / (n - 2) + v.maxCoeff();
  for (double s = v.minCoeff(); s - v.minCoeff() < upper; s *= std::exp(0.5)) {
    RC_ASSERT(RestrictedLogLikelihood(z, y, v, s - v.minCoeff()) <= best + allowance);
  }
}

RC_GTEST_PROP(FitPooledProperty, PermutingSubjectsChangesNothing, ()) {
  std::mt19937_64 random(*rc::gen::inRange<uint64_t>(0, 1u << 30));
  const int n = *rc::gen::inRange(5, 40);
  const Eigen::MatrixXd z = RandomDesign(n, 2, &random);
  const Eigen::VectorXd v = RandomVariances(n, &random);
  const Eigen::VectorXd y = RandomEstimates(z, v, *rc::gen::inRange(0, 4) * 0.5, &random);
  std::vector<int> order(n);
  for (int i = 0; i < n; ++i) order[i] = i;
  std::shuffle(order.begin(), order.end(), random);
  Eigen::MatrixXd zp(n, 2);
  Eigen::VectorXd yp(n), vp(n);
  for (int i = 0; i < n; ++i) zp.row(i) = z.row(order[i]), yp[i] = y[order[i]], vp[i] = v[order[i]];
  for (PoolMethod method : {PoolMethod::kMixed, PoolMethod::kOls, PoolMethod::kFixed}) {
    const PooledFit a = FitPooled(z, y, v, method);
    const PooledFit b = FitPooled(zp, yp, vp, method);
    // Only the order of floating-point sums differs.
    RC_ASSERT((a.beta - b.beta).norm() <= 1e-10 * (1 + a.beta.norm()));
    RC_ASSERT((a.covariance - b.covariance).norm() <= 1e-10 * a.covariance.norm());
    if (method == PoolMethod::kMixed) {
      RC_ASSERT(std::abs(a.tau2 - b.tau2) <= 1e-9 * (a.tau2 + v.mean()));
    }
  }
}

TEST(FitPooledMissing, UnusableSubjectsAreDroppedExactly) {
  std::mt19937_64 random(4);
  const int n = 14;
  const Eigen::MatrixXd z = RandomDesign(n, 2, &random);
  const Eigen::VectorXd v = RandomVariances(n, &random);
  const Eigen::VectorXd y = RandomEstimates(z, v, 1.0, &random);
  Eigen::VectorXd y_bad = y, v_bad = v;
  y_bad[1] = std::numeric_limits<double>::quiet_NaN();
  v_bad[4] = 0.0;
  v_bad[7] = -1.0;
  v_bad[9] = std::numeric_limits<double>::infinity();
  const std::vector<int> kept = {0, 2, 3, 5, 6, 8, 10, 11, 12, 13};
  Eigen::MatrixXd zk(kept.size(), 2);
  Eigen::VectorXd yk(kept.size()), vk(kept.size());
  for (size_t i = 0; i < kept.size(); ++i) {
    zk.row(i) = z.row(kept[i]), yk[i] = y[kept[i]], vk[i] = v[kept[i]];
  }
  for (PoolMethod method : {PoolMethod::kMixed, PoolMethod::kOls, PoolMethod::kFixed}) {
    const PooledFit with_gaps = FitPooled(z, y_bad, v_bad, method);
    const PooledFit reduced = FitPooled(zk, yk, vk, method);
    EXPECT_EQ(with_gaps.n, 10);
    // The same rows in the same order: the same arithmetic, bit for bit.
    EXPECT_EQ(with_gaps.beta, reduced.beta);
    EXPECT_EQ(with_gaps.covariance, reduced.covariance);
  }
}

TEST(FitPooledMissing, TooFewSubjectsOrLostRankGiveAnInvalidVoxel) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  Eigen::MatrixXd z(4, 2);
  z << 1, 0, 1, 0, 1, 1, 1, 1;
  const Eigen::VectorXd v = Eigen::VectorXd::Ones(4);
  Eigen::VectorXd y(4);
  y << 1, 2, nan, nan;  // n = 2 = k
  PooledFit fit = FitPooled(z, y, v, PoolMethod::kMixed);
  EXPECT_FALSE(fit.valid);
  EXPECT_EQ(fit.n, 2);
  EXPECT_TRUE(std::isnan(fit.beta[0]) && std::isnan(fit.tau2));
  // Three subjects, but the second column is zero on them: rank 1 < k.
  Eigen::MatrixXd z3(4, 2);
  z3 << 1, 0, 1, 0, 1, 0, 1, 1;
  y << 1, 2, 3, nan;
  fit = FitPooled(z3, y, v, PoolMethod::kOls);
  EXPECT_FALSE(fit.valid);
  EXPECT_EQ(fit.n, 3);
}

TEST(FitPooledReml, DominantAndTinyBetweenSubjectVarianceConverge) {
  std::mt19937_64 random(5);
  const Eigen::MatrixXd z = RandomDesign(40, 2, &random);
  const Eigen::VectorXd v = RandomVariances(40, &random);
  for (double tau2 : {1e-3, 1e3, 1e6}) {
    const Eigen::VectorXd y = RandomEstimates(z, v, tau2, &random);
    const PooledFit fit = FitPooled(z, y, v, PoolMethod::kMixed);
    ASSERT_TRUE(fit.valid);
    EXPECT_TRUE(fit.converged) << tau2;
    // The scan runs from tau2 = 0 to ~s2 + max v in steps of e^(1/2) in tau2 + min v:
    // ~32 points for tau2 = 1e6 against v ~ 0.1..2, then a few Newton steps.
    EXPECT_LE(fit.iterations, 45) << tau2;
    if (tau2 >= 1e3) {
      EXPECT_NEAR(fit.tau2 / tau2, 1.0, 0.6) << "40 subjects: a loose sanity check";
    }
  }
}

}  // namespace
}  // namespace boldsum
