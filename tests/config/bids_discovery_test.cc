// subjects_from: BIDS trees written by the test load into the expected subjects, runs
// (ordered by session, then run entity), paths and events, and the discovery report
// lists what was found.
#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "bids_test_util.h"

namespace boldsum {
namespace {

using testing::kModel;
using testing::Report;
using testing::Root;
using testing::Sidecar;
using testing::StudyDir;
using testing::WriteRun;
using Lines = std::vector<std::string>;

std::string Errors(const StudyDir& dir, const LoadedConfig& loaded) {
  std::string text;
  for (const std::string& m : dir.Messages(loaded)) text += m + "\n";
  return text;
}

std::vector<std::string> DataPaths(const StudyDir& dir, const SubjectSpec& subject) {
  std::vector<std::string> paths;
  for (const RunSpec& run : subject.runs) paths.push_back(testing::Shown(dir, run.data_path));
  return paths;
}

TEST(BidsDiscovery, SessionsAndRunsInOrder) {
  StudyDir dir;
  // Written out of order on purpose; run-10 after run-2 (entity values, not text).
  WriteRun(dir, "bids/sub-10/func/sub-10_task-melodies_run-1");
  WriteRun(dir, "bids/sub-2/ses-02/func/sub-2_ses-02_task-melodies_run-1");
  WriteRun(dir, "bids/sub-2/ses-01/func/sub-2_ses-01_task-melodies_run-10");
  WriteRun(dir, "bids/sub-2/ses-01/func/sub-2_ses-01_task-melodies_run-2");
  WriteRun(dir, "bids/sub-2/ses-01/func/sub-2_ses-01_task-melodies_run-1");
  dir.Write("bids/dataset_description.json",
            "{\"Name\": \"melodies\", \"BIDSVersion\": \"1.8.0\"}");
  const LoadedConfig loaded = dir.Load(kModel + "subjects_from:\n  bids: bids\n  task: melodies\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << Errors(dir, loaded);
  EXPECT_TRUE(loaded.diagnostics.all().empty()) << Errors(dir, loaded);
  const StudySpec& spec = loaded.spec;
  ASSERT_EQ(spec.subjects.size(), 2u);
  EXPECT_EQ(spec.subjects[0].id, "sub-2");
  EXPECT_EQ(spec.subjects[1].id, "sub-10");
  EXPECT_EQ(DataPaths(dir, spec.subjects[0]),
            (Lines{"D/bids/sub-2/ses-01/func/sub-2_ses-01_task-melodies_run-1_bold.nii.gz",
                   "D/bids/sub-2/ses-01/func/sub-2_ses-01_task-melodies_run-2_bold.nii.gz",
                   "D/bids/sub-2/ses-01/func/sub-2_ses-01_task-melodies_run-10_bold.nii.gz",
                   "D/bids/sub-2/ses-02/func/sub-2_ses-02_task-melodies_run-1_bold.nii.gz"}));
  EXPECT_EQ(DataPaths(dir, spec.subjects[1]),
            (Lines{"D/bids/sub-10/func/sub-10_task-melodies_run-1_bold.nii.gz"}));
  const RunSpec& run = spec.subjects[0].runs[2];
  EXPECT_EQ(run.events_path,
            Root(dir) + "/bids/sub-2/ses-01/func/sub-2_ses-01_task-melodies_run-10_events.tsv");
  EXPECT_EQ(run.confounds_path, "");
  EXPECT_EQ(testing::Shown(dir, run.where.ToString()),
            "D/bids/sub-2/ses-01/func/sub-2_ses-01_task-melodies_run-10_bold.nii.gz");
  // The events of kEventsTsv, read like a listed table.
  EXPECT_EQ(run.events.at("melody_known"), (std::vector<Event>{{2.0, 4.0, 1.0}}));
  EXPECT_EQ(run.events.at("melody_new"), (std::vector<Event>{{10.0, 4.0, 1.0}}));
  EXPECT_EQ(run.events.at("press"), (std::vector<Event>{{15.5, 0.0, 1.0}}));
  EXPECT_EQ(Report(dir, loaded), Lines{"found 2 subjects, 5 runs (task melodies) in D/bids"});
}

TEST(BidsDiscovery, UncompressedImagesAndOneSubject) {
  StudyDir dir;
  dir.Write("bids/sub-01/func/sub-01_task-melodies_bold.nii", "placeholder\n");
  dir.Write("bids/sub-01/func/sub-01_task-melodies_events.tsv", testing::kEventsTsv);
  const LoadedConfig loaded =
      dir.Load(kModel + "subjects_from: {bids: bids, task: task-melodies}\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << Errors(dir, loaded);
  ASSERT_EQ(loaded.spec.subjects.size(), 1u);
  EXPECT_EQ(DataPaths(dir, loaded.spec.subjects[0]),
            Lines{"D/bids/sub-01/func/sub-01_task-melodies_bold.nii"});
  EXPECT_EQ(Report(dir, loaded), Lines{"found 1 subject, 1 run (task melodies) in D/bids"});
}

TEST(BidsDiscovery, SessionFilterKeepsOneSession) {
  StudyDir dir;
  WriteRun(dir, "bids/sub-01/ses-01/func/sub-01_ses-01_task-melodies_run-1");
  WriteRun(dir, "bids/sub-01/ses-02/func/sub-01_ses-02_task-melodies_run-1");
  WriteRun(dir, "bids/sub-02/ses-02/func/sub-02_ses-02_task-melodies_run-1");
  // Unquoted 01 stays the text "01" in YAML.
  const LoadedConfig loaded =
      dir.Load(kModel + "subjects_from:\n  bids: bids\n  task: melodies\n  session: 01\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << Errors(dir, loaded);
  ASSERT_EQ(loaded.spec.subjects.size(), 1u);
  EXPECT_EQ(DataPaths(dir, loaded.spec.subjects[0]),
            Lines{"D/bids/sub-01/ses-01/func/sub-01_ses-01_task-melodies_run-1_bold.nii.gz"});
  EXPECT_EQ(Report(dir, loaded),
            (Lines{"found 1 subject, 1 run (task melodies, session 01) in D/bids",
                   "skipped sub-01/ses-02/func/sub-01_ses-02_task-melodies_run-1_bold.nii.gz: "
                   "not session 01 (ses-02)",
                   "skipped sub-02/ses-02/func/sub-02_ses-02_task-melodies_run-1_bold.nii.gz: "
                   "not session 01 (ses-02)",
                   "skipped sub-02: none of its bold images of task melodies could be used "
                   "(see above)"}));
}

// Raw data with events in bids/, preprocessed images in two spaces and two versions in
// a derivatives folder beside their confounds tables.
void WriteDerivatives(const StudyDir& dir) {
  for (const std::string sub : {"01", "02"}) {
    for (const std::string run : {"1", "2"}) {
      const std::string stem = "sub-" + sub + "_task-melodies_run-" + run;
      WriteRun(dir, "bids/sub-" + sub + "/func/" + stem);
      const std::string out = "prep/sub-" + sub + "/func/" + stem;
      for (const std::string space : {"MNI152NLin2009cAsym", "T1w"}) {
        for (const std::string desc : {"preproc", "smoothed"}) {
          dir.Write(out + "_space-" + space + "_desc-" + desc + "_bold.nii.gz", "placeholder\n");
        }
      }
      if (sub == "01" || run == "1") {
        dir.Write(out + "_desc-confounds_timeseries.tsv", testing::kConfoundsTsv);
      }
    }
  }
}

TEST(BidsDiscovery, DerivativesWithSpaceDescAndConfounds) {
  StudyDir dir;
  WriteDerivatives(dir);
  const LoadedConfig loaded = dir.Load(kModel +
                                       "confounds: [shift_x, shift_y]\n"
                                       "subjects_from:\n"
                                       "  bids: bids\n"
                                       "  derivatives: prep\n"
                                       "  task: melodies\n"
                                       "  space: MNI152NLin2009cAsym\n"
                                       "  desc: preproc\n"
                                       "  confounds: \"{stem}_desc-confounds_timeseries.tsv\"\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << Errors(dir, loaded);
  const StudySpec& spec = loaded.spec;
  ASSERT_EQ(spec.subjects.size(), 2u);
  EXPECT_EQ(
      DataPaths(dir, spec.subjects[0]),
      (Lines{"D/prep/sub-01/func/"
             "sub-01_task-melodies_run-1_space-MNI152NLin2009cAsym_desc-preproc_bold.nii.gz",
             "D/prep/sub-01/func/"
             "sub-01_task-melodies_run-2_space-MNI152NLin2009cAsym_desc-preproc_bold.nii.gz"}));
  ASSERT_EQ(spec.subjects[1].runs.size(), 1u);
  const RunSpec& run = spec.subjects[1].runs[0];
  EXPECT_EQ(run.events_path, Root(dir) + "/bids/sub-02/func/sub-02_task-melodies_run-1_events.tsv");
  EXPECT_EQ(
      run.confounds_path,
      Root(dir) + "/prep/sub-02/func/sub-02_task-melodies_run-1_desc-confounds_timeseries.tsv");
  const std::string mni = "_space-MNI152NLin2009cAsym";
  EXPECT_EQ(
      Report(dir, loaded),
      (Lines{
          "found 2 subjects, 3 runs (task melodies, space MNI152NLin2009cAsym, desc preproc) "
          "in D/prep; events from D/bids",
          "skipped sub-01/func/sub-01_task-melodies_run-1" + mni +
              "_desc-smoothed_bold.nii.gz:"
              " not desc preproc (desc-smoothed)",
          "skipped sub-01/func/sub-01_task-melodies_run-1_space-T1w_desc-preproc_bold.nii.gz: "
          "not space MNI152NLin2009cAsym (space-T1w)",
          "skipped sub-01/func/sub-01_task-melodies_run-1_space-T1w_desc-smoothed_bold.nii.gz: "
          "not space MNI152NLin2009cAsym (space-T1w)",
          "skipped sub-01/func/sub-01_task-melodies_run-2" + mni +
              "_desc-smoothed_bold.nii.gz:"
              " not desc preproc (desc-smoothed)",
          "skipped sub-01/func/sub-01_task-melodies_run-2_space-T1w_desc-preproc_bold.nii.gz: "
          "not space MNI152NLin2009cAsym (space-T1w)",
          "skipped sub-01/func/sub-01_task-melodies_run-2_space-T1w_desc-smoothed_bold.nii.gz: "
          "not space MNI152NLin2009cAsym (space-T1w)",
          "skipped sub-02/func/sub-02_task-melodies_run-1" + mni +
              "_desc-smoothed_bold.nii.gz:"
              " not desc preproc (desc-smoothed)",
          "skipped sub-02/func/sub-02_task-melodies_run-1_space-T1w_desc-preproc_bold.nii.gz: "
          "not space MNI152NLin2009cAsym (space-T1w)",
          "skipped sub-02/func/sub-02_task-melodies_run-1_space-T1w_desc-smoothed_bold.nii.gz: "
          "not space MNI152NLin2009cAsym (space-T1w)",
          "skipped sub-02/func/sub-02_task-melodies_run-2" + mni +
              "_desc-preproc_bold.nii.gz: "
              "no confounds table sub-02/func/sub-02_task-melodies_run-2_desc-confounds_timeseries"
              ".tsv",
          "skipped sub-02/func/sub-02_task-melodies_run-2" + mni +
              "_desc-smoothed_bold.nii.gz:"
              " not desc preproc (desc-smoothed)",
          "skipped sub-02/func/sub-02_task-melodies_run-2_space-T1w_desc-preproc_bold.nii.gz: "
          "not space MNI152NLin2009cAsym (space-T1w)",
          "skipped sub-02/func/sub-02_task-melodies_run-2_space-T1w_desc-smoothed_bold.nii.gz: "
          "not space MNI152NLin2009cAsym (space-T1w)"}));
}

TEST(BidsDiscovery, ConfoundsOnlyWhenTheModelNeedsThem) {
  StudyDir dir;
  WriteDerivatives(dir);
  // No confounds in the model: a missing confounds table does not skip the run, and an
  // existing one is still recorded.
  const LoadedConfig loaded = dir.Load(
      kModel +
      "subjects_from:\n"
      "  bids: bids\n"
      "  derivatives: prep\n"
      "  task: melodies\n"
      "  space: T1w\n"
      "  desc: smoothed\n"
      "  confounds: ../func/{subject}_task-melodies_run-2_desc-confounds_timeseries.tsv\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << Errors(dir, loaded);
  ASSERT_EQ(loaded.spec.subjects.size(), 2u);
  ASSERT_EQ(loaded.spec.subjects[1].runs.size(), 2u);
  EXPECT_EQ(
      loaded.spec.subjects[0].runs[0].confounds_path,
      Root(dir) + "/prep/sub-01/func/sub-01_task-melodies_run-2_desc-confounds_timeseries.tsv");
  EXPECT_EQ(loaded.spec.subjects[1].runs[0].confounds_path, "");
  EXPECT_EQ(Report(dir, loaded).front(),
            "found 2 subjects, 4 runs (task melodies, space T1w, desc smoothed) in D/prep; "
            "events from D/bids");
}

TEST(BidsDiscovery, InheritedEventsTableAndSidecars) {
  StudyDir dir;
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_run-1", false);
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies_run-2", false);
  WriteRun(dir, "bids/sub-02/func/sub-02_task-melodies_run-1", false);
  // One events table for the whole task at the top; sub-02 has its own one level up.
  dir.Write("bids/task-melodies_events.tsv", testing::kEventsTsv);
  dir.Write("bids/sub-02/sub-02_task-melodies_events.tsv",
            "onset\tduration\ttrial_type\n1\t2\tmelody_known\n3\t0\tpress\n5\t1\tmelody_new\n");
  // The top sidecar's TR is wrong for the config, but every run has a nearer one that
  // is right: a file-level one for sub-01 run-1, a subject-level one for sub-01, and
  // one for run-1 only in sub-02's folder (which applies to sub-02 run-1 alone).
  dir.Write("bids/task-melodies_bold.json", Sidecar(3.0));
  dir.Write("bids/sub-01/sub-01_task-melodies_bold.json", Sidecar(2.0));
  dir.Write("bids/sub-01/func/sub-01_task-melodies_run-1_bold.json", Sidecar(2.01));
  dir.Write("bids/sub-02/sub-02_task-melodies_run-1_bold.json", Sidecar(1.99));
  // A sidecar for another task and one without RepetitionTime do not count.
  dir.Write("bids/sub-02/func/sub-02_task-rest_bold.json", Sidecar(7.0));
  dir.Write("bids/sub-02/func/sub-02_task-melodies_run-1_bold.json", "{\"TaskName\": \"x\"}");
  const LoadedConfig loaded = dir.Load(kModel + "subjects_from: {bids: bids, task: melodies}\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << Errors(dir, loaded);
  ASSERT_EQ(loaded.spec.subjects.size(), 2u);
  EXPECT_EQ(loaded.spec.subjects[0].runs[1].events_path,
            Root(dir) + "/bids/task-melodies_events.tsv");
  const RunSpec& run = loaded.spec.subjects[1].runs[0];
  EXPECT_EQ(run.events_path, Root(dir) + "/bids/sub-02/sub-02_task-melodies_events.tsv");
  EXPECT_EQ(run.events.at("melody_known"), (std::vector<Event>{{1.0, 2.0, 1.0}}));
  EXPECT_EQ(Report(dir, loaded), Lines{"found 2 subjects, 3 runs (task melodies) in D/bids"});
}

TEST(BidsDiscovery, DerivativesSidecarBeforeTheDatasets) {
  StudyDir dir;
  WriteRun(dir, "bids/sub-01/func/sub-01_task-melodies");
  dir.Write("bids/task-melodies_bold.json", Sidecar(3.0));
  dir.Write("prep/sub-01/func/sub-01_task-melodies_desc-preproc_bold.nii.gz", "placeholder\n");
  dir.Write("prep/sub-01/func/sub-01_task-melodies_desc-preproc_bold.json", Sidecar(2.0));
  const std::string yaml =
      kModel + "subjects_from: {bids: bids, derivatives: prep, task: melodies}\n";
  const LoadedConfig loaded = dir.Load(yaml);
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << Errors(dir, loaded);
  ASSERT_EQ(loaded.spec.subjects.size(), 1u);
  // Without the derivatives sidecar the dataset's applies (and is wrong).
  std::filesystem::remove(dir.Path("prep/sub-01/func/sub-01_task-melodies_desc-preproc_bold.json"));
  EXPECT_EQ(dir.LoadMessages(yaml),
            Lines{"D/bids/task-melodies_bold.json:3:21: error: RepetitionTime is 3 s but the "
                  "config's tr is 2 s (they may differ by at most 1%); it applies to "
                  "sub-01_task-melodies_desc-preproc_bold.nii.gz"});
}

}  // namespace
}  // namespace boldsum
