#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <cmath>
#include <limits>
#include <random>

#include "boldsum/design.h"
#include "design/drift.h"
#include "design_test_util.h"

namespace boldsum {
namespace {

using testing::MelodyModel;
using testing::MelodyRun;

DesignMatrix HandDesign(const Eigen::MatrixXd& x, const std::vector<std::string>& conditions) {
  DesignMatrix design;
  design.x = x;
  for (const std::string& name : conditions) {
    design.columns.push_back({name, ColumnKind::kCondition, name});
  }
  design.columns.push_back({"intercept", ColumnKind::kIntercept, ""});
  return design;
}

ModelSpec ModelWith(const std::vector<std::string>& conditions) {
  ModelSpec model;
  model.tr_s = 2.0;
  model.conditions = conditions;
  return model;
}

ContrastSpec Contrast(const std::string& name, std::map<std::string, double> row) {
  ContrastSpec contrast;
  contrast.name = name;
  contrast.rows = {std::move(row)};
  return contrast;
}

TEST(DescribeDesign, OrthogonalDesignHasTextbookValues) {
  // Columns: two orthonormal zero-mean cosines and the intercept. Then X'X = diag(1, 1, N),
  // so Var(c'b) / sigma^2 = c'(X'X)^-1 c = 2 for c = a - b (efficiency 1/2), every VIF is 1
  // and the correlations vanish.
  const int n = 40;
  Eigen::MatrixXd x(n, 3);
  x << CosineDrift(n, 2), Eigen::VectorXd::Ones(n);
  const DesignMatrix design = HandDesign(x, {"a", "b"});
  const DesignReport report = DescribeDesign(design, ModelWith({"a", "b"}),
                                             {Contrast("a_gt_b", {{"a", 1}, {"b", -1}})});
  EXPECT_EQ(report.rank, 3);
  EXPECT_NEAR(report.condition_number, 1.0, 1e-13);
  EXPECT_TRUE(report.dependent.empty());
  ASSERT_EQ(report.conditions.size(), 2u);
  EXPECT_NEAR(report.conditions[0].variance_inflation, 1.0, 1e-13);
  EXPECT_LT(report.conditions[0].max_abs_correlation, 1e-13);
  ASSERT_EQ(report.contrasts.size(), 1u);
  EXPECT_TRUE(report.contrasts[0].estimable);
  EXPECT_NEAR(report.contrasts[0].efficiency, 0.5, 1e-13);
}

TEST(DescribeDesign, CorrelationAndVarianceInflationByHand) {
  // a = (1,0,0,0), b = (1,1,0,0): Pearson r = 0.5 / sqrt(0.75) = 1/sqrt(3); with an
  // intercept, R^2 of a on b is r^2 = 1/3, so VIF = 1 / (1 - 1/3) = 1.5 (hand computation).
  Eigen::MatrixXd x(4, 3);
  x << 1, 1, 1, 0, 1, 1, 0, 0, 1, 0, 0, 1;
  const DesignReport report = DescribeDesign(HandDesign(x, {"a", "b"}), ModelWith({"a", "b"}), {});
  EXPECT_EQ(report.rank, 3);
  EXPECT_NEAR(report.conditions[0].max_abs_correlation, 1.0 / std::sqrt(3.0), 1e-15);
  EXPECT_EQ(report.conditions[0].most_correlated_with, "b");
  EXPECT_NEAR(report.conditions[0].variance_inflation, 1.5, 1e-13);
}

TEST(DescribeDesign, EmptyConditionIsDependentAndNotEstimable) {
  ModelSpec model = MelodyModel();
  model.conditions.push_back("humming");
  const DesignMatrix design = BuildDesign(model, MelodyRun(), ConfoundTable{}, 100, nullptr);
  const DesignReport report =
      DescribeDesign(design, model, {Contrast("hum", {{"humming", 1}}),
                                     Contrast("mel", {{"melody", 1}})});
  EXPECT_EQ(report.rank, design.n_columns() - 1);
  EXPECT_EQ(report.dependent, std::vector<std::string>{"humming"});
  EXPECT_TRUE(std::isinf(report.condition_number));
  EXPECT_TRUE(std::isinf(report.conditions[2].variance_inflation));
  EXPECT_EQ(report.conditions[2].most_correlated_with, "");
  EXPECT_FALSE(report.contrasts[0].estimable);
  EXPECT_EQ(report.contrasts[0].efficiency, 0.0);
  EXPECT_TRUE(report.contrasts[1].estimable);
  EXPECT_GT(report.contrasts[1].efficiency, 0.0);
}

TEST(IsEstimable, RowsMustLieInTheRowSpace) {
  // Columns a, a, 1: only a-sums are estimable.
  Eigen::MatrixXd x(4, 3);
  x << 1, 1, 1, 2, 2, 1, 0, 0, 1, 5, 5, 1;
  EXPECT_TRUE(IsEstimable(x, Eigen::RowVector3d(1, 1, 0)));
  EXPECT_TRUE(IsEstimable(x, Eigen::RowVector3d(0.5, 0.5, 3)));
  EXPECT_FALSE(IsEstimable(x, Eigen::RowVector3d(1, -1, 0)));
  EXPECT_FALSE(IsEstimable(x, Eigen::RowVector3d(1, 0, 0)));
  Eigen::MatrixXd two(2, 3);
  two << 1, 1, 0, 1, 0, 0;
  EXPECT_FALSE(IsEstimable(x, two));  // one bad row is enough
  EXPECT_THROW(IsEstimable(x, Eigen::RowVector2d(1, 1)), Error);
}

RC_GTEST_PROP(DescribeDesign, DuplicateConfoundLowersRankByOneAndNamesBoth, ()) {
  const int n = 80;
  ModelSpec model = MelodyModel();
  model.confounds = {"shift_x", "pulse", "breath"};
  ConfoundTable confounds;
  confounds.names = model.confounds;
  confounds.values.resize(n, 3);
  // Random series from a generated seed (generating every cell would let RapidCheck shrink
  // them to constants, which are collinear with the intercept).
  std::mt19937_64 rng(*rc::gen::arbitrary<uint64_t>());
  std::normal_distribution<double> normal(0.0, 1.0);
  for (int r = 0; r < n; ++r) {
    for (int c = 0; c < 3; ++c) confounds.values(r, c) = normal(rng);
  }
  const DesignMatrix base = BuildDesign(model, MelodyRun(), confounds, n, nullptr);
  const DesignReport before = DescribeDesign(base, model, {});

  const int copied = *rc::gen::inRange(0, 3);
  const double factor = *rc::gen::element(1.0, -2.5, 1e3, 1e-3);
  model.confounds.push_back("copy_of_" + model.confounds[copied]);
  confounds.names = model.confounds;
  confounds.values.conservativeResize(n, 4);
  confounds.values.col(3) = factor * confounds.values.col(copied);
  const DesignMatrix doubled = BuildDesign(model, MelodyRun(), confounds, n, nullptr);
  const DesignReport after = DescribeDesign(doubled, model, {});

  RC_ASSERT(before.rank == base.n_columns());
  RC_ASSERT(after.rank == before.rank);
  RC_ASSERT(after.rank == doubled.n_columns() - 1);
  RC_ASSERT(after.dependent ==
            (std::vector<std::string>{model.confounds[copied], model.confounds[3]}));
}

}  // namespace
}  // namespace boldsum
