// subjects_from: mistakes in the section, in the dataset's sidecars and tables, and
// ambiguities in the dataset are errors at their file:line:column, each reported once.
#include <gtest/gtest.h>

#include <filesystem>
#include <string>
#include <vector>

#include "bids_test_util.h"

namespace boldsum {
namespace {

using testing::kModel;
using testing::Sidecar;
using testing::StudyDir;
using testing::WriteRun;
using Lines = std::vector<std::string>;

const std::string kFromBids = kModel + "subjects_from: {bids: bids, task: melodies}\n";

void WriteTwoSubjects(const StudyDir& dir) {
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_run-1");
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_run-2");
  WriteRun(dir, "bids/sub-02/func/sub-02_task-melodies_run-1");
}

TEST(BidsErrors, SubjectsAndSubjectsFromTogether) {
  StudyDir dir;
  WriteTwoSubjects(dir);
  EXPECT_EQ(dir.LoadMessages(kModel + "subjects:\n"
                                      "  - id: s01\n"
                                      "    runs: [{data: run1.nii.gz, events: run1_events.tsv}]\n"
                                      "subjects_from: {bids: bids, task: melodies}\n"),
            Lines{"D/study.yaml:6:1: error: subjects_from: give either subjects or "
                  "subjects_from, not both (subjects at line 3)"});
}

TEST(BidsErrors, SectionMistakes) {
  StudyDir dir;
  WriteTwoSubjects(dir);
  EXPECT_EQ(dir.LoadMessages(kModel + "subjects_from:\n  sesion: 01\n"),
            (Lines{"D/study.yaml:4:3: error: subjects_from: unknown key 'sesion' (did you mean "
                   "'session'?)",
                   "D/study.yaml:4:3: error: subjects_from: missing required key 'bids'",
                   "D/study.yaml:4:3: error: subjects_from: missing required key 'task'"}));
  EXPECT_EQ(dir.LoadMessages(
                kModel + "subjects_from:\n"
                         "  bids: data/bids\n"
                         "  derivatives: bids/sub-01/func/sub-01_task-melodies_run-1_bold.nii.gz\n"
                         "  task: melodies_v2\n"
                         "  session: ses-\n"
                         "  space: [MNI]\n"
                         "  desc: desc-preproc\n"),
            (Lines{"D/study.yaml:4:9: error: subjects_from.bids: folder 'data/bids' not found "
                   "(looked for D/data/bids)",
                   "D/study.yaml:5:16: error: subjects_from.derivatives: "
                   "'bids/sub-01/func/sub-01_task-melodies_run-1_bold.nii.gz' is a file; expected "
                   "a folder of preprocessed bold images",
                   "D/study.yaml:6:9: error: subjects_from.task: 'melodies_v2' is not a BIDS label "
                   "(letters and digits only, as in task-<label> of the file names)",
                   "D/study.yaml:7:12: error: subjects_from.session: 'ses-' is not a BIDS label "
                   "(letters and digits only, as in ses-<label> of the file names)",
                   "D/study.yaml:8:10: error: subjects_from.space: expected a BIDS space label, "
                   "got a list"}));
}

TEST(BidsErrors, ConfoundsPattern) {
  StudyDir dir;
  WriteTwoSubjects(dir);
  const std::string head =
      kModel + "confounds: [shift_x]\nsubjects_from:\n  bids: bids\n  task: melodies\n";
  EXPECT_EQ(dir.LoadMessages(head),
            Lines{"D/study.yaml:5:3: error: subjects_from: no confounds pattern, but the model "
                  "needs a confounds table per run for confounds (shift_x)"});
  EXPECT_EQ(dir.LoadMessages(head + "  confounds: \"{stem}_{run}.tsv\"\n"),
            Lines{"D/study.yaml:7:14: error: subjects_from.confounds: unknown placeholder {run} "
                  "in '{stem}_{run}.tsv'; known: {stem}, {subject}, {session}"});
  EXPECT_EQ(dir.LoadMessages(head + "  confounds: \"{stem.tsv\"\n"),
            Lines{"D/study.yaml:7:14: error: subjects_from.confounds: '{stem.tsv' has a '{' "
                  "without its '}'"});
  // Found tables have their header checked like listed ones, once per table.
  dir.Write("bids/sub-01/func/sub-01_task-melodies_run-1_confounds.tsv", "shift_y\n0.1\n");
  dir.Write("bids/sub-01/func/sub-01_task-melodies_run-2_confounds.tsv", testing::kConfoundsTsv);
  dir.Write("bids/sub-02/func/sub-02_task-melodies_run-1_confounds.tsv", testing::kConfoundsTsv);
  EXPECT_EQ(dir.LoadMessages(head + "  confounds: \"{stem}_confounds.tsv\"\n"),
            Lines{"D/bids/sub-01/func/sub-01_task-melodies_run-1_confounds.tsv:1: error: column "
                  "'shift_x' (from confounds) is not in the header (did you mean 'shift_y'?)"});
}

TEST(BidsErrors, SidecarTrDiffersFromTheConfig) {
  StudyDir dir;
  WriteTwoSubjects(dir);
  dir.Write("bids/task-melodies_bold.json", Sidecar(2.5));
  // Within 1% of tr = 2 is accepted (2.019 s); beyond it is not (2.021 s).
  dir.Write("bids/sub-01/func/sub-01_task-melodies_run-1_bold.json", Sidecar(2.019));
  EXPECT_EQ(dir.LoadMessages(kFromBids),
            Lines{"D/bids/task-melodies_bold.json:3:21: error: RepetitionTime is 2.5 s but the "
                  "config's tr is 2 s (they may differ by at most 1%); it applies to "
                  "sub-01_task-melodies_run-2_bold.nii.gz and 1 other run"});
  dir.Write("bids/sub-01/func/sub-01_task-melodies_run-1_bold.json", Sidecar(2.021));
  dir.Write("bids/task-melodies_bold.json", Sidecar(1.981));
  EXPECT_EQ(dir.LoadMessages(kFromBids),
            Lines{"D/bids/sub-01/func/sub-01_task-melodies_run-1_bold.json:3:21: error: "
                  "RepetitionTime is 2.021 s but the config's tr is 2 s (they may differ by at "
                  "most 1%); it applies to sub-01_task-melodies_run-1_bold.nii.gz"});
}

TEST(BidsErrors, MalformedSidecars) {
  StudyDir dir;
  WriteTwoSubjects(dir);
  dir.Write("bids/sub-01/sub-01_task-melodies_bold.json",
            "{\n  \"RepetitionTime\": 2,\n  \"SliceTiming\": [0, 0.5,]\n}\n");
  dir.Write("bids/sub-02/sub-02_task-melodies_bold.json",
            "{\"RepetitionTime\": \"2\", \"TaskName\": \"melodies\"}");
  dir.Write("bids/task-melodies_bold.json", "{\"RepetitionTime\": 2, \"RepetitionTime\": 2.0}");
  EXPECT_EQ(dir.LoadMessages(kFromBids),
            (Lines{"D/bids/sub-01/sub-01_task-melodies_bold.json:3:26: error: invalid JSON: "
                   "expected a JSON value, found ']'",
                   "D/bids/task-melodies_bold.json:1:41: error: RepetitionTime is given twice",
                   "D/bids/sub-02/sub-02_task-melodies_bold.json:1:20: error: RepetitionTime "
                   "must be a number of seconds > 0, got \"2\""}));
}

TEST(BidsErrors, AmbiguousDatasets) {
  StudyDir dir;
  WriteTwoSubjects(dir);
  // Two events tables with two entities each apply to sub-01 run-1 from one folder.
  std::filesystem::remove(dir.Path("bids/sub-01/func/sub-01_task-melodies_run-1_events.tsv"));
  dir.Write("bids/sub-01/sub-01_task-melodies_events.tsv", testing::kEventsTsv);
  dir.Write("bids/sub-01/task-melodies_run-1_events.tsv", testing::kEventsTsv);
  // The same run of sub-02 in .nii and .nii.gz.
  dir.Write("bids/sub-02/func/sub-02_task-melodies_run-1_bold.nii", "placeholder\n");
  // Preprocessed images in two spaces without a space filter.
  dir.Write("prep/sub-01/func/sub-01_task-melodies_run-2_space-T1w_bold.nii.gz", "x\n");
  dir.Write("prep/sub-01/func/sub-01_task-melodies_run-2_space-MNI_bold.nii.gz", "x\n");
  EXPECT_EQ(dir.LoadMessages(kModel + "subjects_from: {bids: bids, task: melodies}\n"),
            (Lines{"D/bids/sub-01/task-melodies_run-1_events.tsv: error: this file and "
                   "sub-01_task-melodies_events.tsv both apply to "
                   "sub-01/func/sub-01_task-melodies_run-1_bold.nii.gz from the same folder; BIDS "
                   "allows only one",
                   "D/bids/sub-02/func/sub-02_task-melodies_run-1_bold.nii.gz: error: the same run "
                   "as sub-02_task-melodies_run-1_bold.nii (the names differ only in space, res, "
                   "den or desc); choose one with subjects_from.space or subjects_from.desc"}));
  EXPECT_EQ(
      dir.LoadMessages(kModel + "subjects_from: {bids: bids, derivatives: prep, task: melodies}\n")
          .front(),
      "D/prep/sub-01/func/sub-01_task-melodies_run-2_space-T1w_bold.nii.gz: error: the same run "
      "as sub-01_task-melodies_run-2_space-MNI_bold.nii.gz (the names differ only in space, res, "
      "den or desc); choose one with subjects_from.space or subjects_from.desc");
}

TEST(BidsErrors, FoundEventsTablesAreValidatedOnce) {
  StudyDir dir;
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_run-1", false);
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_run-2", false);
  WriteRun(dir, "bids/sub-02/func/sub-02_task-melodies_run-1", true,
           "onset\tduration\ttrial_type\n1\tn/a\tmelody_known\n");
  // Shared by both runs of sub-01 through inheritance; reported once.
  dir.Write("bids/sub-01/sub-01_task-melodies_events.tsv",
            "onset\tduration\ttrial_type\n2\t4\tmelody_knwon\n6\t1\tpress\n");
  EXPECT_EQ(dir.LoadMessages(kFromBids),
            (Lines{"D/bids/sub-01/sub-01_task-melodies_events.tsv:2:5: error: trial types not "
                   "listed under conditions: 'melody_knwon' (line 2; did you mean "
                   "'melody_known'?); add them to conditions or to ignore",
                   "D/bids/sub-02/func/sub-02_task-melodies_run-1_events.tsv:2:3: error: column "
                   "'duration': 'n/a' is not allowed; give the duration in seconds (0 for an "
                   "impulse)"}));
  // A valid table without some condition's events is a warning, as for listed runs.
  dir.Write("bids/sub-01/sub-01_task-melodies_events.tsv", testing::kEventsTsv);
  dir.Write("bids/sub-02/func/sub-02_task-melodies_run-1_events.tsv",
            "onset\tduration\ttrial_type\n1\t2\tmelody_known\n");
  const LoadedConfig loaded = dir.Load(kFromBids);
  EXPECT_FALSE(loaded.diagnostics.HasErrors());
  EXPECT_EQ(dir.Messages(loaded),
            (Lines{"D/bids/sub-02/func/sub-02_task-melodies_run-1_events.tsv: warning: no events "
                   "for condition 'melody_new' in this table",
                   "D/bids/sub-02/func/sub-02_task-melodies_run-1_events.tsv: warning: no events "
                   "for condition 'press' in this table"}));
}

}  // namespace
}  // namespace boldsum
