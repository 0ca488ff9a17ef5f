// LoadGroupConfig: the design it builds, and every error located at file:line:column
// with the value and the rule.
#include <gtest/gtest.h>

#include "boldsum/pool.h"
#include "pool_test_dir.h"

namespace boldsum {
namespace {

using Messages = std::vector<std::string>;

TEST(GroupConfig, DefaultsPoolEveryContrastWithAnInterceptOnly) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  const LoadedGroupConfig loaded = dir.Load("input: summaries.tsv\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << dir.Messages(loaded)[0];
  const GroupSpec& spec = loaded.spec;
  EXPECT_EQ(spec.input.kind, PoolInputKind::kRegions);
  EXPECT_EQ(spec.first_level_contrasts, (std::vector<std::string>{"melody", "rhythm"}));
  EXPECT_EQ(spec.design.columns, std::vector<std::string>{"intercept"});
  EXPECT_EQ(spec.design.z, Eigen::MatrixXd::Ones(8, 1));
  ASSERT_EQ(spec.contrasts.size(), 1u);
  EXPECT_EQ(spec.contrasts[0].name, "intercept");
  EXPECT_EQ(spec.method, PoolMethod::kMixed);
  EXPECT_EQ(spec.output_dir, dir.Path("group"));
}

TEST(GroupConfig, CovariateIsCentredAndFactorCodedAsDifferences) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  const LoadedGroupConfig loaded = dir.Load(
      "input: summaries.tsv\n"
      "participants: participants.tsv\n"
      "design:\n"
      "  covariates: [age]\n"
      "  factor: {column: training, levels: [none, choir]}\n"
      "contrasts:\n"
      "  choir_gt_none: {training_choir: 1}\n"
      "  all: [{age: 1}, {training_choir: 1}]\n"
      "method: ols\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << dir.Messages(loaded)[0];
  const GroupDesign& design = loaded.spec.design;
  EXPECT_EQ(design.columns,
            (std::vector<std::string>{"intercept", "age", "training_choir"}));
  // age = 20 + 3 i for i = 1..8: mean 33.5.
  EXPECT_EQ(design.covariates[0].mean, 33.5);
  for (int i = 1; i <= 8; ++i) {
    EXPECT_EQ(design.z(i - 1, 0), 1.0);
    EXPECT_EQ(design.z(i - 1, 1), 20 + 3 * i - 33.5);
    EXPECT_EQ(design.z(i - 1, 2), i % 2 ? 1.0 : 0.0);
  }
  ASSERT_EQ(loaded.spec.contrasts.size(), 2u);
  EXPECT_EQ(loaded.spec.contrasts[0].weights, Eigen::RowVector3d(0, 0, 1));
  EXPECT_TRUE(loaded.spec.contrasts[1].is_f);
  EXPECT_EQ(loaded.spec.method, PoolMethod::kOls);
}

TEST(GroupConfig, CellMeansWithoutInterceptAndUncentredCovariate) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  const LoadedGroupConfig loaded = dir.Load(
      "input: summaries.tsv\n"
      "participants: participants.tsv\n"
      "first_level_contrasts: [rhythm]\n"
      "design:\n"
      "  intercept: false\n"
      "  covariates: [{column: age, centre: false}]\n"
      "  factor: {column: training, coding: cell_means}\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << dir.Messages(loaded)[0];
  EXPECT_EQ(loaded.spec.first_level_contrasts, std::vector<std::string>{"rhythm"});
  EXPECT_EQ(loaded.spec.design.columns,
            (std::vector<std::string>{"age", "training_choir", "training_none"}));
  EXPECT_EQ(loaded.spec.design.z(0, 0), 23.0);
  EXPECT_EQ(loaded.spec.contrasts.size(), 3u);  // one per column by default
}

TEST(GroupConfigErrors, UnknownKeysAndBadValuesAreLocated) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  const LoadedGroupConfig loaded = dir.Load(
      "input: summaries.tsv\n"
      "methd: ols\n"
      "method: bayes\n"
      "design:\n"
      "  intercept: maybe\n");
  EXPECT_EQ(dir.Messages(loaded),
              (Messages{"D/group.yaml:2:1: error: group config: unknown key 'methd'; did you "
                          "mean 'method'?",
                          "D/group.yaml:5:14: error: design.intercept: expected true or false, "
                          "got 'maybe'",
                          "D/group.yaml:3:9: error: method: expected 'mixed', 'ols' or 'fixed', "
                          "got 'bayes'"}));
}

TEST(GroupConfigErrors, SubjectMissingFromParticipantsIsNamed) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  dir.Write("participants.tsv", "participant_id\tage\nsub-v1\t30\nv2\t31\n");
  const LoadedGroupConfig loaded =
      dir.Load("input: summaries.tsv\nparticipants: participants.tsv\n");
  const std::vector<std::string> messages = dir.Messages(loaded);
  ASSERT_EQ(messages.size(), 6u);  // v3 .. v8
  EXPECT_EQ(messages[0],
            "D/group.yaml:2:15: error: subject 'v3' of the input is not in D/participants.tsv "
            "(participant_id is matched with or without the 'sub-' prefix)");
}

TEST(GroupConfigErrors, CovariateCellsAndContrastKeysAreLocated) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  std::string participants = "participant_id\tage\ttraining\n";
  for (int i = 1; i <= 8; ++i) {
    participants += "sub-v" + std::to_string(i) + "\t" + (i == 3 ? "n/a" : "30") + "\tnone\n";
  }
  dir.Write("participants.tsv", participants);
  const LoadedGroupConfig loaded = dir.Load(
      "input: summaries.tsv\n"
      "participants: participants.tsv\n"
      "design: {covariates: [age, agee]}\n");
  EXPECT_EQ(dir.Messages(loaded),
              (Messages{"D/participants.tsv:4:8: error: covariate 'age' of subject 'v3': "
                          "expected a finite number, got 'n/a' (every subject of the input "
                          "needs a value)",
                          "D/group.yaml:3:28: error: covariate 'agee' is not a column of "
                          "D/participants.tsv; did you mean 'age'?"}));
}

TEST(GroupConfigErrors, ContrastsAreCheckedAgainstTheDesign) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  const LoadedGroupConfig loaded = dir.Load(
      "input: summaries.tsv\n"
      "contrasts:\n"
      "  mean: {intercep: 1}\n"
      "  bad name: {intercept: 1}\n"
      "  weight: {intercept: high}\n"
      "  same: [{intercept: 1}, {intercept: 2}]\n");
  EXPECT_EQ(dir.Messages(loaded),
              (Messages{"D/group.yaml:4:3: error: contrast name 'bad name': use letters, "
                          "digits, _ and - only (it names files)",
                          "D/group.yaml:5:23: error: contrast 'weight', column 'intercept': the "
                          "weight must be a finite number, got 'high'",
                          "D/group.yaml:3:10: error: contrast 'mean': 'intercep' is not a design "
                          "column; did you mean 'intercept'? (columns: 'intercept')",
                          "D/group.yaml:3:3: error: contrast 'mean': row 1 has no non-zero weight",
                          "D/group.yaml:6:3: error: contrast 'same': its 2 rows are linearly "
                          "dependent"}));
}

TEST(GroupConfigErrors, FactorCodingMustFitTheIntercept) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  const LoadedGroupConfig loaded = dir.Load(
      "input: summaries.tsv\n"
      "participants: participants.tsv\n"
      "design:\n"
      "  factor: {column: training, coding: cell_means}\n");
  EXPECT_EQ(dir.Messages(loaded),
              (Messages{"D/group.yaml:4:11: error: coding 'cell_means' has one column per "
                          "level, which together equal the intercept; set 'intercept: false' "
                          "or use 'differences'"}));
}

TEST(GroupConfigErrors, FactorLevelsAreChecked) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  const LoadedGroupConfig loaded = dir.Load(
      "input: summaries.tsv\n"
      "participants: participants.tsv\n"
      "design:\n"
      "  factor: {column: training, levels: [choir, band]}\n");
  const std::vector<std::string> messages = dir.Messages(loaded);
  ASSERT_EQ(messages.size(), 5u);  // four subjects in 'none', and 'band' has nobody
  EXPECT_EQ(messages[0],
            "D/participants.tsv:3:11: error: factor 'training' of subject 'v2': value 'none' is "
            "not one of the levels 'choir', 'band'");
  EXPECT_EQ(messages[4],
            "D/group.yaml:4:11: error: factor 'training': level 'band' has no subjects in the "
            "input");
}

TEST(GroupConfigErrors, InputAndYamlProblems) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  EXPECT_EQ(dir.Messages(dir.Load("input: nowhere\n")),
              (Messages{"D/group.yaml:1:8: error: input 'D/nowhere' is neither a folder nor a "
                          ".tsv table (it must be a pool-ready folder or a ROI summaries table)"}));
  EXPECT_EQ(dir.Messages(dir.Load("input: summaries.tsv\nfirst_level_contrasts: [melodi]\n")),
              (Messages{"D/group.yaml:2:24: error: first_level_contrasts: 'melodi' is not in "
                          "the input; did you mean 'melody'?"}));
  EXPECT_EQ(dir.Messages(dir.Load("input: [summaries.tsv\n")),
              (Messages{"D/group.yaml:2:1: error: not valid YAML: end of sequence flow not found"}));
  dir.Write("summaries.tsv", "subject\tcontrast\tregion\testimate\tvariance\n"
                             "v1\tmelody\tr1\t1.5\tlarge\n");
  EXPECT_EQ(dir.Messages(dir.Load("input: summaries.tsv\n")),
              (Messages{"D/summaries.tsv:2:18: error: column 'variance': expected a finite "
                          "number or n/a, got 'large'"}));
}

}  // namespace
}  // namespace boldsum
