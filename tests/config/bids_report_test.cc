// subjects_from: every bold image or subject that discovery leaves out appears in the
// report with its reason, in subject order and, within a subject, in listing order.
#include <gtest/gtest.h>

#include <filesystem>
#include <string>
#include <vector>

#include "bids_test_util.h"

namespace boldsum {
namespace {

using testing::kModel;
using testing::Report;
using testing::StudyDir;
using testing::WriteRun;
using Lines = std::vector<std::string>;

const std::string kFromBids = kModel + "subjects_from: {bids: bids, task: melodies}\n";

TEST(BidsReport, SkippedImagesAndSubjectsWithReasons) {
  StudyDir dir;
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_run-1");
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_run-2", /*with_events=*/false);
  WriteRun(dir, "bids/sub-01/func/sub-01_task-rest_run-1");
  WriteRun(dir, "bids/sub-01/func/sub-01_task-rest_run-2");
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_acq-fast_run-1");  // a run of its own
  // Not BIDS names, or entities that contradict the folder.
  dir.Write("bids/sub-01/func/sub-01_task-melodies_run 3_bold.nii.gz", "placeholder\n");
  dir.Write("bids/sub-01/func/sub-02_task-melodies_run-4_bold.nii.gz", "placeholder\n");
  // Files that are not bold images, and a bold sidecar, are not candidates at all.
  dir.Write("bids/sub-01/func/sub-01_task-melodies_run-1_sbref.nii.gz", "placeholder\n");
  dir.Write("bids/sub-01/func/sub-01_task-melodies_run-1_bold.json", testing::Sidecar(2.0));
  WriteRun(dir, "bids/sub-02/func/sub-02_task-motor");                  // only another task
  dir.Write("bids/sub-03/anat/sub-03_T1w.nii.gz", "placeholder\n");     // no func folder
  WriteRun(dir, "bids/sub-04/func/sub-04_task-melodies_run-1", false);  // no events at all
  WriteRun(dir, "bids/sub-05/func/sub-05_acq-fast_run-1");              // no task entity
  dir.Write("bids/derivatives/README", "not a subject\n");
  const LoadedConfig loaded = dir.Load(kFromBids);
  EXPECT_FALSE(loaded.diagnostics.HasErrors()) << dir.Messages(loaded).front();
  ASSERT_EQ(loaded.spec.subjects.size(), 1u);
  EXPECT_EQ(loaded.spec.subjects[0].runs.size(), 2u);
  EXPECT_EQ(
      Report(dir, loaded),
      (Lines{"found 1 subject, 2 runs (task melodies) in D/bids",
             "skipped sub-01/func/sub-01_task-melodies_run 3_bold.nii.gz: not a BIDS file name "
             "(<key>-<label> parts joined by '_')",
             "skipped sub-01/func/sub-01_task-melodies_run-2_bold.nii.gz: no events table "
             "sub-01/func/sub-01_task-melodies_run-2_events.tsv (nor one inherited from a "
             "folder above)",
             "skipped sub-01/func/sub-02_task-melodies_run-4_bold.nii.gz: its sub-/ses- entities "
             "do not match its folder",
             "skipped sub-02: no bold images of task melodies",
             "skipped sub-03: no bold images of task melodies",
             "skipped sub-04/func/sub-04_task-melodies_run-1_bold.nii.gz: no events table "
             "sub-04/func/sub-04_task-melodies_run-1_events.tsv (nor one inherited from a "
             "folder above)",
             "skipped sub-04: none of its bold images of task melodies could be used (see above)",
             "skipped sub-05: no bold images of task melodies",
             "skipped 4 bold images of other tasks: (no task entity) (1), motor (1), rest (2)"}));
  // Runs without a run entity sort before numbered ones; acq- makes a run of its own.
  EXPECT_EQ(std::filesystem::path(loaded.spec.subjects[0].runs[0].data_path).filename(),
            "sub-01_task-melodies_acq-fast_run-1_bold.nii.gz");
}

TEST(BidsReport, LinkToMissingContentIsSkipped) {
  StudyDir dir;
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_run-1");
  dir.Write("bids/sub-01/func/sub-01_task-melodies_run-2_events.tsv", testing::kEventsTsv);
  std::filesystem::create_symlink(
      "../../.git/annex/objects/missing",
      dir.Path("bids/sub-01/func/sub-01_task-melodies_run-2_bold.nii.gz"));
  // Not through dir.Load: its before/after snapshot cannot stat a dangling link.
  dir.Write("study.yaml", kFromBids);
  const LoadedConfig loaded = LoadConfig(dir.ConfigPath());
  EXPECT_FALSE(loaded.diagnostics.HasErrors());
  EXPECT_EQ(Report(dir, loaded),
            (Lines{"found 1 subject, 1 run (task melodies) in D/bids",
                   "skipped sub-01/func/sub-01_task-melodies_run-2_bold.nii.gz: a link to a "
                   "missing file (is the image's content fetched?)"}));
}

TEST(BidsReport, NothingUsableIsAnErrorWithTheReasonsAsWarnings) {
  StudyDir dir;
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_run-1", false);
  WriteRun(dir, "bids/sub-01/func/sub-01_task-rest_run-1");
  EXPECT_EQ(dir.LoadMessages(kFromBids),
            (Lines{"D/study.yaml:3:16: error: subjects_from: found no usable runs of task "
                   "melodies in D/bids",
                   "D/study.yaml:3:16: warning: subjects_from: skipped "
                   "sub-01/func/sub-01_task-melodies_run-1_bold.nii.gz: no events table "
                   "sub-01/func/sub-01_task-melodies_run-1_events.tsv (nor one inherited from a "
                   "folder above)",
                   "D/study.yaml:3:16: warning: subjects_from: skipped sub-01: none of its bold "
                   "images of task melodies could be used (see above)",
                   "D/study.yaml:3:16: warning: subjects_from: skipped 1 bold image of other "
                   "tasks: rest (1)"}));
  // An empty dataset folder.
  std::filesystem::remove_all(dir.Path("bids"));
  std::filesystem::create_directories(dir.Path("bids"));
  EXPECT_EQ(dir.LoadMessages(kFromBids),
            Lines{"D/study.yaml:3:16: error: subjects_from: found no usable runs of task "
                  "melodies in D/bids"});
}

TEST(BidsReport, ListedSubjectsHaveNoReport) {
  StudyDir dir;
  const LoadedConfig loaded =
      dir.Load(kModel +
               "subjects:\n"
               "  - id: s01\n"
               "    runs: [{data: run1.nii.gz, events: run1_events.tsv}]\n");
  EXPECT_FALSE(loaded.diagnostics.HasErrors());
  EXPECT_TRUE(loaded.spec.discovery_report.empty());
}

}  // namespace
}  // namespace boldsum
