// Valid configs load into the expected StudySpec: the documented example, defaults,
// inline and table events, ignore, amplitude.
#include <gtest/gtest.h>

#include <filesystem>

#include "boldsum/config.h"
#include "study_dir.h"

namespace boldsum {
namespace {

using testing::StudyDir;

const std::string kExampleDir = std::string(BOLDSUM_TEST_DATA_DIR) + "/config/full";

std::string ErrorsOf(const LoadedConfig& loaded) {
  std::string text;
  for (const Diagnostic& d : loaded.diagnostics.all()) text += d.ToString() + "\n";
  return text;
}

TEST(LoadConfig, ExampleStudyLoadsWithItsValues) {
  const LoadedConfig loaded = LoadConfig(kExampleDir + "/study.yaml");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << ErrorsOf(loaded);
  const StudySpec& spec = loaded.spec;
  const std::string dir = std::filesystem::absolute(kExampleDir).lexically_normal().string();
  EXPECT_EQ(spec.config_dir, dir);
  EXPECT_EQ(spec.config_path, dir + "/study.yaml");

  const ModelSpec& model = spec.model;
  EXPECT_EQ(model.tr_s, 2.0);
  EXPECT_EQ(model.slice_reference, 0.5);
  EXPECT_EQ(model.hrf.shape, HrfShape::kDoubleGamma);
  EXPECT_EQ(model.hrf.derivatives, HrfDerivatives::kNone);
  EXPECT_EQ(model.drift.kind, DriftKind::kCosine);
  EXPECT_EQ(model.drift.cutoff_s, 128.0);
  EXPECT_EQ(model.noise, NoiseModel::kAr1);
  EXPECT_EQ(model.conditions, (std::vector<std::string>{"melody_known", "melody_new", "press"}));
  EXPECT_EQ(model.confounds, (std::vector<std::string>{"shift_x", "shift_y", "shift_z"}));
  ASSERT_TRUE(model.censor.has_value());
  EXPECT_EQ(model.censor->column, "displacement");
  EXPECT_EQ(model.censor->above, 0.9);

  ASSERT_EQ(spec.contrasts.size(), 2u);
  EXPECT_EQ(spec.contrasts[0].name, "known_vs_new");
  EXPECT_FALSE(spec.contrasts[0].is_f);
  EXPECT_EQ(
      spec.contrasts[0].rows,
      (std::vector<std::map<std::string, double>>{{{"melody_known", 1}, {"melody_new", -1}}}));
  EXPECT_EQ(spec.contrasts[0].where.line, 13);
  EXPECT_EQ(spec.contrasts[0].where.column, 3);
  EXPECT_EQ(spec.contrasts[1].name, "any_melody");
  EXPECT_TRUE(spec.contrasts[1].is_f);
  EXPECT_EQ(spec.contrasts[1].rows, (std::vector<std::map<std::string, double>>{
                                        {{"melody_known", 1}}, {{"melody_new", 1}}}));

  EXPECT_EQ(spec.mask_path, dir + "/mask.nii.gz");
  EXPECT_EQ(spec.output_dir, dir + "/results");
  ASSERT_EQ(spec.subjects.size(), 1u);
  const SubjectSpec& subject = spec.subjects[0];
  EXPECT_EQ(subject.id, "s01");
  EXPECT_EQ(subject.where.line, 17);
  ASSERT_EQ(subject.runs.size(), 2u);

  const RunSpec& run1 = subject.runs[0];
  EXPECT_EQ(run1.data_path, dir + "/s01/run1.nii.gz");
  EXPECT_EQ(run1.events_path, dir + "/s01/run1_events.tsv");
  EXPECT_EQ(run1.confounds_path, dir + "/s01/run1_confounds.tsv");
  EXPECT_EQ(run1.where.line, 19);
  EXPECT_EQ(run1.events.at("melody_known"), (std::vector<Event>{{2.0, 4.0, 1.0}}));
  EXPECT_EQ(run1.events.at("melody_new"), (std::vector<Event>{{10.0, 4.0, 1.0}, {30.0, 4.0, 1.0}}));
  EXPECT_EQ(run1.events.at("press"), (std::vector<Event>{{15.5, 0.0, 1.0}}));

  const RunSpec& run2 = subject.runs[1];
  EXPECT_EQ(run2.data_path, dir + "/s01/run2.tsv");
  EXPECT_EQ(run2.events_path, "");
  EXPECT_EQ(run2.where.line, 20);
  EXPECT_EQ(run2.events.at("melody_known"),
            (std::vector<Event>{{12.0, 4.0, 1.0}, {40.5, 4.0, 1.0}}));
  EXPECT_EQ(run2.events.at("melody_new"), std::vector<Event>{});
  EXPECT_EQ(run2.events.at("press"), (std::vector<Event>{{17.0, 0.0, 1.0}, {45.5, 0.0, 1.0}}));

  // The only diagnostic: run 2 has no event of melody_new.
  ASSERT_EQ(loaded.diagnostics.all().size(), 1u);
  EXPECT_EQ(loaded.diagnostics.all()[0].ToString(),
            kExampleDir +
                "/study.yaml:21:9: warning: subjects[0].runs[1].events: no events for "
                "condition 'melody_new' in this run");
}

TEST(LoadConfig, DefaultsApplyWhenKeysAreLeftOut) {
  StudyDir dir;
  const LoadedConfig loaded = dir.Load(
      "tr: 1.5\n"
      "conditions: [melody_known, melody_new, press]\n"
      "subjects:\n"
      "  - id: s01\n"
      "    runs:\n"
      "      - {data: run1.nii.gz, events: run1_events.tsv}\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << ErrorsOf(loaded);
  EXPECT_TRUE(loaded.diagnostics.all().empty());
  const ModelSpec& model = loaded.spec.model;
  EXPECT_EQ(model.tr_s, 1.5);
  EXPECT_EQ(model.slice_reference, 0.5);
  EXPECT_EQ(model.hrf.shape, HrfShape::kDoubleGamma);
  EXPECT_EQ(model.hrf.derivatives, HrfDerivatives::kNone);
  EXPECT_EQ(model.hrf.fir_bin_s, 0.0);
  EXPECT_EQ(model.hrf.fir_bins, 0);
  EXPECT_EQ(model.drift.kind, DriftKind::kCosine);
  EXPECT_EQ(model.drift.cutoff_s, 128.0);
  EXPECT_EQ(model.drift.degree, 2);
  EXPECT_EQ(model.noise, NoiseModel::kAr1);
  EXPECT_TRUE(model.confounds.empty());
  EXPECT_TRUE(model.ignored.empty());
  EXPECT_FALSE(model.censor.has_value());
  EXPECT_TRUE(loaded.spec.contrasts.empty());
  EXPECT_EQ(loaded.spec.mask_path, "");
  EXPECT_EQ(loaded.spec.output_dir, dir.Path("results"));
  EXPECT_EQ(loaded.spec.subjects.at(0).runs.at(0).confounds_path, "");
}

TEST(LoadConfig, OptionalSettingsAreRead) {
  StudyDir dir;
  dir.Write("sub/mask.nii", "placeholder\n");
  const LoadedConfig loaded = dir.Load(
      "version: 1\n"
      "tr: 0.8\n"
      "slice_reference: 0\n"
      "hrf: {shape: fir, fir_bin_s: 1.6, fir_bins: 10}\n"
      "drift: {kind: polynomial, degree: 4}\n"
      "autocorrelation: none\n"
      "conditions: [melody_known, melody_new, press]\n"
      "contrasts:\n"
      "  early: {melody_known_bin1: 1, melody_known_bin2: 1}\n"
      "  known: {melody_known: 1}\n"
      "mask: sub/mask.nii\n"
      "output: ../elsewhere/out\n"
      "subjects:\n"
      "  - id: s-01_b\n"
      "    runs:\n"
      "      - {data: run1.nii.gz, events: run1_events.tsv}\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << ErrorsOf(loaded);
  const ModelSpec& model = loaded.spec.model;
  EXPECT_EQ(model.slice_reference, 0.0);
  EXPECT_EQ(model.hrf.shape, HrfShape::kFir);
  EXPECT_EQ(model.hrf.fir_bin_s, 1.6);
  EXPECT_EQ(model.hrf.fir_bins, 10);
  EXPECT_EQ(model.drift.kind, DriftKind::kPolynomial);
  EXPECT_EQ(model.drift.degree, 4);
  EXPECT_EQ(model.noise, NoiseModel::kNone);
  EXPECT_EQ(loaded.spec.mask_path, dir.Path("sub/mask.nii"));
  const std::string expected_output =
      (std::filesystem::path(dir.Path("")) / "../elsewhere/out").lexically_normal().string();
  EXPECT_EQ(loaded.spec.output_dir, expected_output);
  EXPECT_EQ(loaded.spec.subjects.at(0).id, "s-01_b");
}

TEST(LoadConfig, DerivativeColumnsAreValidContrastKeys) {
  StudyDir dir;
  const LoadedConfig loaded = dir.Load(
      "tr: 2\n"
      "hrf: {derivatives: time+dispersion}\n"
      "conditions: [melody_known, melody_new, press]\n"
      "confounds: [shift_x]\n"
      "contrasts:\n"
      "  timing: {melody_known_dt: 1, melody_new_disp: -1, shift_x: 0.5, intercept: 1}\n"
      "subjects:\n"
      "  - id: s01\n"
      "    runs:\n"
      "      - {data: run1.nii.gz, events: run1_events.tsv, confounds: run1_confounds.tsv}\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << ErrorsOf(loaded);
  EXPECT_EQ(loaded.spec.model.hrf.derivatives, HrfDerivatives::kTimeDispersion);
  EXPECT_EQ(loaded.spec.contrasts.at(0).rows.at(0).at("shift_x"), 0.5);
}

// The same events written three ways give the same EventsByCondition.
TEST(LoadConfig, InlineAndTableEventsAgree) {
  StudyDir dir;
  dir.Write("events.tsv",
            "onset\tduration\ttrial_type\tamplitude\tresponse_time\n"
            "40.5\t4.0\tmelody_known\t2.5\tn/a\n"
            "12.0\t4.0\tmelody_known\t1\t0.5\n"
            "3\t0\tpress\t-1\tn/a\n"
            "8\tn/a\tbreathing\tn/a\tn/a\n"
            "20\t2\tmelody_new\t1\tn/a\n");
  const std::string head =
      "tr: 2\n"
      "conditions: [melody_known, melody_new, press]\n"
      "ignore: [breathing]\n"
      "subjects:\n"
      "  - id: s01\n"
      "    runs:\n"
      "      - data: run1.nii.gz\n";
  const LoadedConfig from_table = dir.Load(head + "        events: events.tsv\n");
  const LoadedConfig per_event =
      dir.Load(head +
               "        events:\n"
               "          melody_known:\n"
               "            - {onset: 40.5, duration: 4.0, amplitude: 2.5}\n"
               "            - {onset: 12.0, duration: 4.0}\n"
               "          press: [{onset: 3, duration: 0, amplitude: -1}]\n"
               "          breathing: [{onset: 8}]\n"
               "          melody_new: [{onset: 20, duration: 2, amplitude: 1}]\n");
  const LoadedConfig by_list = dir.Load(
      head +
      "        events:\n"
      "          melody_known: {onsets: [40.5, 12.0], duration: 4.0, amplitude: [2.5, 1]}\n"
      "          press: {onsets: [3], duration: [0], amplitude: -1}\n"
      "          melody_new: {onsets: [20], duration: 2}\n");
  for (const LoadedConfig* loaded : {&from_table, &per_event, &by_list}) {
    ASSERT_TRUE(loaded->diagnostics.all().empty()) << ErrorsOf(*loaded);
  }
  const EventsByCondition expected = {{"melody_known", {{12.0, 4.0, 1.0}, {40.5, 4.0, 2.5}}},
                                      {"melody_new", {{20.0, 2.0, 1.0}}},
                                      {"press", {{3.0, 0.0, -1.0}}}};
  EXPECT_EQ(from_table.spec.subjects[0].runs[0].events, expected);
  EXPECT_EQ(per_event.spec.subjects[0].runs[0].events, expected);
  EXPECT_EQ(by_list.spec.subjects[0].runs[0].events, expected);
}

TEST(LoadConfig, EmptyInlineConditionMeansNoEventsWithAWarning) {
  StudyDir dir;
  const std::vector<std::string> messages = dir.LoadMessages(
      "tr: 2\n"
      "conditions: [melody_known, press]\n"
      "subjects:\n"
      "  - id: s01\n"
      "    runs:\n"
      "      - data: run1.nii.gz\n"
      "        events: {melody_known: [{onset: 1, duration: 1}], press: []}\n");
  EXPECT_EQ(messages, (std::vector<std::string>{
                          "D/study.yaml:7:9: warning: subjects[0].runs[0].events: no events for "
                          "condition 'press' in this run"}));
}

}  // namespace
}  // namespace boldsum
