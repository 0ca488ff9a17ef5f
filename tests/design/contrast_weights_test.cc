#include <gtest/gtest.h>

#include "boldsum/design.h"
#include "design_test_util.h"

namespace boldsum {
namespace {

using testing::MelodyModel;
using testing::MelodyRun;

ContrastSpec Contrast(const std::string& name, std::vector<std::map<std::string, double>> rows) {
  ContrastSpec contrast;
  contrast.name = name;
  contrast.rows = std::move(rows);
  contrast.is_f = contrast.rows.size() > 1;
  contrast.where = {"study.yaml", 30, 5};
  return contrast;
}

DesignMatrix Design(HrfShape shape) {
  ModelSpec model = MelodyModel();
  model.hrf.shape = shape;
  if (shape == HrfShape::kFir) {
    model.hrf.fir_bins = 4;
  } else {
    model.hrf.derivatives = HrfDerivatives::kTime;
  }
  model.drift.kind = DriftKind::kNone;
  return BuildDesign(model, MelodyRun(), ConfoundTable{}, 60, nullptr);
}

TEST(ContrastWeights, ConditionsAndColumnsByName) {
  const DesignMatrix design = Design(HrfShape::kDoubleGamma);
  ASSERT_EQ(design.names(), (std::vector<std::string>{"melody", "melody_dt", "silence",
                                                      "silence_dt", "intercept"}));
  Eigen::MatrixXd expected(1, 5);
  expected << 1, 0, -1, 0, 0;
  EXPECT_EQ(ContrastWeights(Contrast("m_gt_s", {{{"melody", 1}, {"silence", -1}}}), design),
            expected);
  expected << 0, 0.5, 0, 0, 2;
  EXPECT_EQ(ContrastWeights(Contrast("odd", {{{"melody_dt", 0.5}, {"intercept", 2}}}), design),
            expected);
  Eigen::MatrixXd f(2, 5);
  f << 1, 0, 0, 0, 0, 0, 0, 1, 0, 0;
  EXPECT_EQ(ContrastWeights(Contrast("any", {{{"melody", 1}}, {{"silence", 1}}}), design), f);
}

TEST(ContrastWeights, FirConditionIsSpreadEvenlyOverItsBins) {
  const DesignMatrix design = Design(HrfShape::kFir);
  Eigen::MatrixXd expected(1, 9);
  expected << 0.25, 0.25, 0.25, 0.25, -0.5, -0.5, -0.5, -0.5, 0;
  EXPECT_EQ(ContrastWeights(Contrast("m_gt_s", {{{"melody", 1}, {"silence", -2}}}), design),
            expected);
  expected << 0, 0, 3, 0, 0, 0, 0, 0, 0;
  EXPECT_EQ(ContrastWeights(Contrast("bin", {{{"melody_bin3", 3}}}), design), expected);
}

TEST(ContrastWeights, UnknownKeyIsAnErrorAtTheContrast) {
  const DesignMatrix design = Design(HrfShape::kDoubleGamma);
  try {
    ContrastWeights(Contrast("m_gt_s", {{{"melodie", 1}}}), design);
    FAIL() << "expected an error";
  } catch (const Error& error) {
    EXPECT_STREQ(error.what(),
                 "study.yaml:30:5: contrast 'm_gt_s': 'melodie' is neither a condition nor a "
                 "column of this run's design; did you mean 'melody'?");
  }
  EXPECT_THROW(ContrastWeights(Contrast("x", {{{"drift_cos1", 1}}}), design), Error);
}

}  // namespace
}  // namespace boldsum
