// Problems in the model part of a config (syntax, keys, types, ranges, conditions,
// contrasts) give exact, located messages (file:line:column, value, rule), all in one
// pass; StudyDir::Load checks that LoadConfig wrote nothing.
#include <gtest/gtest.h>

#include "boldsum/config.h"
#include "study_dir.h"

namespace boldsum {
namespace {

using testing::StudyDir;
using Messages = std::vector<std::string>;

// A valid run line, used where a test is about something else.
const std::string kSubjects =
    "subjects:\n"
    "  - id: s01\n"
    "    runs:\n"
    "      - {data: run1.nii.gz, events: run1_events.tsv, confounds: run1_confounds.tsv}\n";

TEST(ConfigErrors, YamlSyntaxError) {
  StudyDir dir;
  EXPECT_EQ(dir.LoadMessages("tr: 2\n"
                             "conditions: [melody_known, press\n"
                             "subjects: []\n"),
            Messages{"D/study.yaml:3:9: error: YAML syntax error: end of sequence flow not found"});
}

TEST(ConfigErrors, MissingAndEmptyConfigFiles) {
  StudyDir dir;
  const LoadedConfig missing = LoadConfig(dir.Path("absent.yaml"));
  EXPECT_EQ(dir.Messages(missing), Messages{"D/absent.yaml: error: cannot read the config file"});
  EXPECT_EQ(dir.LoadMessages("# nothing but a comment\n"),
            Messages{"D/study.yaml: error: the config is empty; it needs at least tr, conditions "
                     "and subjects"});
  EXPECT_EQ(dir.LoadMessages("- tr: 2\n"),
            Messages{"D/study.yaml:1:1: error: expected a mapping with keys version, tr, "
                     "slice_reference, hrf, drift, autocorrelation, conditions, ignore, "
                     "confounds, censor, contrasts, mask, subjects, subjects_from, output, "
                     "participants, got a list"});
}

TEST(ConfigErrors, UnknownKeysAtEveryLevelWithSuggestion) {
  StudyDir dir;
  EXPECT_EQ(
      dir.LoadMessages("tr: 2\n"
                       "drfit: {kind: cosine}\n"
                       "hrf: {shap: glover}\n"
                       "drift: {cutof_s: 100}\n"
                       "censor: {column: displacement, abve: 0.5}\n"
                       "conditions: [melody_known, melody_new, press]\n"
                       "confounds: [shift_x]\n"
                       "colour: blue\n"
                       "subjects:\n"
                       "  - id: s01\n"
                       "    rnus: []\n"
                       "    runs:\n"
                       "      - data: run1.nii.gz\n"
                       "        confound: run1_confounds.tsv\n"
                       "        events:\n"
                       "          press: [{onset: 1, duraton: 0}]\n"
                       "          melody_known: {onset: [1, 2], duration: 3}\n"),
      (Messages{"D/study.yaml:2:1: error: unknown key 'drfit' (did you mean 'drift'?)",
                "D/study.yaml:3:7: error: hrf: unknown key 'shap' (did you mean 'shape'?)",
                "D/study.yaml:4:9: error: drift: unknown key 'cutof_s' (did you mean 'cutoff_s'?)",
                "D/study.yaml:5:9: error: censor: missing required key 'above'",
                "D/study.yaml:5:32: error: censor: unknown key 'abve' (did you mean 'above'?)",
                "D/study.yaml:8:1: error: unknown key 'colour'; valid keys: version, tr, "
                "slice_reference, hrf, drift, autocorrelation, conditions, ignore, confounds, "
                "censor, contrasts, mask, subjects, subjects_from, output, participants",
                "D/study.yaml:11:5: error: subjects[0]: unknown key 'rnus' (did you mean 'runs'?)",
                "D/study.yaml:13:9: error: subjects[0].runs[0]: no confounds file, but the model "
                "needs one for confounds (shift_x)",
                "D/study.yaml:14:9: error: subjects[0].runs[0]: unknown key 'confound' (did you "
                "mean 'confounds'?)",
                "D/study.yaml:16:19: error: subjects[0].runs[0].events.press[0]: missing required "
                "key 'duration'",
                "D/study.yaml:16:30: error: subjects[0].runs[0].events.press[0]: unknown key "
                "'duraton' (did you mean 'duration'?)",
                "D/study.yaml:17:25: error: subjects[0].runs[0].events.melody_known: missing "
                "required key 'onsets'",
                "D/study.yaml:17:26: error: subjects[0].runs[0].events.melody_known: unknown key "
                "'onset' (did you mean 'onsets'?)"}));
}

TEST(ConfigErrors, DuplicateKeys) {
  StudyDir dir;
  EXPECT_EQ(dir.LoadMessages("tr: 2\n"
                             "conditions: [melody_known, melody_new, press]\n"
                             "tr: 3\n" +
                             kSubjects),
            Messages{"D/study.yaml:3:1: error: duplicate key 'tr' (first given at line 1)"});
}

TEST(ConfigErrors, WrongTypes) {
  StudyDir dir;
  EXPECT_EQ(
      dir.LoadMessages("tr: two\n"
                       "slice_reference: [0.5]\n"
                       "hrf: glover\n"
                       "drift: {kind: polynomial, degree: 2.5}\n"
                       "autocorrelation:\n"
                       "conditions: melody_known\n"
                       "subjects: {id: s01}\n"),
      (Messages{"D/study.yaml:1:5: error: tr: expected a number in seconds, got 'two'",
                "D/study.yaml:2:18: error: slice_reference: expected a number in [0, 1], got a "
                "list",
                "D/study.yaml:3:6: error: hrf: expected a mapping with keys shape, derivatives, "
                "fir_bin_s, fir_bins, got 'glover'",
                "D/study.yaml:4:35: error: drift.degree: expected a whole number, got '2.5'",
                "D/study.yaml:5:1: error: autocorrelation: expected one of: ar1, none, got "
                "nothing",
                "D/study.yaml:6:13: error: conditions: expected a list of condition names, got "
                "'melody_known'",
                "D/study.yaml:7:11: error: subjects: expected a list of subjects ({id, runs}), "
                "got a mapping"}));
}

TEST(ConfigErrors, UnknownWordsForEnumeratedSettings) {
  StudyDir dir;
  EXPECT_EQ(
      dir.LoadMessages("tr: 2\n"
                       "hrf: {shape: double-gama, derivatives: dispersion}\n"
                       "drift: {kind: cosines}\n"
                       "autocorrelation: ar2\n"
                       "conditions: [melody_known, melody_new, press]\n" +
                       kSubjects),
      (Messages{"D/study.yaml:2:14: error: hrf.shape: unknown value 'double-gama' (did you mean "
                "'double-gamma'?); expected one of: double-gamma, glover, fir",
                "D/study.yaml:2:40: error: hrf.derivatives: unknown value 'dispersion'; expected "
                "one of: none, time, time+dispersion",
                "D/study.yaml:3:15: error: drift.kind: unknown value 'cosines' (did you mean "
                "'cosine'?); expected one of: cosine, polynomial, none",
                "D/study.yaml:4:18: error: autocorrelation: unknown value 'ar2' (did you mean "
                "'ar1'?); expected one of: ar1, none"}));
}

TEST(ConfigErrors, OutOfRangeValues) {
  StudyDir dir;
  EXPECT_EQ(dir.LoadMessages("tr: 0\n"
                             "slice_reference: 1.5\n"
                             "drift: {cutoff_s: -10}\n"
                             "conditions: [melody_known, melody_new, press]\n"
                             "confounds: [shift_x]\n"
                             "censor: {column: displacement, above: 0}\n"
                             "version: 2\n" +
                             kSubjects),
            (Messages{"D/study.yaml:1:5: error: tr: must be > 0 seconds, got 0",
                      "D/study.yaml:2:18: error: slice_reference: must be in [0, 1], got 1.5",
                      "D/study.yaml:3:19: error: drift.cutoff_s: must be > 0 seconds, got -10",
                      "D/study.yaml:6:39: error: censor.above: must be > 0, got 0",
                      "D/study.yaml:7:10: error: version: unsupported version 2; this boldsum "
                      "reads version 1"}));
  EXPECT_EQ(dir.LoadMessages("tr: -2.5\n"
                             "drift: {kind: polynomial, degree: 11}\n"
                             "hrf: {shape: fir, fir_bins: 0, fir_bin_s: -1}\n"
                             "conditions: [melody_known, melody_new, press]\n" +
                             kSubjects),
            (Messages{"D/study.yaml:1:5: error: tr: must be > 0 seconds, got -2.5",
                      "D/study.yaml:2:35: error: drift.degree: must be in 1..10, got 11",
                      "D/study.yaml:3:29: error: hrf.fir_bins: must be in 1..1000, got 0",
                      "D/study.yaml:3:43: error: hrf.fir_bin_s: must be > 0 seconds, got -1"}));
}

TEST(ConfigErrors, SettingsThatDoNotApplyToTheChosenKind) {
  StudyDir dir;
  EXPECT_EQ(
      dir.LoadMessages("tr: 2\n"
                       "hrf: {shape: fir, derivatives: time}\n"
                       "drift: {kind: none, degree: 3, cutoff_s: 90}\n"
                       "conditions: [melody_known, melody_new, press]\n" +
                       kSubjects),
      (Messages{"D/study.yaml:2:32: error: hrf.derivatives: derivatives cannot be combined with "
                "shape fir (an FIR basis has no HRF to differentiate)",
                "D/study.yaml:3:29: error: drift.degree: only used with kind polynomial (kind is "
                "none)",
                "D/study.yaml:3:42: error: drift.cutoff_s: only used with kind cosine (kind is "
                "none)"}));
  EXPECT_EQ(dir.LoadMessages("tr: 2\n"
                             "hrf: {fir_bins: 4}\n"
                             "conditions: [melody_known, melody_new, press]\n" +
                             kSubjects),
            Messages{"D/study.yaml:2:17: error: hrf.fir_bins: only used with shape fir"});
}

TEST(ConfigErrors, MissingRequiredKeys) {
  StudyDir dir;
  EXPECT_EQ(dir.LoadMessages("slice_reference: 0.5\n"),
            (Messages{"D/study.yaml:1:1: error: missing required key 'tr'",
                      "D/study.yaml:1:1: error: missing required key 'conditions'",
                      "D/study.yaml:1:1: error: missing required key 'subjects' (or "
                      "'subjects_from' to find the subjects in a BIDS dataset)"}));
  EXPECT_EQ(dir.LoadMessages("tr: 2\n"
                             "conditions: [melody_known, melody_new, press]\n"
                             "subjects:\n"
                             "  - runs:\n"
                             "      - {data: run1.nii.gz}\n"
                             "      - events: run1_events.tsv\n"
                             "  - id: s02\n"),
            (Messages{"D/study.yaml:4:5: error: subjects[0]: missing required key 'id'",
                      "D/study.yaml:5:9: error: subjects[0].runs[0]: missing required key "
                      "'events'",
                      "D/study.yaml:6:9: error: subjects[0].runs[1]: missing required key 'data'",
                      "D/study.yaml:7:5: error: subjects[1]: missing required key 'runs'"}));
}

TEST(ConfigErrors, ContrastProblems) {
  StudyDir dir;
  EXPECT_EQ(
      dir.LoadMessages("tr: 2\n"
                       "conditions: [melody_known, melody_new, press]\n"
                       "confounds: [shift_x, shift_y, shift_z]\n"
                       "contrasts:\n"
                       "  known_vs_new: {melody_knwon: 1, melody_new: -1}\n"
                       "  nothing: {melody_known: 0, press: 0.0}\n"
                       "  any_melody: [{melody_known: 1}, {melody_new: 0}]\n"
                       "  known vs new: {melody_known: 1}\n"
                       "  empty_f: []\n"
                       "  empty_t: {}\n"
                       "  wordy: {melody_known: lots}\n"
                       "  shifty: {shift_xx: 1}\n"
                       "  scalar: 1\n"
                       "  known_dt: {melody_known_dt: 1, drift_cos1: 1}\n" +
                       kSubjects),
      (Messages{
          "D/study.yaml:5:18: error: contrasts.known_vs_new: weight for unknown condition "
          "'melody_knwon' (did you mean 'melody_known'?); known: melody_known, melody_new, press",
          "D/study.yaml:6:12: error: contrasts.nothing: all weights are zero",
          "D/study.yaml:7:35: error: contrasts.any_melody[1]: all weights are zero",
          "D/study.yaml:8:3: error: contrasts: name 'known vs new' may contain only letters, "
          "digits, '_' and '-' (it becomes part of file names)",
          "D/study.yaml:9:12: error: contrasts.empty_f: an F contrast needs at least one row",
          "D/study.yaml:10:12: error: contrasts.empty_t: has no weights",
          "D/study.yaml:11:25: error: contrasts.wordy.melody_known: expected a number (the "
          "weight), got 'lots'",
          "D/study.yaml:12:12: error: contrasts.shifty: weight for unknown condition 'shift_xx' "
          "(did you mean 'shift_x'?); known: melody_known, melody_new, press",
          "D/study.yaml:13:11: error: contrasts.scalar: expected a mapping of weights by "
          "condition (t contrast) or a list of such mappings (F contrast), got '1'",
          "D/study.yaml:14:14: error: contrasts.known_dt: weight for unknown condition "
          "'melody_known_dt' (did you mean 'melody_known'?); known: melody_known, melody_new, "
          "press",
          "D/study.yaml:14:34: error: contrasts.known_dt: weight for unknown condition "
          "'drift_cos1'; known: melody_known, melody_new, press"}));
}

// FIR bin columns exist up to the bin count: with tr 0.3 s and no fir_bins, 24 s / 0.3 s
// = 80 bins (the division gives 80.00000000000001 in doubles, which must not become 81).
TEST(ConfigErrors, FirBinKeysStopAtTheBinCount) {
  StudyDir dir;
  EXPECT_EQ(dir.LoadMessages("tr: 0.3\n"
                             "hrf: {shape: fir}\n"
                             "conditions: [melody_known, melody_new, press]\n"
                             "contrasts:\n"
                             "  late: {melody_known_bin80: 1, melody_known_bin81: 1, press: 1}\n" +
                             kSubjects),
            Messages{"D/study.yaml:5:33: error: contrasts.late: weight for unknown condition "
                     "'melody_known_bin81' (did you mean 'melody_known_bin1'?); known: "
                     "melody_known, melody_new, press"});
}

TEST(ConfigErrors, ConditionNames) {
  StudyDir dir;
  EXPECT_EQ(dir.LoadMessages(
                "tr: 2\n"
                "hrf: {derivatives: time}\n"
                "conditions: [melody_known, melody_new, press, melody_known, intercept, press_dt]\n"
                "ignore: [press]\n"
                "confounds: [shift_x, melody_known_dt]\n" +
                kSubjects),
            (Messages{"D/study.yaml:3:47: error: conditions[3]: 'melody_known' is listed twice "
                      "(first at line 3)",
                      "D/study.yaml:3:61: error: conditions[4]: 'intercept' is reserved for "
                      "columns boldsum adds (intercept, drift_*, censor_*)",
                      "D/study.yaml:3:72: error: conditions[5]: condition 'press_dt' gives design "
                      "column 'press_dt', which condition 'press' also gives; design column "
                      "names must be unique",
                      "D/study.yaml:4:10: error: ignore[0]: 'press' is also listed under "
                      "conditions",
                      "D/study.yaml:5:22: error: confounds[1]: 'melody_known_dt' is also a design "
                      "column of condition 'melody_known'; design column names must be unique",
                      "D/study.yaml:9:29: warning: subjects[0].runs[0].events: no events for "
                      "condition 'press_dt' in this run",
                      // The confounds table checked against the model's confounds list.
                      "D/run1_confounds.tsv:1: error: column 'melody_known_dt' (from confounds) "
                      "is not in the header"}));
}

// Five unrelated mistakes in one file: all five are reported, in file order.
}  // namespace
}  // namespace boldsum
