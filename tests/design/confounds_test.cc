#include <gtest/gtest.h>

#include <limits>

#include "boldsum/design.h"
#include "design_test_util.h"

namespace boldsum {
namespace {

using testing::MelodyModel;
using testing::MelodyRun;
using testing::WriteTempFile;

std::string ErrorText(const ModelSpec& model, const RunSpec& run) {
  try {
    LoadConfounds(model, run);
  } catch (const Error& error) {
    return error.what();
  }
  return "no error";
}

TEST(LoadConfounds, SelectsColumnsAndFillsNaWithTheColumnMean) {
  RunSpec run = MelodyRun();
  run.confounds_path = WriteTempFile("fill.tsv",
                                     "framewise\tshift_x\tpulse\n"
                                     "0.1\t1.0\tn/a\n"
                                     "n/a\tn/a\t2.0\n"
                                     "0.9\t4.0\t-1.0\n");
  ModelSpec model = MelodyModel();
  model.confounds = {"pulse", "shift_x"};
  model.censor = CensorSpec{"framewise", 0.5};
  const ConfoundTable table = LoadConfounds(model, run);
  EXPECT_EQ(table.path, run.confounds_path);
  EXPECT_EQ(table.names, model.confounds);
  Eigen::MatrixXd expected(3, 2);
  // Mean of the numeric cells: pulse (2 - 1) / 2 = 0.5, shift_x (1 + 4) / 2 = 2.5.
  expected << 0.5, 1.0, 2.0, 2.5, -1.0, 4.0;
  EXPECT_EQ(table.values, expected);
  EXPECT_EQ(table.censor_signal, Eigen::Vector3d(0.1, 0.0, 0.9));  // n/a reads as 0
}

TEST(LoadConfounds, NothingToReadWithoutConfoundsOrCensoring) {
  RunSpec run = MelodyRun();
  run.confounds_path = "/nonexistent/confounds.tsv";
  const ConfoundTable table = LoadConfounds(MelodyModel(), run);
  EXPECT_EQ(table.values.size(), 0);
  EXPECT_EQ(table.censor_signal.size(), 0);
}

TEST(LoadConfounds, ErrorsNameFileLineAndColumn) {
  ModelSpec model = MelodyModel();
  model.confounds = {"shift_x", "pulse"};
  RunSpec run = MelodyRun();

  EXPECT_EQ(ErrorText(model, run),
            "study.yaml:12:7: the model uses confounds (shift_x, pulse) but this run has no "
            "confounds file");

  run.confounds_path = WriteTempFile("text.tsv", "shift_x\tpulse\n1\t2\n3\tabc\n");
  EXPECT_EQ(ErrorText(model, run),
            run.confounds_path + ":3:3: column 'pulse': expected a finite number, got 'abc'");

  run.confounds_path = WriteTempFile("all_na.tsv", "shift_x\tpulse\n1\tn/a\n3\tn/a\n");
  EXPECT_EQ(ErrorText(model, run),
            run.confounds_path + ":1:9: confound column 'pulse' has no numeric cell (all 2 are "
            "n/a); n/a cells are replaced by the column mean, which needs at least one number");

  run.confounds_path = WriteTempFile("missing.tsv", "shift_y\tpulse\n1\t2\n");
  EXPECT_EQ(ErrorText(model, run),
            run.confounds_path + ":1: no column 'shift_x' (a confound of the model); did you "
            "mean 'shift_y'? The table's columns: shift_y, pulse");

  model.confounds = {"pulse"};
  model.censor = CensorSpec{"framewise", 0.5};
  EXPECT_EQ(ErrorText(model, run),
            run.confounds_path + ":1: no column 'framewise' (the model's censoring column). "
            "The table's columns: shift_y, pulse");

  run.confounds_path = "/nonexistent/confounds.tsv";
  EXPECT_EQ(ErrorText(model, run),
            "/nonexistent/confounds.tsv: cannot open the table for reading");
}

}  // namespace
}  // namespace boldsum
