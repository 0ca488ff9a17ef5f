// The demo study: complete, loadable, internally consistent (ROI tables are the means of
// the image's region voxels; displacement is the norm of the shift steps), deterministic
// per seed, and equal to its committed copies (configs/, examples/melodies-roi/).
// Writes under $BOLDSUM_TMP (or the GoogleTest temp folder). Each generation writes ~100 MB.
#include "study/demo_study.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include "boldsum/config.h"
#include "boldsum/error.h"
#include "boldsum/io.h"

namespace boldsum {
namespace {

namespace fs = std::filesystem;

const fs::path kSourceDir = fs::path(BOLDSUM_TEST_DATA_DIR) / ".." / "..";
const std::vector<std::string> kRegionNames = {"left_auditory", "right_auditory", "motor",
                                               "control_region"};

// A fresh folder for one test, removed at the end.
class ScratchFolder {
 public:
  explicit ScratchFolder(const std::string& name) {
    const char* base = std::getenv("BOLDSUM_TMP");
    path_ = fs::path(base ? base : ::testing::TempDir()) / "demo_study_tests" /
            (name + "-" + std::to_string(getpid()));
    fs::remove_all(path_);
    fs::create_directories(path_);
  }
  ~ScratchFolder() {
    std::error_code ec;
    fs::remove_all(path_, ec);
  }
  const fs::path& path() const { return path_; }

 private:
  fs::path path_;
};

std::string ReadBytes(const fs::path& path) {
  std::ifstream in(path, std::ios::binary);
  EXPECT_TRUE(in) << path;
  std::ostringstream bytes;
  bytes << in.rdbuf();
  return bytes.str();
}

// Regular files under `root`, as paths relative to it.
std::set<std::string> ListFiles(const fs::path& root) {
  std::set<std::string> files;
  for (const auto& entry : fs::recursive_directory_iterator(root)) {
    if (entry.is_regular_file()) files.insert(fs::relative(entry.path(), root).string());
  }
  return files;
}

std::set<std::string> ExpectedFiles() {
  std::set<std::string> files = {"mask.nii.gz",      "demo.yaml",  "demo_roi.yaml",
                                 "participants.tsv", "group.yaml", "group_roi.yaml",
                                 "truth.tsv",        "README.txt"};
  for (int s = 1; s <= 8; ++s) {
    for (int r = 1; r <= 2; ++r) {
      const std::string stem = "s0" + std::to_string(s) + "/run-" + std::to_string(r);
      for (const char* kind : {"_bold.nii.gz", "_events.tsv", "_confounds.tsv", "_regions.tsv"}) {
        files.insert(stem + kind);
      }
    }
  }
  return files;
}

std::string DiagnosticsText(const Diagnostics& diagnostics) {
  std::string text;
  for (const Diagnostic& d : diagnostics.all()) text += d.ToString() + "\n";
  return text;
}

TEST(DemoStudyConfigs, CommittedCopiesAreWhatTheDemoWrites) {
  EXPECT_EQ(ReadBytes(kSourceDir / "configs" / "demo.yaml"), DemoImageConfigText());
  EXPECT_EQ(ReadBytes(kSourceDir / "configs" / "demo_roi.yaml"), DemoRoiConfigText());
  EXPECT_EQ(ReadBytes(kSourceDir / "configs" / "demo_group.yaml"), DemoGroupConfigText(false));
  EXPECT_EQ(ReadBytes(kSourceDir / "configs" / "demo_group_roi.yaml"), DemoGroupConfigText(true));
  EXPECT_EQ(ReadBytes(kSourceDir / "examples" / "melodies-roi" / "demo_roi.yaml"),
            DemoRoiConfigText());
}

TEST(DemoRegions, AreDisjointNamedBlobsOfFiftyToHundredVoxels) {
  const std::vector<DemoRegion> regions = DemoRegions();
  ASSERT_EQ(regions.size(), kRegionNames.size());
  std::set<int64_t> seen;
  for (size_t r = 0; r < regions.size(); ++r) {
    EXPECT_EQ(regions[r].name, kRegionNames[r]);
    EXPECT_GE(regions[r].voxels.size(), 50u);
    EXPECT_LE(regions[r].voxels.size(), 100u);
    EXPECT_TRUE(std::is_sorted(regions[r].voxels.begin(), regions[r].voxels.end()));
    for (int64_t v : regions[r].voxels) {
      EXPECT_TRUE(v >= 0 && v < 40 * 48 * 36) << v;
      EXPECT_TRUE(seen.insert(v).second) << regions[r].name << " overlaps at voxel " << v;
    }
  }
}

TEST(DemoStudyFolder, RefusesAFolderThatIsNotEmptyAndLeavesItAlone) {
  ScratchFolder scratch("refuses");
  const fs::path target = scratch.path() / "study";
  fs::create_directories(target);
  std::ofstream(target / "notes.txt") << "keep me";
  try {
    WriteDemoStudy(target.string());
    FAIL() << "expected Error";
  } catch (const Error& e) {
    EXPECT_EQ(std::string(e.what()), target.string() +
              ": exists and is not empty (the demo study needs a new or empty folder)");
  }
  EXPECT_EQ(ListFiles(scratch.path()), std::set<std::string>{"study/notes.txt"});
  EXPECT_EQ(ReadBytes(target / "notes.txt"), "keep me");

  const fs::path file = scratch.path() / "plain-file";
  std::ofstream(file) << "x";
  EXPECT_THROW(WriteDemoStudy(file.string()), Error);
}

// Checks one run's files against each other and the image; sets `largest` to the run's
// largest displacement.
void CheckRun(const fs::path& study, const std::string& stem, const ImageGeometry& mask_space,
              const std::vector<float>& mask, double* largest) {
  SCOPED_TRACE(stem);
  const std::vector<DemoRegion> regions = DemoRegions();

  // Events: melodies of 8-12 s, each followed by one zero-duration press 0.3-0.8 s after
  // its end; familiar and new melodies balanced within one.
  const Table events = ReadTable((study / (stem + "_events.tsv")).string());
  EXPECT_EQ(events.header, (std::vector<std::string>{"onset", "duration", "trial_type"}));
  std::map<std::string, int> counts;
  double previous_onset = -1.0, melody_end = -1.0;
  for (const auto& row : events.rows) {
    double onset = 0, duration = 0;
    ASSERT_TRUE(ParseNumber(row[0], &onset) && ParseNumber(row[1], &duration));
    EXPECT_GT(onset, previous_onset);
    previous_onset = onset;
    ++counts[row[2]];
    if (row[2] == "press") {
      EXPECT_EQ(duration, 0.0);
      EXPECT_GE(onset - melody_end, 0.3 - 1e-9);
      EXPECT_LE(onset - melody_end, 0.8 + 1e-9);
    } else {
      EXPECT_TRUE(row[2] == "melody_known" || row[2] == "melody_new") << row[2];
      EXPECT_GE(duration, 8.0);
      EXPECT_LE(duration, 12.0);
      melody_end = onset + duration;
      EXPECT_LT(melody_end, 360.0 - 20.0);
    }
  }
  EXPECT_GE(counts["melody_known"], 8);
  EXPECT_LE(std::abs(counts["melody_known"] - counts["melody_new"]), 1);
  EXPECT_EQ(counts["press"], counts["melody_known"] + counts["melody_new"]);

  // Confounds: displacement is `n/a` on the first row, then the norm of the change in
  // position (to the 4 printed decimals).
  const NumericTable confounds =
      ReadNumericTable((study / (stem + "_confounds.tsv")).string(), /*allow_na=*/true);
  EXPECT_EQ(confounds.names,
            (std::vector<std::string>{"shift_x", "shift_y", "shift_z", "displacement"}));
  EXPECT_EQ(confounds.values.rows(), 180);
  EXPECT_EQ(confounds.na_cells, (std::vector<std::pair<int, int>>{{0, 3}}));
  *largest = 0.0;
  for (int k = 1; k < confounds.values.rows(); ++k) {
    const double step =
        (confounds.values.row(k).head(3) - confounds.values.row(k - 1).head(3)).norm();
    EXPECT_NEAR(confounds.values(k, 3), step, 0.6e-4) << "volume " << k;
    *largest = std::max(*largest, confounds.values(k, 3));
  }

  // The image: the mask's space, 180 volumes of TR 2 s, zero outside the brain.
  const std::string image = (study / (stem + "_bold.nii.gz")).string();
  ImageGeometry geometry;
  const std::vector<float> first = ReadVolume(image, &geometry);
  EXPECT_EQ(geometry.n_volumes, 180);
  EXPECT_EQ(geometry.tr_s, 2.0);
  EXPECT_TRUE(geometry.SameSpace(mask_space));
  for (size_t i = 0; i < first.size(); ++i) {
    if (mask[i] == 0.0f) {
      ASSERT_EQ(first[i], 0.0f) << "voxel " << i;
    } else {
      ASSERT_GT(first[i], 500.0f) << "voxel " << i;
    }
  }

  // The ROI table is each region's voxel mean, printed with 4 decimals.
  std::vector<int64_t> voxels;
  for (const DemoRegion& region : regions) {
    voxels.insert(voxels.end(), region.voxels.begin(), region.voxels.end());
  }
  std::sort(voxels.begin(), voxels.end());
  std::map<int64_t, int> column_of;
  for (size_t j = 0; j < voxels.size(); ++j) column_of[voxels[j]] = static_cast<int>(j);
  const NumericTable table =
      ReadNumericTable((study / (stem + "_regions.tsv")).string(), /*allow_na=*/false);
  EXPECT_EQ(table.names, kRegionNames);
  EXPECT_EQ(table.values.rows(), 180);
  VolumeStream stream(image, voxels, 64);
  Eigen::MatrixXf block;
  int volume = 0;
  while (stream.Next(&block)) {
    for (int k = 0; k < block.rows(); ++k, ++volume) {
      for (size_t r = 0; r < regions.size(); ++r) {
        double sum = 0.0;
        for (int64_t v : regions[r].voxels) sum += block(k, column_of[v]);
        const double mean = sum / static_cast<double>(regions[r].voxels.size());
        // 5e-5: half a unit in the 4th printed decimal, plus rounding of the sum.
        ASSERT_NEAR(table.values(volume, static_cast<int>(r)), mean, 5e-5 + 1e-12 * mean)
            << regions[r].name << " volume " << volume;
      }
    }
  }
  EXPECT_EQ(volume, 180);
}

void CheckTruth(const fs::path& study) {
  const Table truth = ReadTable((study / "truth.tsv").string());
  ASSERT_EQ(truth.header, (std::vector<std::string>{"subject", "region", "condition", "true_beta",
                                                    "true_percent", "true_known_vs_new"}));
  ASSERT_EQ(truth.rows.size(), 8u * 4u * 3u);
  std::map<std::string, std::map<std::string, double>> beta;  // "subject region" -> condition
  std::map<std::string, double> difference;
  for (const auto& row : truth.rows) {
    double value = 0, percent = 0, diff = 0;
    ASSERT_TRUE(ParseNumber(row[3], &value) && ParseNumber(row[4], &percent) &&
                ParseNumber(row[5], &diff));
    beta[row[0] + " " + row[1]][row[2]] = value;
    difference[row[0] + " " + row[1]] = diff;
    // Percent of a baseline near 1000 (0.9-1.1 per subject, +-10% over the brain).
    if (percent != 0.0) {
      EXPECT_NEAR(value / (10.0 * percent), 1.0, 0.25) << row[0] << row[1];
    }
  }
  int familiar_larger = 0;
  for (int s = 1; s <= 8; ++s) {
    const std::string id = "s0" + std::to_string(s);
    int auditory_larger = 0;
    for (const char* region : {"left_auditory", "right_auditory"}) {
      const auto& b = beta[id + " " + region];
      EXPECT_NEAR(difference[id + " " + region], b.at("melody_known") - b.at("melody_new"), 2e-4);
      EXPECT_GT(b.at("melody_new"), 0.0);
      EXPECT_EQ(b.at("press"), 0.0);
      auditory_larger += difference[id + " " + region] > 1.0;  // > 0.1% of the baseline
    }
    EXPECT_TRUE(auditory_larger == 0 || auditory_larger == 2) << id;
    familiar_larger += auditory_larger == 2;
    EXPECT_GT(beta[id + " motor"].at("press"), 0.0);
    EXPECT_EQ(beta[id + " motor"].at("melody_known"), 0.0);
    for (const char* condition : {"melody_known", "melody_new", "press"}) {
      EXPECT_EQ(beta[id + " control_region"].at(condition), 0.0);
    }
  }
  EXPECT_EQ(familiar_larger, 6);
}

TEST(DemoStudy, IsCompleteLoadableAndConsistent) {
  ScratchFolder scratch("complete");
  const fs::path study = scratch.path() / "nested" / "study";
  WriteDemoStudy(study.string());
  EXPECT_EQ(ListFiles(scratch.path()).size(), ExpectedFiles().size());  // nothing left beside
  ASSERT_EQ(ListFiles(study), ExpectedFiles());
  EXPECT_EQ(ReadBytes(study / "demo.yaml"), DemoImageConfigText());
  EXPECT_EQ(ReadBytes(study / "demo_roi.yaml"), DemoRoiConfigText());

  for (const char* config : {"demo.yaml", "demo_roi.yaml"}) {
    SCOPED_TRACE(config);
    const LoadedConfig loaded = LoadConfig((study / config).string());
    ASSERT_FALSE(loaded.diagnostics.HasErrors()) << DiagnosticsText(loaded.diagnostics);
    EXPECT_TRUE(loaded.diagnostics.all().empty()) << DiagnosticsText(loaded.diagnostics);
    const StudySpec& spec = loaded.spec;
    EXPECT_EQ(spec.model.tr_s, 2.0);
    EXPECT_EQ(spec.model.conditions,
              (std::vector<std::string>{"melody_known", "melody_new", "press"}));
    ASSERT_TRUE(spec.model.censor.has_value());
    EXPECT_EQ(spec.model.censor->column, "displacement");
    ASSERT_EQ(spec.contrasts.size(), 3u);
    EXPECT_EQ(spec.contrasts[0].name, "known_vs_new");
    EXPECT_EQ(spec.contrasts[2].name, "any_melody");
    EXPECT_TRUE(spec.contrasts[2].is_f);
    ASSERT_EQ(spec.subjects.size(), 8u);
    for (const SubjectSpec& subject : spec.subjects) EXPECT_EQ(subject.runs.size(), 2u);
    EXPECT_EQ(spec.subjects[7].runs[1].events.at("press").size(),
              spec.subjects[7].runs[1].events.at("melody_known").size() +
                  spec.subjects[7].runs[1].events.at("melody_new").size());
  }

  ImageGeometry mask_space;
  const std::vector<float> mask = ReadVolume((study / "mask.nii.gz").string(), &mask_space);
  EXPECT_EQ(mask_space.dims, (std::array<int, 3>{40, 48, 36}));
  EXPECT_EQ(mask_space.voxel_mm, (std::array<double, 3>{3.0, 3.0, 3.0}));
  // The world origin lies within a voxel of the grid's centre.
  for (int a = 0; a < 3; ++a) {
    EXPECT_NEAR(mask_space.srow[a][3] + 3.0 * (mask_space.dims[a] - 1) / 2.0, 0.0, 3.0);
  }
  const auto brain = std::count(mask.begin(), mask.end(), 1.0f);
  EXPECT_EQ(brain + std::count(mask.begin(), mask.end(), 0.0f), int64_t{40 * 48 * 36});
  EXPECT_GT(brain, 15000);  // an ellipsoid filling most of the 40x48x36 grid
  EXPECT_LT(brain, 30000);
  for (const DemoRegion& region : DemoRegions()) {
    for (int64_t v : region.voxels) EXPECT_EQ(mask[static_cast<size_t>(v)], 1.0f) << region.name;
  }

  int runs_with_spikes = 0;
  for (int s = 1; s <= 8; ++s) {
    for (int r = 1; r <= 2; ++r) {
      double largest = 0.0;
      CheckRun(study, "s0" + std::to_string(s) + "/run-" + std::to_string(r), mask_space, mask,
               &largest);
      runs_with_spikes += largest > 0.9;
    }
  }
  EXPECT_GE(runs_with_spikes, 4);  // censoring has work to do
  EXPECT_LE(runs_with_spikes, 14);
  CheckTruth(study);

  // examples/melodies-roi is the ROI part of this study. Events, confounds and truth do
  // not depend on any numerical routine and must match to the byte; the region tables
  // depend on the design's regressors, so a numerical change there may move them by a
  // fraction of a data unit (0.5 is 0.05% of the baseline and a third of the tables'
  // noise) without the example needing to be written again.
  const fs::path example = kSourceDir / "examples" / "melodies-roi";
  EXPECT_EQ(ReadBytes(example / "truth.tsv"), ReadBytes(study / "truth.tsv"));
  EXPECT_EQ(ReadBytes(example / "participants.tsv"), ReadBytes(study / "participants.tsv"));
  EXPECT_EQ(ReadBytes(example / "group_roi.yaml"), ReadBytes(study / "group_roi.yaml"));
  for (int s = 1; s <= 8; ++s) {
    for (int r = 1; r <= 2; ++r) {
      const std::string stem = "s0" + std::to_string(s) + "/run-" + std::to_string(r);
      EXPECT_EQ(ReadBytes(example / (stem + "_events.tsv")),
                ReadBytes(study / (stem + "_events.tsv")));
      EXPECT_EQ(ReadBytes(example / (stem + "_confounds.tsv")),
                ReadBytes(study / (stem + "_confounds.tsv")));
      const NumericTable committed =
          ReadNumericTable((example / (stem + "_regions.tsv")).string(), false);
      const NumericTable written =
          ReadNumericTable((study / (stem + "_regions.tsv")).string(), false);
      EXPECT_EQ(committed.names, written.names);
      ASSERT_EQ(committed.values.rows(), written.values.rows());
      EXPECT_LE((committed.values - written.values).cwiseAbs().maxCoeff(), 0.5) << stem;
    }
  }
}

TEST(DemoStudy, SameSeedGivesTheSameBytesAndAnotherSeedOtherData) {
  ScratchFolder scratch("determinism");
  WriteDemoStudy((scratch.path() / "a").string(), 7);
  WriteDemoStudy((scratch.path() / "b").string(), 7);
  WriteDemoStudy((scratch.path() / "c").string(), 8);
  const std::set<std::string> files = ListFiles(scratch.path() / "a");
  ASSERT_EQ(files, ExpectedFiles());
  int differing = 0;
  for (const std::string& file : files) {
    const std::string a = ReadBytes(scratch.path() / "a" / file);
    EXPECT_TRUE(a == ReadBytes(scratch.path() / "b" / file)) << file << " differs for one seed";
    differing += a != ReadBytes(scratch.path() / "c" / file);
  }
  // Everything but the four configs, the participants table, the README and the mask
  // depends on the seed.
  EXPECT_EQ(differing, static_cast<int>(files.size()) - 7);
}

}  // namespace
}  // namespace boldsum
