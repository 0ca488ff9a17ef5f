#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include "boldsum/design.h"
#include "design_test_util.h"
#include "design/drift.h"
#include "events/event_regressor.h"

namespace boldsum {
namespace {

using testing::MelodyModel;
using testing::MelodyRun;

std::vector<std::string> Names(std::initializer_list<const char*> names) {
  return std::vector<std::string>(names.begin(), names.end());
}

ConfoundTable Confounds(int rows) {
  ConfoundTable table;
  table.path = "run1_confounds.tsv";
  table.names = {"shift_x", "pulse"};
  table.values.resize(rows, 2);
  for (int r = 0; r < rows; ++r) table.values.row(r) << 0.01 * r, std::sin(0.3 * r);
  table.censor_signal = Eigen::VectorXd::Zero(rows);
  return table;
}

TEST(BuildDesign, ColumnOrderAndNamesWithEveryPart) {
  ModelSpec model = MelodyModel();
  model.hrf.derivatives = HrfDerivatives::kTimeDispersion;
  model.confounds = {"shift_x", "pulse"};
  model.censor = CensorSpec{"framewise", 0.5};
  ConfoundTable confounds = Confounds(100);
  confounds.censor_signal(17) = 0.9;
  confounds.censor_signal(42) = 0.51;
  confounds.censor_signal(43) = 0.5;  // not above
  Diagnostics warnings;
  const DesignMatrix design = BuildDesign(model, MelodyRun(), confounds, 100, &warnings);
  EXPECT_EQ(design.names(),
            Names({"melody", "melody_dt", "melody_disp", "silence", "silence_dt", "silence_disp",
                   "shift_x", "pulse", "censor_17", "censor_42", "drift_cos1", "drift_cos2",
                   "drift_cos3", "intercept"}));
  EXPECT_EQ(design.n_volumes(), 100);
  EXPECT_EQ(design.columns[1].kind, ColumnKind::kTimeDerivative);
  EXPECT_EQ(design.columns[2].kind, ColumnKind::kDispersionDerivative);
  EXPECT_EQ(design.columns[4].condition, "silence");
  EXPECT_EQ(design.columns[6].kind, ColumnKind::kConfound);
  EXPECT_EQ(design.columns[8].kind, ColumnKind::kCensor);
  EXPECT_EQ(design.columns[13].kind, ColumnKind::kIntercept);
  EXPECT_TRUE(warnings.all().empty());

  // Blocks copied as they are: confounds, indicators, drift, intercept.
  EXPECT_EQ(design.x.middleCols(6, 2), confounds.values);
  Eigen::MatrixXd censor = Eigen::MatrixXd::Zero(100, 2);
  censor(17, 0) = censor(42, 1) = 1.0;
  EXPECT_EQ(design.x.middleCols(8, 2), censor);
  EXPECT_EQ(design.x.middleCols(10, 3), CosineDrift(100, 3));
  EXPECT_EQ(design.x.col(13), Eigen::VectorXd::Ones(100));
  EXPECT_EQ(design.x.leftCols(3),
            ConvolvedRegressors(MelodyRun().events["melody"], model.hrf, 2.0, 0.5, 100));
}

TEST(BuildDesign, FirPolynomialAndNoDrift) {
  ModelSpec model = MelodyModel();
  model.hrf.shape = HrfShape::kFir;
  model.hrf.fir_bins = 3;
  model.drift.kind = DriftKind::kPolynomial;
  model.drift.degree = 2;
  DesignMatrix design = BuildDesign(model, MelodyRun(), ConfoundTable{}, 80, nullptr);
  EXPECT_EQ(design.names(),
            Names({"melody_bin1", "melody_bin2", "melody_bin3", "silence_bin1", "silence_bin2",
                   "silence_bin3", "drift_poly1", "drift_poly2", "intercept"}));
  EXPECT_EQ(design.columns[0].kind, ColumnKind::kFirBin);
  EXPECT_EQ(design.x.middleCols(6, 2), LegendreDrift(80, 2));
  model.drift.kind = DriftKind::kNone;
  design = BuildDesign(model, MelodyRun(), ConfoundTable{}, 80, nullptr);
  EXPECT_EQ(design.n_columns(), 7);
}

TEST(BuildDesign, ConfoundRowCountMustMatchTheVolumes) {
  ModelSpec model = MelodyModel();
  model.confounds = {"shift_x", "pulse"};
  try {
    BuildDesign(model, MelodyRun(), Confounds(99), 100, nullptr);
    FAIL() << "expected an error";
  } catch (const Error& error) {
    EXPECT_STREQ(error.what(),
                 "run1_confounds.tsv: the confounds table has 99 data rows but the run has 100 "
                 "volumes; it needs one row per volume");
  }
}

TEST(BuildDesign, WarnsAboutEmptyConditionsAndLateEvents) {
  ModelSpec model = MelodyModel();
  model.conditions.push_back("humming");
  RunSpec run = MelodyRun();
  run.events["silence"].push_back({210.0, 4.0, 1.0});
  run.events["silence"].push_back({199.5, 4.0, 1.0});
  Diagnostics warnings;
  const DesignMatrix design = BuildDesign(model, run, ConfoundTable{}, 100, &warnings);
  ASSERT_EQ(warnings.all().size(), 2u);
  EXPECT_EQ(warnings.all()[0].ToString(),
            "study.yaml:12:7: warning: condition 'silence': 2 of 5 events start after the last "
            "volume's modelled time 199 s ((N - 1 + slice_reference) * TR, N = 100), the "
            "earliest at 199.5 s; they do not affect this run");
  EXPECT_EQ(warnings.all()[1].ToString(),
            "study.yaml:12:7: warning: condition 'humming' has no events in this run; its "
            "regressors are all zero and the fit drops them as not estimable");
  EXPECT_EQ(design.x.col(2).cwiseAbs().maxCoeff(), 0.0);
  EXPECT_FALSE(warnings.HasErrors());
}

TEST(BuildDesign, RejectsClashingNamesAndBadSettings) {
  ModelSpec model = MelodyModel();
  model.confounds = {"shift_x", "pulse"};
  ConfoundTable confounds = Confounds(50);
  confounds.names = model.confounds = {"melody", "pulse"};
  try {
    BuildDesign(model, MelodyRun(), confounds, 50, nullptr);
    FAIL() << "expected an error";
  } catch (const Error& error) {
    EXPECT_STREQ(error.what(),
                 "study.yaml:12:7: design column name 'melody' is produced twice (columns 1 and "
                 "3); rename the condition or confound");
  }
  model = MelodyModel();
  model.hrf.shape = HrfShape::kFir;
  model.hrf.derivatives = HrfDerivatives::kTime;
  EXPECT_THROW(BuildDesign(model, MelodyRun(), ConfoundTable{}, 50, nullptr), Error);
  model = MelodyModel();
  model.slice_reference = 1.5;
  EXPECT_THROW(BuildDesign(model, MelodyRun(), ConfoundTable{}, 50, nullptr), Error);
  EXPECT_THROW(BuildDesign(MelodyModel(), MelodyRun(), ConfoundTable{}, 0, nullptr), Error);
  RunSpec run = MelodyRun();
  run.events["melody"].push_back({5.0, -1.0, 1.0});
  try {
    BuildDesign(MelodyModel(), run, ConfoundTable{}, 50, nullptr);
    FAIL() << "expected an error";
  } catch (const Error& error) {
    EXPECT_STREQ(error.what(), "study.yaml:12:7: condition 'melody': event at onset 5 s: "
                               "duration -1 s is negative");
  }
}

RC_GTEST_PROP(BuildDesign, ShiftingAllOnsetsByOneTrShiftsTheTaskColumnsByOneRow, ()) {
  ModelSpec model = MelodyModel();
  model.tr_s = *rc::gen::inRange(700, 3000) / 1000.0;
  model.slice_reference = *rc::gen::inRange(0, 1001) / 1000.0;
  model.hrf.shape = *rc::gen::element(HrfShape::kDoubleGamma, HrfShape::kGlover, HrfShape::kFir);
  if (model.hrf.shape != HrfShape::kFir) model.hrf.derivatives = HrfDerivatives::kTimeDispersion;
  RunSpec run = MelodyRun();
  RunSpec shifted = run;
  for (auto& [condition, events] : shifted.events) {
    for (Event& event : events) event.onset_s += model.tr_s;
  }
  const int n = 90;
  const DesignMatrix a = BuildDesign(model, run, ConfoundTable{}, n, nullptr);
  const DesignMatrix b = BuildDesign(model, shifted, ConfoundTable{}, n, nullptr);
  int task = 0;
  while (!a.columns[task].condition.empty()) ++task;
  const Eigen::MatrixXd difference =
      b.x.leftCols(task).bottomRows(n - 1) - a.x.leftCols(task).topRows(n - 1);
  // Grid-coordinate rounding moves ~1e-13 of a cell; FFT noise ~1e-15.
  RC_ASSERT(difference.cwiseAbs().maxCoeff() < 1e-9);
  RC_ASSERT(b.x.leftCols(task).row(0).cwiseAbs().maxCoeff() == 0.0);  // first onset >= 10 s
}

RC_GTEST_PROP(BuildDesign, ScalingAmplitudesScalesTheColumns, ()) {
  ModelSpec model = MelodyModel();
  model.hrf.shape = *rc::gen::element(HrfShape::kDoubleGamma, HrfShape::kGlover, HrfShape::kFir);
  const double scale = *rc::gen::inRange(-4000, 4000) / 1000.0;
  RunSpec scaled = MelodyRun();
  for (Event& event : scaled.events["melody"]) event.amplitude *= scale;
  const DesignMatrix a = BuildDesign(model, MelodyRun(), ConfoundTable{}, 90, nullptr);
  const DesignMatrix b = BuildDesign(model, scaled, ConfoundTable{}, 90, nullptr);
  for (int c = 0; c < a.n_columns(); ++c) {
    const double factor = a.columns[c].condition == "melody" ? scale : 1.0;
    RC_ASSERT((b.x.col(c) - factor * a.x.col(c)).cwiseAbs().maxCoeff() <
              1e-12 * (1.0 + std::abs(scale)));
  }
}

}  // namespace
}  // namespace boldsum
