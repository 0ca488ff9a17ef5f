// GatherStudy on small generated studies fitted by FitStudy: the stacks hold each
// subject's own maps in subjects.tsv order, participants columns are joined, and every
// refusal (missing, stale, mixed or misaligned subjects) names the subjects and leaves
// OUT/pool-ready/ as it was. Writes under $BOLDSUM_TMP (or the GoogleTest temp folder).
#include "study/gather.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <Eigen/Dense>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <random>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include "boldsum/config.h"
#include "boldsum/error.h"
#include "boldsum/io.h"
#include "boldsum/study.h"

namespace boldsum {
namespace {

namespace fs = std::filesystem;

constexpr int kVolumes = 40;
constexpr double kTr = 2.0;
const std::array<int, 3> kDims = {4, 3, 2};

// A fresh folder for one test, removed at the end.
class ScratchFolder {
 public:
  ScratchFolder() {
    const char* base = std::getenv("BOLDSUM_TMP");
    const ::testing::TestInfo* test = ::testing::UnitTest::GetInstance()->current_test_info();
    path_ = fs::path(base ? base : ::testing::TempDir()) / "gather_tests" /
            (std::string(test->test_suite_name()) + "." + test->name() + "-" +
             std::to_string(getpid()));
    fs::remove_all(path_);
    fs::create_directories(path_);
  }
  ~ScratchFolder() {
    std::error_code ec;
    fs::remove_all(path_, ec);
  }
  std::string Path(const std::string& relative) const { return (path_ / relative).string(); }

 private:
  fs::path path_;
};

std::string ReadText(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  EXPECT_TRUE(in) << path;
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

void WriteText(const std::string& path, const std::string& text) {
  std::ofstream(path, std::ios::binary) << text;
}

// How one generated subject differs from the default.
struct SubjectRecipe {
  std::string id;
  bool regions = false;    // an ROI table instead of an image
  bool without_b = false;  // no tune_b events: a_vs_b cannot be estimated
  std::array<int, 3> dims = kDims;
  double x_offset_mm = 30.0;  // sform translation in x (another affine when changed)
};

ImageGeometry GridOf(const SubjectRecipe& recipe) {
  ImageGeometry geometry;
  geometry.dims = recipe.dims;
  geometry.voxel_mm = {3.0, 3.0, 3.0};
  geometry.tr_s = kTr;
  geometry.sform_code = 1;
  geometry.srow = {{{-3, 0, 0, recipe.x_offset_mm}, {0, 3, 0, -40}, {0, 0, 3, -12}}};
  return geometry;
}

// Writes the subject's run (random data around a baseline of 100; subject k has voxel k
// at 1.0 so that its automatic mask leaves it out) and events; returns the config entry.
std::string WriteSubject(const ScratchFolder& folder, const SubjectRecipe& recipe, int k) {
  std::mt19937 random(static_cast<unsigned>(1000 + k));
  std::normal_distribution<double> noise(0.0, 1.0);
  std::string events = "onset\tduration\ttrial_type\n4\t4\ttune_a\n24\t4\ttune_a\n44\t4\ttune_a\n";
  if (!recipe.without_b) events += "14\t4\ttune_b\n34\t4\ttune_b\n54\t4\ttune_b\n";
  WriteText(folder.Path(recipe.id + "_events.tsv"), events);
  std::string data = recipe.id + (recipe.regions ? ".tsv" : ".nii.gz");
  if (recipe.regions) {
    std::string table = "left\tright\n";
    for (int t = 0; t < kVolumes; ++t) {
      table +=
          std::to_string(200 + noise(random)) + "\t" + std::to_string(50 + noise(random)) + "\n";
    }
    WriteText(folder.Path(data), table);
  } else {
    const ImageGeometry geometry = GridOf(recipe);
    const int64_t voxels = geometry.n_voxels();
    std::vector<float> values(static_cast<size_t>(voxels * kVolumes));
    for (int t = 0; t < kVolumes; ++t) {
      for (int64_t v = 0; v < voxels; ++v) {
        values[static_cast<size_t>(t * voxels + v)] =
            v == k ? 1.0f : static_cast<float>(100 + v + noise(random));
      }
    }
    WriteImage(folder.Path(data), geometry, values, kVolumes);
  }
  return "  - id: " + recipe.id + "\n    runs:\n      - {data: " + data + ", events: " + recipe.id +
         "_events.tsv}\n";
}

const char* const kModel =
    "tr: 2.0\n"
    "conditions: [tune_a, tune_b]\n"
    "drift: {kind: cosine, cutoff_s: 100}\n"
    "contrasts:\n"
    "  a_vs_b: {tune_a: 1, tune_b: -1}\n"
    "  a_only: {tune_a: 1}\n"
    "  both: [{tune_a: 1}, {tune_b: 1}]\n";

// Writes the study (config `study.yaml`, output `results/`) and loads it.
StudySpec WriteStudy(const ScratchFolder& folder, const std::vector<SubjectRecipe>& subjects,
                     const std::string& extra_keys = "") {
  std::string yaml = kModel + extra_keys + "subjects:\n";
  for (size_t k = 0; k < subjects.size(); ++k) {
    yaml += WriteSubject(folder, subjects[k], static_cast<int>(k));
  }
  WriteText(folder.Path("study.yaml"), yaml);
  const LoadedConfig loaded = LoadConfig(folder.Path("study.yaml"));
  for (const Diagnostic& d : loaded.diagnostics.all()) {
    EXPECT_NE(d.severity, Severity::kError) << d.ToString();
  }
  return loaded.spec;
}

StudyOptions Quiet() {
  StudyOptions options;
  options.quiet = true;
  options.threads = 1;
  return options;
}

// Fits `only` (default: every subject, named one by one so that FitStudy leaves the
// gathering to the test).
void Fit(const StudySpec& spec, std::vector<std::string> only = {}) {
  if (only.empty()) {
    for (const SubjectSpec& subject : spec.subjects) only.push_back(subject.id);
  }
  StudyOptions options = Quiet();
  options.subjects = only;
  std::ostringstream log;
  FitStudy(spec, options, log);
}

std::vector<std::vector<std::string>> ReadRows(const std::string& path) {
  const Table table = ReadTable(path);
  std::vector<std::vector<std::string>> rows = {table.header};
  rows.insert(rows.end(), table.rows.begin(), table.rows.end());
  return rows;
}

// Every volume of a 4D image, volume-major.
Eigen::MatrixXf ReadStack(const std::string& path, ImageGeometry* geometry) {
  *geometry = ReadImageGeometry(path);
  std::vector<int64_t> all(static_cast<size_t>(geometry->n_voxels()));
  for (size_t v = 0; v < all.size(); ++v) all[v] = static_cast<int64_t>(v);
  VolumeStream stream(path, all, 8);
  Eigen::MatrixXf stack(geometry->n_volumes, geometry->n_voxels()), block;
  Eigen::Index row = 0;
  while (stream.Next(&block)) {
    stack.middleRows(row, block.rows()) = block;
    row += block.rows();
  }
  EXPECT_EQ(row, geometry->n_volumes) << path;
  return stack;
}

// Same float bits, NaN equal to NaN.
bool SameValues(const Eigen::RowVectorXf& a, const std::vector<float>& b) {
  if (static_cast<size_t>(a.size()) != b.size()) return false;
  for (size_t v = 0; v < b.size(); ++v) {
    const float x = a[static_cast<Eigen::Index>(v)];
    if (std::isnan(x) != std::isnan(b[v]) || (!std::isnan(x) && x != b[v])) return false;
  }
  return true;
}

// Names of everything in `folder` (hidden entries included), to show nothing changed.
std::map<std::string, std::string> Snapshot(const std::string& folder) {
  std::map<std::string, std::string> entries;
  for (const auto& entry : fs::recursive_directory_iterator(folder)) {
    const std::string name = fs::relative(entry.path(), folder).string();
    entries[name] = entry.is_regular_file() ? ReadText(entry.path().string()) : "<dir>";
  }
  return entries;
}

std::string GatherError(const StudySpec& spec) {
  std::ostringstream log;
  try {
    GatherStudy(spec, Quiet(), log);
  } catch (const Error& error) {
    return error.what();
  }
  ADD_FAILURE() << "GatherStudy did not refuse";
  return "";
}

const std::vector<SubjectRecipe> kThree = {{"s02"}, {"s10", false, true}, {"s01"}};

TEST(GatherImages, VolumesFollowSubjectsTableRowsAndHoldEachSubjectsOwnMap) {
  ScratchFolder folder;
  const StudySpec spec = WriteStudy(folder, kThree);
  Fit(spec);
  std::ostringstream log;
  StudyOptions options = Quiet();
  options.quiet = false;
  GatherStudy(spec, options, log);
  EXPECT_NE(log.str().find("s10: cannot estimate 'a_vs_b'"), std::string::npos) << log.str();
  EXPECT_NE(log.str().find("F contrasts are not stacked (both)"), std::string::npos);

  const std::string out = folder.Path("results/pool-ready/");
  // dof = N - rank X (DESIGN.md): 40 volumes; columns tune_a, tune_b, one cosine
  // (floor(2 * 40 * 2 s / 100 s) = 1) and the intercept give rank 4; without tune_b
  // events its all-zero column leaves rank 3.
  const std::vector<std::vector<std::string>> expected = {{"subject", "dof_a_vs_b", "dof_a_only"},
                                                          {"s02", "36", "36"},
                                                          {"s10", "n/a", "37"},
                                                          {"s01", "36", "36"}};
  ASSERT_EQ(ReadRows(out + "subjects.tsv"), expected);

  ImageGeometry mask_geometry;
  const std::vector<float> mask = ReadVolume(out + "mask.nii.gz", &mask_geometry);
  ImageGeometry first;
  const std::vector<float> first_mask = ReadVolume(folder.Path("results/s02/mask.nii.gz"), &first);
  EXPECT_TRUE(mask_geometry.SameSpace(first));
  for (size_t v = 0; v < mask.size(); ++v) {
    // Subject k's automatic mask leaves out voxel k (k = 0, 1, 2): those three only.
    EXPECT_EQ(mask[v], v < 3 ? 0.0f : 1.0f) << "voxel " << v;
  }
  for (const std::string contrast : {"a_vs_b", "a_only"}) {
    for (const std::string kind : {"estimate", "variance"}) {
      ImageGeometry geometry;
      const Eigen::MatrixXf stack = ReadStack(out + contrast + "." + kind + ".nii.gz", &geometry);
      ASSERT_EQ(geometry.n_volumes, 3);
      EXPECT_TRUE(geometry.SameSpace(first));
      for (int i = 0; i < 3; ++i) {
        const std::string& id = expected[static_cast<size_t>(i) + 1][0];
        const std::string own =
            folder.Path("results/" + id + "/" + contrast + "." + kind + ".nii.gz");
        std::vector<float> values;
        if (contrast == "a_vs_b" && id == "s10") {
          EXPECT_FALSE(fs::exists(own));
          values.assign(static_cast<size_t>(geometry.n_voxels()), std::nanf(""));
        } else {
          ImageGeometry own_geometry;
          values = ReadVolume(own, &own_geometry);
        }
        EXPECT_TRUE(SameValues(stack.row(i), values)) << contrast << "." << kind << " " << id;
        // Outside the subject's own mask the stack holds NaN (voxel i is outside for
        // subject i, inside for the others).
        EXPECT_TRUE(std::isnan(stack(i, i)));
        EXPECT_EQ(std::isnan(stack(i, (i + 1) % 3)), contrast == "a_vs_b" && id == "s10");
      }
    }
  }
  EXPECT_FALSE(fs::exists(out + "both.estimate.nii.gz"));
}

TEST(GatherImages, ParticipantsColumnsAreJoinedWithOrWithoutThePrefix) {
  ScratchFolder folder;
  WriteText(folder.Path("participants.tsv"),
            "age\tparticipant_id\tgroup\n"
            "31\tsub-s01\tmusician\n"
            "27\ts02\tn/a\n"
            "45\tsub-s99\tcontrol\n");
  const StudySpec spec = WriteStudy(folder, kThree, "participants: participants.tsv\n");
  EXPECT_EQ(spec.participants_path, folder.Path("participants.tsv"));
  Fit(spec);
  std::ostringstream log;
  StudyOptions options = Quiet();
  options.quiet = false;
  GatherStudy(spec, options, log);
  EXPECT_NE(log.str().find("s10: no row in"), std::string::npos) << log.str();
  const std::vector<std::vector<std::string>> expected = {
      {"subject", "dof_a_vs_b", "dof_a_only", "age", "group"},
      {"s02", "36", "36", "27", "n/a"},
      {"s10", "n/a", "37", "n/a", "n/a"},
      {"s01", "36", "36", "31", "musician"}};
  EXPECT_EQ(ReadRows(folder.Path("results/pool-ready/subjects.tsv")), expected);
}

TEST(GatherImages, AnUnchangedStudyIsNotGatheredAgainAndAChangedParticipantsTableIs) {
  ScratchFolder folder;
  WriteText(folder.Path("participants.tsv"), "participant_id\tage\ns01\t31\ns02\t27\ns10\t45\n");
  const StudySpec spec = WriteStudy(folder, kThree, "participants: participants.tsv\n");
  Fit(spec);
  StudyOptions options = Quiet();
  options.quiet = false;
  std::ostringstream first, second, third;
  GatherStudy(spec, options, first);
  const auto before = Snapshot(folder.Path("results/pool-ready"));
  const auto written = fs::last_write_time(folder.Path("results/pool-ready/subjects.tsv"));
  GatherStudy(spec, options, second);
  EXPECT_NE(second.str().find("pool-ready: up to date, not gathered again"), std::string::npos)
      << second.str();
  EXPECT_EQ(Snapshot(folder.Path("results/pool-ready")), before);
  EXPECT_EQ(fs::last_write_time(folder.Path("results/pool-ready/subjects.tsv")), written);
  WriteText(folder.Path("participants.tsv"), "participant_id\tage\ns01\t31\ns02\t28\ns10\t45\n");
  GatherStudy(spec, options, third);
  EXPECT_NE(third.str().find("gathered 3 subject(s)"), std::string::npos) << third.str();
  EXPECT_EQ(ReadRows(folder.Path("results/pool-ready/subjects.tsv"))[1].back(), "28");
}

TEST(GatherImages, SubjectsWithoutResultsAreNamedAndNothingIsWritten) {
  ScratchFolder folder;
  const StudySpec spec = WriteStudy(folder, kThree);
  Fit(spec, {"s02"});
  const auto before = Snapshot(folder.Path("results"));
  const std::string message = GatherError(spec);
  EXPECT_NE(message.find("no fitted results for s10, s01 under " + folder.Path("results")),
            std::string::npos)
      << message;
  EXPECT_NE(message.find("run `boldsum fit " + folder.Path("study.yaml") + "` first"),
            std::string::npos)
      << message;
  EXPECT_EQ(Snapshot(folder.Path("results")), before);
}

TEST(GatherImages, DifferentGridsOrAffinesAreRefusedNamingThemAndTheFirstSubject) {
  ScratchFolder folder;
  std::vector<SubjectRecipe> subjects = kThree;
  subjects[1].dims = {5, 3, 2};
  subjects[2].x_offset_mm = 33.0;
  const StudySpec spec = WriteStudy(folder, subjects);
  Fit(spec);
  const auto before = Snapshot(folder.Path("results"));
  const std::string message = GatherError(spec);
  EXPECT_NE(message.find("grid or affine differs from the first subject 's02' (4x3x2 voxels "
                         "of 3x3x3 mm) for s10 (5x3x2 voxels of 3x3x3 mm), s01 (4x3x2 voxels "
                         "of 3x3x3 mm)"),
            std::string::npos)
      << message;
  EXPECT_EQ(Snapshot(folder.Path("results")), before);
}

TEST(GatherImages, AFailedGatherLeavesTheEarlierStacksUntouched) {
  ScratchFolder folder;
  const StudySpec spec = WriteStudy(folder, kThree);
  Fit(spec);
  std::ostringstream log;
  GatherStudy(spec, Quiet(), log);
  const auto before = Snapshot(folder.Path("results"));
  ASSERT_EQ(before.count("pool-ready/a_only.estimate.nii.gz"), 1u);

  // A new contrast in the config makes every subject's results out of date.
  std::string yaml = ReadText(folder.Path("study.yaml"));
  yaml.replace(yaml.find("  both:"), 0, "  b_only: {tune_b: 1}\n");
  WriteText(folder.Path("study.yaml"), yaml);
  const LoadedConfig reloaded = LoadConfig(folder.Path("study.yaml"));
  ASSERT_FALSE(reloaded.diagnostics.HasErrors());
  const StudySpec& changed = reloaded.spec;
  const std::string message = GatherError(changed);
  EXPECT_NE(message.find("results out of date for s02 (contrasts changed since it was fitted), "
                         "s10 (contrasts changed since it was fitted), s01"),
            std::string::npos)
      << message;
  EXPECT_NE(message.find("nothing was written to " + folder.Path("results/pool-ready")),
            std::string::npos);
  EXPECT_EQ(Snapshot(folder.Path("results")), before);

  // A stack input that disappears after the fit.
  fs::remove(folder.Path("results/s01/a_only.variance.nii.gz"));
  const std::string missing = GatherError(spec);
  EXPECT_NE(missing.find(folder.Path("results/s01/a_only.variance.nii.gz")), std::string::npos)
      << missing;
}

TEST(GatherStudies, MixedImagesAndRegionTablesAreRefused) {
  ScratchFolder folder;
  const StudySpec spec = WriteStudy(folder, {{"s02"}, {"r01", true}, {"r02", true}});
  Fit(spec);
  const std::string message = GatherError(spec);
  EXPECT_NE(message.find("subjects r01, r02 have region tables but the first subject 's02' "
                         "has images"),
            std::string::npos)
      << message;
  EXPECT_FALSE(fs::exists(folder.Path("results/pool-ready")));
}

TEST(GatherRegions, SummariesAreTheSubjectsRowsInLongFormInConfigOrder) {
  ScratchFolder folder;
  const StudySpec spec = WriteStudy(folder, {{"r2", true}, {"r1", true, true}});
  Fit(spec);
  std::ostringstream log;
  GatherStudy(spec, Quiet(), log);
  const std::string out = folder.Path("results/pool-ready/");
  EXPECT_EQ(ReadRows(out + "subjects.tsv"),
            (std::vector<std::vector<std::string>>{
                {"subject", "dof_a_vs_b", "dof_a_only"}, {"r2", "36", "36"}, {"r1", "n/a", "37"}}));
  EXPECT_FALSE(fs::exists(out + "mask.nii.gz"));
  // Expected rows rebuilt from each subject's own summary.tsv, cells verbatim.
  std::vector<std::vector<std::string>> expected = {
      {"subject", "contrast", "region", "estimate", "variance", "dof"}};
  for (const std::string id : {"r2", "r1"}) {
    const Table own = ReadTable(folder.Path("results/" + id + "/summary.tsv"));
    for (const std::string contrast : {"a_vs_b", "a_only"}) {
      bool found = false;
      for (const std::vector<std::string>& row : own.rows) {
        if (row[0] != contrast) continue;
        expected.push_back({id, contrast, row[1], row[2], row[3], row[4]});
        found = true;
      }
      if (!found) {
        for (const std::string region : {"left", "right"}) {
          expected.push_back({id, contrast, region, "n/a", "n/a", "n/a"});
        }
      }
    }
  }
  ASSERT_EQ(expected.size(), 9u);
  EXPECT_EQ(ReadRows(out + "summaries.tsv"), expected);
}

TEST(RecordedSubject, MalformedSummariesNameTheFile) {
  ScratchFolder folder;
  const std::string path = folder.Path("summary.json");
  WriteText(path, "{\"subject\": \"s01\", \"data_kind\": \"image\"}\n");
  try {
    ReadRecordedSubject(path);
    ADD_FAILURE() << "accepted a summary without contrasts";
  } catch (const Error& error) {
    EXPECT_EQ(std::string(error.what()), path + ": no \"contrasts\" member");
  }
  WriteText(path, "{\"subject\": \"s01\", \"data_kind\": \"volume\", \"contrasts\": []}\n");
  EXPECT_THROW(ReadRecordedSubject(path), Error);
  WriteText(path, "{\"subject\": [\n");
  EXPECT_THROW(ReadRecordedSubject(path), Error);
}

// The `participants` key is checked when the config is loaded.
std::vector<std::string> ParticipantsMessages(const std::string& table) {
  ScratchFolder folder;
  WriteText(folder.Path("participants.tsv"), table);
  WriteText(folder.Path("e.tsv"), "onset\tduration\ttrial_type\n4\t4\ttune_a\n14\t4\ttune_b\n");
  WriteText(folder.Path("d.tsv"), "left\n1\n2\n");
  WriteText(folder.Path("study.yaml"), std::string(kModel) +
                                           "participants: participants.tsv\nsubjects:\n"
                                           "  - {id: s01, runs: [{data: d.tsv, events: e.tsv}]}\n"
                                           "  - {id: s02, runs: [{data: d.tsv, events: e.tsv}]}\n");
  std::vector<std::string> messages;
  const LoadedConfig loaded = LoadConfig(folder.Path("study.yaml"));
  for (const Diagnostic& d : loaded.diagnostics.all()) {
    std::string text = d.ToString();
    const std::string dir = folder.Path("");
    for (size_t at = text.find(dir); at != std::string::npos; at = text.find(dir)) {
      text.replace(at, dir.size(), "D/");
    }
    messages.push_back(text);
  }
  return messages;
}

TEST(ParticipantsConfig, TableIsCheckedWhenTheConfigIsLoaded) {
  EXPECT_EQ(ParticipantsMessages("participant_id\tage\ns01\t3\nsub-s02\t4\n"),
            std::vector<std::string>{});
  EXPECT_EQ(ParticipantsMessages("participant\tage\ns01\t3\n"),
            std::vector<std::string>{"D/participants.tsv:1: error: participants table has no "
                                     "'participant_id' column (did you mean 'participant'?)"});
  EXPECT_EQ(ParticipantsMessages("participant_id\tsubject\ns01\tx\nsub-s01\ty\ns02\tz\n"),
            (std::vector<std::string>{
                "D/participants.tsv:1: error: column 'subject' clashes with a column boldsum "
                "writes to pool-ready/subjects.tsv (subject, dof_<contrast>); rename it",
                "D/participants.tsv:3:1: error: participant 'sub-s01' appears twice (also on "
                "line 2; ids are compared without 'sub-')"}));
  EXPECT_EQ(ParticipantsMessages("participant_id\ns01\n"),
            std::vector<std::string>{"D/participants.tsv: warning: subject 's02' has no row "
                                     "(its participants columns will be n/a in "
                                     "pool-ready/subjects.tsv)"});
}

}  // namespace
}  // namespace boldsum
