// CombineFixedEffects: hand-worked numbers first, then input checks, then properties.
// Formula: inverse-variance fixed effects (Hedges & Olkin 1985, Statistical Methods for
// Meta-Analysis, ch. 6); q > 1: generalised least squares for a common mean. The same
// function is compared with statsmodels on random inputs in
// tests/reference/test_fixed_effects.py.
#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <vector>

#include "boldsum/combine.h"
#include "boldsum/error.h"

namespace boldsum {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

// One run with V voxels: effects q x V, covariances (q*q) x V column-major per voxel.
ContrastEstimate MakeRun(int q, double dof, const Eigen::MatrixXd& effect,
                         const Eigen::MatrixXd& covariance) {
  ContrastEstimate run;
  run.q = q;
  run.dof = dof;
  run.effect = effect;
  run.covariance = covariance;
  run.valid.assign(static_cast<std::size_t>(effect.cols()), 1);
  return run;
}

ContrastEstimate Scalar(double dof, std::vector<double> effects, std::vector<double> variances) {
  const Eigen::Map<Eigen::RowVectorXd> e(effects.data(), static_cast<Eigen::Index>(effects.size()));
  const Eigen::Map<Eigen::RowVectorXd> v(variances.data(),
                                         static_cast<Eigen::Index>(variances.size()));
  return MakeRun(1, dof, e, v);
}

// Two runs, q = 1: e = (2, 4), v = (1, 3), so w = (1, 1/3), sum w = 4/3,
// estimate = (2 + 4/3) / (4/3) = 2.5, variance = 3/4 (statsmodels' combine_effects gives
// mean_effect_fe = 2.5 and sd_eff_w_fe^2 = 0.75 for these numbers).
TEST(CombineFixedEffects, TwoScalarRunsByHand) {
  const ContrastEstimate a = Scalar(100, {2.0}, {1.0});
  const ContrastEstimate b = Scalar(120, {4.0}, {3.0});
  const ContrastEstimate out = CombineFixedEffects({&a, &b});
  EXPECT_EQ(out.q, 1);
  EXPECT_TRUE(out.estimable);
  EXPECT_EQ(out.dof, 220);
  ASSERT_EQ(out.valid, std::vector<unsigned char>{1});
  // A handful of roundings in sums of three terms: 4 eps.
  EXPECT_NEAR(out.effect(0, 0), 2.5, 4 * kEps * 2.5);
  EXPECT_NEAR(out.covariance(0, 0), 0.75, 4 * kEps * 0.75);
}

// Three runs, q = 1: e = (1, 2, 3), v = (1/2, 1, 2): w = (2, 1, 1/2), sum w = 7/2,
// sum w e = 2 + 2 + 3/2 = 11/2, estimate = 11/7, variance = 2/7.
TEST(CombineFixedEffects, ThreeScalarRunsByHand) {
  const ContrastEstimate a = Scalar(50, {1.0, 1.0}, {0.5, 0.5});
  const ContrastEstimate b = Scalar(60, {2.0, 2.0}, {1.0, 1.0});
  const ContrastEstimate c = Scalar(70, {3.0, 3.0}, {2.0, 2.0});
  const ContrastEstimate out = CombineFixedEffects({&a, &b, &c});
  EXPECT_EQ(out.dof, 180);
  for (int v = 0; v < 2; ++v) {
    EXPECT_NEAR(out.effect(0, v), 11.0 / 7.0, 4 * kEps * 11.0 / 7.0);
    EXPECT_NEAR(out.covariance(0, v), 2.0 / 7.0, 4 * kEps * 2.0 / 7.0);
  }
}

// Two runs, q = 2, worked with exact fractions:
// Cov1 = [2 1; 1 2], e1 = (1, 0): W1 = [2 -1; -1 2] / 3, W1 e1 = (2/3, -1/3).
// Cov2 = [1 0; 0 4], e2 = (0, 2): W2 = [1 0; 0 1/4], W2 e2 = (0, 1/2).
// S = W1 + W2 = [5/3 -1/3; -1/3 11/12], det S = 55/36 - 4/36 = 17/12,
// Cov = S^-1 = [11/17 4/17; 4/17 20/17], effect = Cov (2/3, 1/6) = (8/17, 6/17).
TEST(CombineFixedEffects, TwoVectorRunsByHand) {
  const ContrastEstimate a = MakeRun(2, 30, Eigen::Vector2d(1, 0),
                                     Eigen::Vector4d(2, 1, 1, 2));
  const ContrastEstimate b = MakeRun(2, 40, Eigen::Vector2d(0, 2),
                                     Eigen::Vector4d(1, 0, 0, 4));
  const ContrastEstimate out = CombineFixedEffects({&a, &b});
  EXPECT_EQ(out.q, 2);
  EXPECT_EQ(out.dof, 70);
  const Eigen::Vector2d effect(8.0 / 17, 6.0 / 17);
  const Eigen::Vector4d cov(11.0 / 17, 4.0 / 17, 4.0 / 17, 20.0 / 17);
  // Two 2 x 2 inversions with condition numbers below 4: 16 eps of the largest entry.
  EXPECT_LE((out.effect.col(0) - effect).cwiseAbs().maxCoeff(), 16 * kEps);
  EXPECT_LE((out.covariance.col(0) - cov).cwiseAbs().maxCoeff(), 16 * kEps * 20.0 / 17);
}

TEST(CombineFixedEffects, ValidOnlyWhereEveryRunIsValid) {
  ContrastEstimate a = Scalar(10, {1, 2, 3}, {1, 1, 1});
  ContrastEstimate b = Scalar(10, {1, 2, 3}, {1, 1, 1});
  a.valid[0] = 0;
  b.valid[2] = 0;
  const ContrastEstimate out = CombineFixedEffects({&a, &b});
  EXPECT_EQ(out.valid, (std::vector<unsigned char>{0, 1, 0}));
  EXPECT_TRUE(std::isnan(out.effect(0, 0)) && std::isnan(out.covariance(0, 2)));
  EXPECT_NEAR(out.effect(0, 1), 2.0, 4 * kEps * 2.0);
}

// A covariance that cannot be inverted makes the voxel invalid: zero, negative or NaN
// variance (q = 1); rank one, indefinite, or near-singular (rcond ~1e-16) for q = 2.
TEST(CombineFixedEffects, SingularCovarianceMarksVoxelInvalid) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const ContrastEstimate a = Scalar(10, {1, 1, 1, 1}, {0.0, -1.0, nan, 1.0});
  const ContrastEstimate b = Scalar(10, {1, 1, 1, 1}, {1.0, 1.0, 1.0, 1.0});
  EXPECT_EQ(CombineFixedEffects({&a, &b}).valid, (std::vector<unsigned char>{0, 0, 0, 1}));

  Eigen::MatrixXd cov(4, 4);
  cov.col(0) << 1, 1, 1, 1;                  // rank one
  cov.col(1) << 1, 2, 2, 1;                  // indefinite
  cov.col(2) << 1, 1 - 1e-16, 1 - 1e-16, 1;  // numerically singular
  cov.col(3) << 1, 0.5, 0.5, 1;              // fine
  const ContrastEstimate c = MakeRun(2, 10, Eigen::MatrixXd::Ones(2, 4), cov);
  const ContrastEstimate d = MakeRun(2, 10, Eigen::MatrixXd::Ones(2, 4),
                                     Eigen::Vector4d(1, 0, 0, 1).replicate(1, 4));
  EXPECT_EQ(CombineFixedEffects({&c, &d}).valid, (std::vector<unsigned char>{0, 0, 0, 1}));
}

TEST(CombineFixedEffects, RejectsBadInput) {
  const ContrastEstimate one = Scalar(10, {1, 2}, {1, 1});
  const ContrastEstimate three_voxels = Scalar(10, {1, 2, 3}, {1, 1, 1});
  const ContrastEstimate q2 = MakeRun(2, 10, Eigen::MatrixXd::Ones(2, 2),
                                      Eigen::Vector4d(1, 0, 0, 1).replicate(1, 2));
  ContrastEstimate not_estimable = one;
  not_estimable.estimable = false;
  ContrastEstimate short_valid = one;
  short_valid.valid.pop_back();
  ContrastEstimate bad_cov = one;
  bad_cov.covariance = Eigen::MatrixXd::Ones(4, 2);

  const auto message = [](const std::vector<const ContrastEstimate*>& runs) {
    try {
      CombineFixedEffects(runs);
    } catch (const Error& e) {
      return std::string(e.what());
    }
    return std::string("no error");
  };
  EXPECT_EQ(message({}), "fixed-effects combination: no runs given");
  EXPECT_EQ(message({&one, nullptr}), "fixed-effects combination: run 2: missing (null) estimate");
  EXPECT_EQ(message({&one, &q2}), "fixed-effects combination: run 2: q = 2, but run 1 has q = 1");
  EXPECT_EQ(message({&one, &three_voxels}),
            "fixed-effects combination: run 2: effect is 1 x 3, expected 1 x 2");
  EXPECT_EQ(message({&one, &bad_cov}),
            "fixed-effects combination: run 2: covariance is 4 x 2, expected 1 x 2");
  EXPECT_EQ(message({&one, &short_valid}),
            "fixed-effects combination: run 2: valid has 1 entries, expected 2");
  EXPECT_EQ(message({&not_estimable}),
            "fixed-effects combination: run 1: contrast is not estimable; leave the run out");
}

// ---- Properties -------------------------------------------------------------------

// Uniform real on [lo, hi] (RapidCheck's inRange on doubles yields whole numbers only).
rc::Gen<double> Real(double lo, double hi) {
  constexpr std::int64_t kSteps = std::int64_t{1} << 40;
  return rc::gen::resize(100, rc::gen::map(rc::gen::inRange<std::int64_t>(0, kSteps + 1),
                                           [lo, hi](std::int64_t k) {
                                             return lo + (hi - lo) * (static_cast<double>(k) / kSteps);
                                           }));
}

// A run with q in 1..3, V voxels, covariances L L' with L lower triangular, diagonal in
// [0.2, 3] and off-diagonal in [-2, 2] (condition numbers up to ~1e4).
ContrastEstimate RandomRun(int q, int voxels) {
  ContrastEstimate run;
  run.q = q;
  run.dof = *Real(1.0, 500.0);
  run.effect.resize(q, voxels);
  run.covariance.resize(q * q, voxels);
  run.valid.assign(static_cast<std::size_t>(voxels), 1);
  for (int v = 0; v < voxels; ++v) {
    Eigen::MatrixXd l = Eigen::MatrixXd::Zero(q, q);
    for (int i = 0; i < q; ++i) {
      for (int j = 0; j < i; ++j) l(i, j) = *Real(-2.0, 2.0);
      l(i, i) = *Real(0.2, 3.0);
      run.effect(i, v) = *Real(-100.0, 100.0);
    }
    const Eigen::MatrixXd cov = l * l.transpose();
    run.covariance.col(v) = Eigen::Map<const Eigen::VectorXd>(cov.data(), q * q);
  }
  return run;
}

double Condition(const Eigen::VectorXd& cov_column, int q) {
  const Eigen::Map<const Eigen::MatrixXd> cov(cov_column.data(), q, q);
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> eig(cov);
  return eig.eigenvalues().maxCoeff() / eig.eigenvalues().minCoeff();
}

// Relative distance of two vectors against the larger norm.
double Distance(const Eigen::VectorXd& a, const Eigen::VectorXd& b) {
  return (a - b).norm() / std::max({a.norm(), b.norm(), 1e-300});
}

RC_GTEST_PROP(CombineFixedEffects, OneRunIsReturnedUnchanged, ()) {
  const int q = *rc::gen::inRange(1, 4);
  const ContrastEstimate run = RandomRun(q, 3);
  const ContrastEstimate out = CombineFixedEffects({&run});
  RC_ASSERT(out.dof == run.dof);
  for (int v = 0; v < 3; ++v) {
    RC_ASSERT(out.valid[v] == 1);
    // Invert twice: error ~ condition number times a few eps.
    const double tolerance = 16 * kEps * Condition(run.covariance.col(v), q);
    RC_ASSERT(Distance(out.effect.col(v), run.effect.col(v)) <= tolerance);
    RC_ASSERT(Distance(out.covariance.col(v), run.covariance.col(v)) <= tolerance);
  }
}

RC_GTEST_PROP(CombineFixedEffects, OrderOfRunsDoesNotMatter, ()) {
  const int q = *rc::gen::inRange(1, 4);
  const int n_runs = *rc::gen::inRange(2, 6);
  std::vector<ContrastEstimate> runs;
  for (int r = 0; r < n_runs; ++r) runs.push_back(RandomRun(q, 2));
  std::vector<const ContrastEstimate*> order;
  for (const ContrastEstimate& run : runs) order.push_back(&run);
  const ContrastEstimate forward = CombineFixedEffects(order);
  std::reverse(order.begin(), order.end());
  std::rotate(order.begin(), order.begin() + 1, order.end());
  const ContrastEstimate shuffled = CombineFixedEffects(order);
  double worst_condition = 1;
  for (const ContrastEstimate& run : runs) {
    for (int v = 0; v < 2; ++v) {
      worst_condition = std::max(worst_condition, Condition(run.covariance.col(v), q));
    }
  }
  // Sums in another order differ by ~n_runs eps per weight, amplified by the conditions
  // of the run covariances and once more by the final inverse: 64 n_runs eps times the
  // worst condition number (16 failed about once in ten runs of 100 random cases).
  const double tolerance = 64 * n_runs * kEps * worst_condition;
  RC_ASSERT(forward.dof == shuffled.dof);
  for (int v = 0; v < 2; ++v) {
    RC_ASSERT(Distance(forward.effect.col(v), shuffled.effect.col(v)) <= tolerance);
    RC_ASSERT(Distance(forward.covariance.col(v), shuffled.covariance.col(v)) <= tolerance);
  }
}

RC_GTEST_PROP(CombineFixedEffects, DoublingVariancesDoublesCombinedVariance, ()) {
  const int q = *rc::gen::inRange(1, 4);
  const int n_runs = *rc::gen::inRange(1, 5);
  std::vector<ContrastEstimate> runs, doubled;
  for (int r = 0; r < n_runs; ++r) {
    runs.push_back(RandomRun(q, 2));
    doubled.push_back(runs.back());
    doubled.back().covariance *= 2.0;
  }
  std::vector<const ContrastEstimate*> a, b;
  double worst_condition = 1;
  for (int r = 0; r < n_runs; ++r) {
    a.push_back(&runs[r]);
    b.push_back(&doubled[r]);
    for (int v = 0; v < 2; ++v) {
      worst_condition = std::max(worst_condition, Condition(runs[r].covariance.col(v), q));
    }
  }
  const ContrastEstimate base = CombineFixedEffects(a);
  const ContrastEstimate twice = CombineFixedEffects(b);
  // The factor 2 is exact in binary; only the square roots of the scaling differ.
  const double tolerance = 16 * n_runs * kEps * worst_condition;
  for (int v = 0; v < 2; ++v) {
    RC_ASSERT(Distance(twice.covariance.col(v), 2.0 * base.covariance.col(v)) <= tolerance);
    RC_ASSERT(Distance(twice.effect.col(v), base.effect.col(v)) <= tolerance);
  }
}

}  // namespace
}  // namespace boldsum
