// Exact and dense-reference cases of FitRun / EstimateContrast / TestContrast.
#include <gtest/gtest.h>

#include <cmath>
#include <limits>

#include "boldsum/error.h"
#include "boldsum/fit.h"
#include "boldsum/stats.h"
#include "fit/design_basis.h"
#include "fit/sufficient_stats.h"
#include "fit_test_util.h"

namespace boldsum {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

// N = 64 rows with dyadic entries (intercept, a 0/1 block, a ramp in 1/64 steps, a
// 0/1 pattern of period 3), so that X b for dyadic b is exact in float32.
Eigen::MatrixXd DyadicDesign() {
  const int n = 64;
  Eigen::MatrixXd x(n, 4);
  for (int k = 0; k < n; ++k) {
    x(k, 0) = (k / 8) % 2;
    x(k, 1) = (k - 32) / 64.0;
    x(k, 2) = k % 3 == 0;
    x(k, 3) = 1;
  }
  return x;
}

double Cond(const Eigen::MatrixXd& x) {
  Eigen::JacobiSVD<Eigen::MatrixXd> svd(x);
  return svd.singularValues()(0) / svd.singularValues()(x.cols() - 1);
}

TEST(FitExact, NoiseFreeDataRecoveredFromSufficientStatistics) {
  const Eigen::MatrixXd x = DyadicDesign();
  const Eigen::Vector4d b(3.0, -2.0, 0.5, 1.25);
  const Eigen::MatrixXd y = x * b;  // exact in float32
  ASSERT_EQ(fit_test::AsFloat(y), y);
  const fit::DesignBasis basis = fit::AnalyseDesign(x);
  MatrixSource source(y, 5);
  const fit::SufficientStats s = fit::AccumulateStats(basis, &source, 1);
  const Eigen::VectorXd beta =
      basis.diagonal.v * s.g.topRows(basis.rank).col(0) + s.offset(0) * basis.constant_k;
  // Normal equations: relative error bounded by a small multiple of cond(X)^2 eps
  // (Golub & Van Loan, Matrix Computations, sec. 5.3.8); k = 8.
  const double k = 8 * Cond(x) * Cond(x);
  EXPECT_LE((beta - b).norm() / b.norm(), k * kEps);
}

TEST(FitExact, NoiseFreeAndConstantVoxelsHaveZeroResidualVariance) {
  const Eigen::MatrixXd x = DyadicDesign();
  Eigen::MatrixXd y(64, 4);
  y.col(0) = x * Eigen::Vector4d(3.0, -2.0, 0.5, 1.25);
  y.col(1).setConstant(7.0);
  y.col(2).setZero();
  y.col(3) = x.col(1) + Eigen::VectorXd::LinSpaced(64, 0, 1).array().sin().matrix();
  MatrixSource source(y);
  const RunFit fit = FitRun(x, &source, FitOptions{});
  EXPECT_EQ(fit.n_constant, 3);
  EXPECT_EQ(fit.n_nonfinite, 0);
  for (int v = 0; v < 3; ++v) {
    EXPECT_EQ(fit.valid[v], 0);
    EXPECT_TRUE(std::isnan(fit.sigma2(v)));
    EXPECT_TRUE(std::isnan(fit.rho(v)));
    EXPECT_TRUE(fit.beta.col(v).array().isNaN().all());
  }
  EXPECT_EQ(fit.valid[3], 1);
}

// A 1e4 baseline with unit AR(1) noise: the sums are formed after subtracting each
// voxel's first value, so the whitened RSS does not cancel. Reference: the dense
// Prais-Winsten fit (explicit W, Householder QR, RSS from the whitened residuals) at
// the same rho, and rho from explicit N x N matrices (fit_test_util.h).
TEST(FitExact, LargeBaselineMatchesDenseComputation) {
  const Eigen::MatrixXd x = fit_test::BlockDesign(120, 2.0);
  std::mt19937_64 rng(7);
  const Eigen::VectorXd rhos = Eigen::VectorXd::LinSpaced(8, 0.1, 0.7);
  Eigen::MatrixXd y = fit_test::Ar1Noise(120, rhos, &rng);
  y.array() += 1e4;
  y.row(0).array() += 3.0;  // the offset is not the mean
  y.col(0) += 2.0 * x.col(0);
  y = fit_test::AsFloat(y);
  MatrixSource source(y, 16);
  FitOptions options;
  const RunFit fit = FitRun(x, &source, options);
  Eigen::MatrixXd c = Eigen::MatrixXd::Zero(1, x.cols());
  c(0, 0) = 1;
  c(0, 1) = -1;
  const ContrastEstimate est = EstimateContrast(fit, c, options);
  for (int v = 0; v < y.cols(); ++v) {
    ASSERT_TRUE(fit.valid[v]);
    // Two different exact computations of the same 2x2 solve; 1e-10 allows for their
    // different rounding (both ~1e-13 here).
    EXPECT_NEAR(fit.rho(v), fit_test::DenseRho(x, y.col(v)), 1e-10);
    const fit_test::DenseGls ref = fit_test::DenseFit(x, y.col(v), fit.rho(v));
    // Without the offset the cancellation error would be ~1e8 eps ~ 2e-8 relative.
    EXPECT_NEAR(fit.sigma2(v) / ref.sigma2, 1.0, 1e-10);
    for (int j = 0; j + 1 < x.cols(); ++j) {
      EXPECT_NEAR(fit.beta(j, v), ref.beta(j), 1e-9) << "column " << j;  // noise sd 1
    }
    EXPECT_NEAR(fit.beta(x.cols() - 1, v) / ref.beta(x.cols() - 1), 1.0, 1e-12);
    const double var = ref.sigma2 * (c * ref.cov_unscaled * c.transpose())(0, 0);
    EXPECT_NEAR(est.covariance(0, v) / var, 1.0, 1e-10);
    EXPECT_NEAR(est.effect(0, v), (c * ref.beta)(0), 1e-9);
  }
}

TEST(FitExact, ZeroAndDuplicatedColumnsAreDroppedAndContrastsChecked) {
  const Eigen::MatrixXd base = fit_test::BlockDesign(100, 2.0);
  const int p = static_cast<int>(base.cols());
  // Columns: base_0, zero, base_0 again, base_1 .. base_{p-1}.
  Eigen::MatrixXd x(100, p + 2);
  x << base.col(0), Eigen::VectorXd::Zero(100), base.col(0), base.rightCols(p - 1);
  std::mt19937_64 rng(11);
  Eigen::MatrixXd y = fit_test::Ar1Noise(100, Eigen::Vector3d(0.2, 0.4, 0.6), &rng);
  y.col(1) += 3.0 * base.col(0);
  y = fit_test::AsFloat(y.array() + 50.0);
  FitOptions options;
  MatrixSource full_source(y), base_source(y);
  const RunFit fit = FitRun(x, &full_source, options);
  const RunFit ref = FitRun(base, &base_source, options);
  EXPECT_EQ(fit.rank, p);
  EXPECT_EQ(fit.dof, 100 - p);
  ASSERT_EQ(fit.kept_columns.size(), static_cast<size_t>(p));
  const bool keeps_first = fit.kept_columns[0] == 0;
  EXPECT_TRUE(keeps_first || fit.kept_columns[0] == 2);
  EXPECT_EQ(fit.kept_columns[1], 3);
  const int dropped_copy = keeps_first ? 2 : 0;
  for (int v = 0; v < 3; ++v) {
    EXPECT_EQ(fit.beta(1, v), 0.0);
    EXPECT_EQ(fit.beta(dropped_copy, v), 0.0);
    EXPECT_NEAR(fit.rho(v), ref.rho(v), 1e-12);
    EXPECT_NEAR(fit.sigma2(v) / ref.sigma2(v), 1.0, 1e-12);
  }
  auto row = [&](std::initializer_list<std::pair<int, double>> w) {
    Eigen::MatrixXd c = Eigen::MatrixXd::Zero(1, p + 2);
    for (auto [j, value] : w) c(0, j) = value;
    return c;
  };
  // Estimable: the two copies together, and a drift column.
  const ContrastEstimate both = EstimateContrast(fit, row({{0, 1.0}, {2, 1.0}}), options);
  Eigen::MatrixXd c_base = Eigen::MatrixXd::Zero(1, p);
  c_base(0, 0) = 1.0;
  const ContrastEstimate both_ref = EstimateContrast(ref, c_base, options);
  ASSERT_TRUE(both.estimable);
  EXPECT_LE(fit_test::MaxRelError(both.effect, both_ref.effect), 1e-10);
  EXPECT_LE(fit_test::MaxRelError(both.covariance, both_ref.covariance), 1e-10);
  EXPECT_TRUE(EstimateContrast(fit, row({{3, 1.0}}), options).estimable);
  // Not estimable: one copy alone, their difference, any weight on the zero column.
  EXPECT_FALSE(EstimateContrast(fit, row({{0, 1.0}}), options).estimable);
  EXPECT_FALSE(EstimateContrast(fit, row({{0, 1.0}, {2, -1.0}}), options).estimable);
  const ContrastEstimate zero_col = EstimateContrast(fit, row({{1, 1.0}, {3, 1.0}}), options);
  EXPECT_FALSE(zero_col.estimable);
  // IsContrastEstimable answers as EstimateContrast does, for each of these rows.
  for (const Eigen::MatrixXd& c : {row({{0, 1.0}, {2, 1.0}}), row({{3, 1.0}}), row({{0, 1.0}}),
                                   row({{0, 1.0}, {2, -1.0}}), row({{1, 1.0}, {3, 1.0}})}) {
    EXPECT_EQ(IsContrastEstimable(fit, c), EstimateContrast(fit, c, options).estimable) << c;
  }
  EXPECT_THROW(IsContrastEstimable(fit, Eigen::MatrixXd::Ones(1, p)), Error);
  EXPECT_TRUE(zero_col.effect.array().isNaN().all());
  EXPECT_EQ(zero_col.valid, std::vector<unsigned char>(3, 0));
  const ContrastTest test = TestContrast(zero_col, false);
  EXPECT_TRUE(test.stat.array().isNaN().all());
}

TEST(FitExact, NonFiniteAndConstantVoxelsAreExcludedAndCounted) {
  const Eigen::MatrixXd x = fit_test::BlockDesign(80, 2.0);
  std::mt19937_64 rng(3);
  Eigen::MatrixXd y = fit_test::Ar1Noise(80, Eigen::VectorXd::Constant(7, 0.3), &rng);
  y.array() += 100;
  y(40, 1) = std::numeric_limits<double>::quiet_NaN();
  y(0, 2) = std::numeric_limits<double>::quiet_NaN();  // the offset volume
  y(79, 3) = std::numeric_limits<double>::infinity();
  y.col(4).setConstant(250.0);
  y.col(5).setZero();
  MatrixSource source(y, 32);
  const RunFit fit = FitRun(x, &source, FitOptions{});
  EXPECT_EQ(fit.n_nonfinite, 3);
  EXPECT_EQ(fit.n_constant, 2);
  const std::vector<unsigned char> expected{1, 0, 0, 0, 0, 0, 1};
  EXPECT_EQ(fit.valid, expected);
  for (int v = 1; v <= 5; ++v) {
    EXPECT_TRUE(std::isnan(fit.sigma2(v)) && std::isnan(fit.rho(v))) << v;
    EXPECT_TRUE(fit.beta.col(v).array().isNaN().all()) << v;
  }
  Eigen::MatrixXd c = Eigen::MatrixXd::Zero(1, x.cols());
  c(0, 0) = 1;
  const ContrastEstimate est = EstimateContrast(fit, c, FitOptions{});
  EXPECT_EQ(est.valid, expected);
  const ContrastTest t = TestContrast(est, false);
  EXPECT_TRUE(std::isfinite(t.z(0)) && std::isfinite(t.z(6)));
  for (int v = 1; v <= 5; ++v) EXPECT_TRUE(std::isnan(t.stat(v)) && std::isnan(t.z(v)));
}

// t = effect / sqrt(var); F for one row is t^2 (the F(1, nu) = t(nu)^2 identity); F for
// two rows is (C b)'(C Cov C')^-1 (C b) / 2 with the dense reference's b and Cov.
TEST(FitExact, TestStatisticsFollowTheirDefinitions) {
  const Eigen::MatrixXd x = fit_test::BlockDesign(150, 2.0);
  std::mt19937_64 rng(5);
  Eigen::MatrixXd y = fit_test::Ar1Noise(150, Eigen::Vector2d(0.35, 0.5), &rng);
  y.col(0) += 2.0 * x.col(0) - 0.3 * x.col(1);
  y = fit_test::AsFloat(y.array() + 500.0);
  MatrixSource source(y);
  const RunFit fit = FitRun(x, &source, FitOptions{});
  Eigen::MatrixXd c1 = Eigen::MatrixXd::Zero(1, x.cols()), c2 = Eigen::MatrixXd::Zero(2, x.cols());
  c1(0, 0) = 1;
  c2(0, 0) = c2(1, 1) = 1;
  const ContrastEstimate e1 = EstimateContrast(fit, c1, FitOptions{});
  const ContrastEstimate e2 = EstimateContrast(fit, c2, FitOptions{});
  const ContrastTest t = TestContrast(e1, false), f1 = TestContrast(e1, true);
  const ContrastTest f2 = TestContrast(e2, true);
  for (int v = 0; v < 2; ++v) {
    EXPECT_NEAR(t.stat(v), e1.effect(0, v) / std::sqrt(e1.covariance(0, v)),
                4 * kEps * std::abs(t.stat(v)));
    EXPECT_NEAR(f1.stat(v), t.stat(v) * t.stat(v), 8 * kEps * f1.stat(v));
    EXPECT_EQ(t.z(v), ZFromT(t.stat(v), fit.dof));
    EXPECT_EQ(f2.z(v), ZFromF(f2.stat(v), 2, fit.dof));
    const fit_test::DenseGls ref = fit_test::DenseFit(x, y.col(v), fit.rho(v));
    const Eigen::Vector2d cb = c2 * ref.beta;
    const Eigen::Matrix2d cov = ref.sigma2 * c2 * ref.cov_unscaled * c2.transpose();
    EXPECT_NEAR(f2.stat(v) / (cb.dot(cov.llt().solve(cb)) / 2), 1.0, 1e-10);
  }
  EXPECT_GT(t.stat(0), 3.0);  // the planted effect is found
}

TEST(FitExact, BadInputsThrowClearErrors) {
  const Eigen::MatrixXd x = fit_test::BlockDesign(40, 2.0);
  const Eigen::MatrixXd y = Eigen::MatrixXd::Random(41, 3);
  auto message = [](auto&& call) {
    try {
      call();
    } catch (const Error& e) {
      return std::string(e.what());
    }
    return std::string("no error");
  };
  MatrixSource wrong_n(y);
  EXPECT_EQ(message([&] { FitRun(x, &wrong_n, FitOptions{}); }),
            "design matrix has 40 rows but the data has 41 volumes");
  const Eigen::MatrixXd y40 = y.topRows(40);
  MatrixSource s1(y40), s2(y40), s3(y40), s4(y40), s5(y40);
  EXPECT_EQ(message([&] { FitRun(Eigen::MatrixXd::Zero(40, 3), &s1, FitOptions{}); }),
            "design matrix has rank 0 (every column is zero)");
  EXPECT_EQ(message([&] { FitRun(Eigen::MatrixXd::Random(40, 40), &s2, FitOptions{}); }),
            "design matrix has 40 volumes but rank 40; the fit needs more volumes than the rank");
  FitOptions zero_threads;
  zero_threads.threads = 0;
  EXPECT_EQ(message([&] { FitRun(x, &s3, zero_threads); }),
            "FitOptions::threads = 0; it must be at least 1");
  EXPECT_NE(message([&] {
              FitRun(Eigen::MatrixXd::Random(40, 39), &s4, FitOptions{});
            }).find("too few to estimate AR(1) noise"),
            std::string::npos);
  Eigen::MatrixXd bad_x = x;
  bad_x(3, 1) = std::numeric_limits<double>::quiet_NaN();
  EXPECT_EQ(message([&] { FitRun(bad_x, &s5, FitOptions{}); }),
            "design matrix: non-finite value nan at row 3, column 1; every entry must be finite");
  MatrixSource s6(y40);
  const RunFit fit = FitRun(x, &s6, FitOptions{});
  EXPECT_EQ(message([&] { EstimateContrast(fit, Eigen::MatrixXd::Ones(1, 2), FitOptions{}); }),
            "contrast matrix is 1 x 2; it needs at least one row and " + std::to_string(x.cols()) +
                " columns (one per design column)");
  const ContrastEstimate two =
      EstimateContrast(fit, Eigen::MatrixXd::Identity(2, x.cols()), FitOptions{});
  EXPECT_EQ(message([&] { TestContrast(two, false); }),
            "a t test needs a one-row contrast; this one has 2 rows (use an F test)");
}

}  // namespace
}  // namespace boldsum
