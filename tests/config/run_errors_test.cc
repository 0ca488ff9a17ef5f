// Problems in the subjects section: missing files, events tables and inline events,
// subject ids, confounds tables; and several mistakes reported together. Each message is
// asserted exactly, and StudyDir::Load checks that LoadConfig wrote nothing.
#include <gtest/gtest.h>

#include "boldsum/config.h"
#include "study_dir.h"

namespace boldsum {
namespace {

using testing::StudyDir;
using Messages = std::vector<std::string>;

TEST(ConfigErrors, MissingFilesAreNamedAtTheirConfigLine) {
  StudyDir dir;
  EXPECT_EQ(dir.LoadMessages("tr: 2\n"
                             "conditions: [melody_known, melody_new, press]\n"
                             "mask: masks/brain.nii.gz\n"
                             "subjects:\n"
                             "  - id: s01\n"
                             "    runs:\n"
                             "      - data: run9.nii.gz\n"
                             "        events: run9_events.tsv\n"
                             "        confounds: run9_confounds.tsv\n"
                             "      - {data: masks, events: run1_events.tsv}\n"),
            (Messages{"D/study.yaml:3:7: error: mask: file 'masks/brain.nii.gz' not found "
                      "(looked for D/masks/brain.nii.gz)",
                      "D/study.yaml:7:15: error: subjects[0].runs[0].data: file 'run9.nii.gz' "
                      "not found (looked for D/run9.nii.gz)",
                      "D/study.yaml:8:17: error: subjects[0].runs[0].events: file "
                      "'run9_events.tsv' not found (looked for D/run9_events.tsv)",
                      "D/study.yaml:9:20: error: subjects[0].runs[0].confounds: file "
                      "'run9_confounds.tsv' not found (looked for D/run9_confounds.tsv)",
                      "D/study.yaml:10:16: error: subjects[0].runs[1].data: 'masks' is neither a "
                      "NIfTI image (.nii, .nii.gz) nor an ROI table (.tsv)"}));
  dir.Write("folder.nii/placeholder", "");
  EXPECT_EQ(dir.LoadMessages("tr: 2\n"
                             "conditions: [melody_known, melody_new, press]\n"
                             "subjects:\n"
                             "  - id: s01\n"
                             "    runs: [{data: folder.nii, events: run1_events.tsv}]\n"),
            Messages{"D/study.yaml:5:19: error: subjects[0].runs[0].data: 'folder.nii' is a "
                     "folder; expected a file"});
}

TEST(ConfigErrors, EventsTableProblems) {
  StudyDir dir;
  dir.Write("bad_events.tsv",
            "onset\tduration\ttrial_type\tamplitude\n"
            "2.0\t4.0\tmelody_known\t1\n"
            "-1.5\t4.0\tmelody_new\t1\n"
            "10\t-2\tpress\t1\n"
            "12\tn/a\tmelody_known\t1\n"
            "1.5x\t2\tpress\tloud\n"
            "20\t1\tmelody_nwe\t1\n"
            "30\t1\tbreathing\t1\n"
            "31\tn/a\trest\tn/a\n"
            "32\t1\tmelody_nwe\t1\n");
  EXPECT_EQ(
      dir.LoadMessages("tr: 2\n"
                       "conditions: [melody_known, melody_new, press]\n"
                       "ignore: [rest]\n"
                       "subjects:\n"
                       "  - id: s01\n"
                       "    runs:\n"
                       "      - {data: run1.nii.gz, events: bad_events.tsv}\n"),
      (Messages{"D/bad_events.tsv:3:1: error: column 'onset': must be >= 0 seconds, got -1.5",
                "D/bad_events.tsv:4:4: error: column 'duration': must be >= 0 seconds, got -2",
                "D/bad_events.tsv:5:4: error: column 'duration': 'n/a' is not allowed; give "
                "the duration in seconds (0 for an impulse)",
                "D/bad_events.tsv:6:1: error: column 'onset': expected a number in seconds, "
                "got '1.5x'",
                "D/bad_events.tsv:6:14: error: column 'amplitude': expected a number, got "
                "'loud'",
                "D/bad_events.tsv:7:6: error: trial types not listed under conditions: "
                "'melody_nwe' (line 7; did you mean 'melody_new'?), 'breathing' (line 8); "
                "add them to conditions or to ignore"}));
}

TEST(ConfigErrors, EventsTableStructure) {
  StudyDir dir;
  dir.Write("ragged.tsv", "onset\tduration\ttrial_type\n1\t2\tpress\n3\t4\n");
  dir.Write("no_type.tsv", "onset\tlength\n1\t2\n");
  EXPECT_EQ(dir.LoadMessages("tr: 2\n"
                             "conditions: [melody_known, melody_new, press]\n"
                             "subjects:\n"
                             "  - id: s01\n"
                             "    runs:\n"
                             "      - {data: run1.nii.gz, events: ragged.tsv}\n"
                             "      - {data: run1.nii.gz, events: no_type.tsv}\n"),
            (Messages{"D/ragged.tsv:3: error: row has 2 tab-separated cells but the header has 3 "
                      "columns",
                      "D/no_type.tsv:1: error: missing required column 'duration' (an events "
                      "table needs onset, duration and trial_type)",
                      "D/no_type.tsv:1: error: missing required column 'trial_type' (an events "
                      "table needs onset, duration and trial_type)"}));
}

TEST(ConfigErrors, InlineEventProblems) {
  StudyDir dir;
  EXPECT_EQ(
      dir.LoadMessages(
          "tr: 2\n"
          "conditions: [melody_known, melody_new, press]\n"
          "ignore: [breathing]\n"
          "subjects:\n"
          "  - id: s01\n"
          "    runs:\n"
          "      - data: run1.nii.gz\n"
          "        events:\n"
          "          melody_known: [{onset: -4, duration: 2}, {onset: 1, duration: x}]\n"
          "          melody_new: {onsets: [1, 2, 3], duration: [2, 2]}\n"
          "          press: {onsets: [5, -1], duration: 0, amplitude: [1, y]}\n"
          "          melody_nwe: [{onset: 1, duration: 1}]\n"
          "          breathing: whatever\n"
          "          melody_new_2: 7\n"),
      (Messages{"D/study.yaml:9:34: error: subjects[0].runs[0].events.melody_known[0].onset: must "
                "be >= 0 seconds, got -4",
                "D/study.yaml:9:73: error: subjects[0].runs[0].events.melody_known[1].duration: "
                "expected a number in seconds, got 'x'",
                "D/study.yaml:10:53: error: subjects[0].runs[0].events.melody_new.duration: has 2 "
                "values but onsets has 3",
                "D/study.yaml:11:31: error: subjects[0].runs[0].events.press.onsets[1]: must be >= "
                "0 seconds, got -1",
                "D/study.yaml:11:64: error: subjects[0].runs[0].events.press.amplitude[1]: "
                "expected a number, got 'y'",
                "D/study.yaml:12:11: error: subjects[0].runs[0].events: trial type 'melody_nwe' is "
                "not listed under conditions (did you mean 'melody_new'?); add it to conditions or "
                "to ignore",
                "D/study.yaml:14:11: error: subjects[0].runs[0].events: trial type 'melody_new_2' "
                "is not listed under conditions (did you mean 'melody_new'?); add it to conditions "
                "or to ignore"}));
}

TEST(ConfigErrors, SubjectIds) {
  StudyDir dir;
  EXPECT_EQ(dir.LoadMessages("tr: 2\n"
                             "conditions: [melody_known, melody_new, press]\n"
                             "subjects:\n"
                             "  - id: s01\n"
                             "    runs: [{data: run1.nii.gz, events: run1_events.tsv}]\n"
                             "  - id: s02\n"
                             "    runs: [{data: run1.nii.gz, events: run1_events.tsv}]\n"
                             "  - id: s01\n"
                             "    runs: [{data: run1.nii.gz, events: run1_events.tsv}]\n"
                             "  - id: s/03\n"
                             "    runs: []\n"),
            (Messages{"D/study.yaml:8:9: error: subjects[2].id: duplicate subject id 's01' "
                      "(first at line 4)",
                      "D/study.yaml:10:9: error: subjects[3].id: 's/03' may contain only letters, "
                      "digits, '_' and '-' (it names the subject's output folder)",
                      "D/study.yaml:11:11: error: subjects[3].runs: must list at least one run"}));
}

TEST(ConfigErrors, ReservedSubjectIds) {
  StudyDir dir;
  EXPECT_EQ(dir.LoadMessages("tr: 2\n"
                             "conditions: [melody_known, melody_new, press]\n"
                             "subjects:\n"
                             "  - id: pool-ready\n"
                             "    runs: [{data: run1.nii.gz, events: run1_events.tsv}]\n"
                             "  - id: report\n"
                             "    runs: [{data: run1.nii.gz, events: run1_events.tsv}]\n"),
            (Messages{"D/study.yaml:4:5: error: subject id 'pool-ready' is reserved: "
                      "OUT/pool-ready/ holds the study's stacked results",
                      "D/study.yaml:6:5: error: subject id 'report' is reserved: OUT/report/ holds "
                      "the study's HTML report"}));
}

TEST(ConfigErrors, ConfoundsFileAndColumns) {
  StudyDir dir;
  dir.Write("other_confounds.tsv", "shift_x\tshift_yy\tdisp\n1\t2\t3\n");
  EXPECT_EQ(dir.LoadMessages("tr: 2\n"
                             "conditions: [melody_known, melody_new, press]\n"
                             "confounds: [shift_x, shift_y]\n"
                             "censor: {column: displacement, above: 0.5}\n"
                             "subjects:\n"
                             "  - id: s01\n"
                             "    runs:\n"
                             "      - {data: run1.nii.gz, events: run1_events.tsv}\n"
                             "      - data: run1.nii.gz\n"
                             "        events: run1_events.tsv\n"
                             "        confounds: other_confounds.tsv\n"),
            (Messages{"D/study.yaml:8:9: error: subjects[0].runs[0]: no confounds file, but the "
                      "model needs one for confounds (shift_x, shift_y) and censoring "
                      "(displacement)",
                      "D/other_confounds.tsv:1: error: column 'shift_y' (from confounds) is not "
                      "in the header (did you mean 'shift_yy'?)",
                      "D/other_confounds.tsv:1: error: column 'displacement' (from "
                      "censor.column) is not in the header"}));
}

TEST(ConfigErrors, FiveMistakesAreAllReported) {
  StudyDir dir;
  const LoadedConfig loaded = dir.Load(
      "tr: two\n"
      "conditions: [melody_known, melody_new, press]\n"
      "drfit: {kind: cosine}\n"
      "contrasts:\n"
      "  known: {melody_knwon: 1}\n"
      "subjects:\n"
      "  - id: s01\n"
      "    runs:\n"
      "      - {data: run2.nii.gz, events: run1_events.tsv}\n"
      "  - id: s01\n"
      "    runs:\n"
      "      - {data: run1.nii.gz, events: run1_events.tsv}\n");
  EXPECT_EQ(loaded.diagnostics.ErrorCount(), 5);
  std::vector<int> lines;
  for (const Diagnostic& d : loaded.diagnostics.all()) lines.push_back(d.where.line);
  EXPECT_EQ(lines, (std::vector<int>{1, 3, 5, 9, 10}));
  EXPECT_EQ(dir.Messages(loaded),
            (Messages{"D/study.yaml:1:5: error: tr: expected a number in seconds, got 'two'",
                      "D/study.yaml:3:1: error: unknown key 'drfit' (did you mean 'drift'?)",
                      "D/study.yaml:5:11: error: contrasts.known: weight for unknown condition "
                      "'melody_knwon' (did you mean 'melody_known'?); known: melody_known, "
                      "melody_new, press",
                      "D/study.yaml:9:16: error: subjects[0].runs[0].data: file 'run2.nii.gz' not "
                      "found (looked for D/run2.nii.gz)",
                      "D/study.yaml:10:9: error: subjects[1].id: duplicate subject id 's01' "
                      "(first at line 7)"}));
}

}  // namespace
}  // namespace boldsum
