// RunPool end to end: ROI tables and image stacks in, the documented files out, the
// values equal to FitPooled on the same numbers, nothing written when reading fails.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <limits>

#include "boldsum/io.h"
#include "boldsum/pool.h"
#include "pool_test_dir.h"

namespace boldsum {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

double Cell(const Table& table, int row, const std::string& column) {
  double value = kNaN;
  ParseNumber(table.rows[row][table.ColumnIndex(column)], &value);
  return value;
}

TEST(RunPoolRegions, TableHoldsTheSingleFitsExactly) {
  PoolTestDir dir;
  dir.WriteRoiStudy();
  // Drop subject v4's row for (rhythm, region1): missing there.
  std::string summaries = dir.Read("summaries.tsv");
  const std::string row = "v4\trhythm\tregion1\t";
  const size_t at = summaries.find(row);
  summaries.erase(at, summaries.find('\n', at) - at + 1);
  dir.Write("summaries.tsv", summaries);
  const LoadedGroupConfig loaded = dir.Load(
      "input: summaries.tsv\n"
      "participants: participants.tsv\n"
      "design: {covariates: [age]}\n"
      "contrasts:\n"
      "  mean: {intercept: 1}\n"
      "  both: [{intercept: 1}, {age: 1}]\n"
      "output: out\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << dir.Messages(loaded)[0];
  const PoolSummary summary = RunPool(loaded.spec, {});
  ASSERT_EQ(summary.files_written.size(), 2u);
  EXPECT_EQ(summary.files_written[0], dir.Path("out/regions.tsv"));
  const Table table = ReadTable(dir.Path("out/regions.tsv"));
  ASSERT_EQ(table.rows.size(), 2u * 2u * 3u);  // contrasts x group contrasts x regions
  const Eigen::MatrixXd& z = loaded.spec.design.z;
  int checked = 0;
  for (int r = 0; r < static_cast<int>(table.rows.size()); ++r) {
    const std::vector<std::string>& cells = table.rows[r];
    const int region = cells[2].back() - '0';
    Eigen::VectorXd y(8), v(8);
    for (int i = 1; i <= 8; ++i) {
      y[i - 1] = PoolTestDir::Estimate(i, region);
      v[i - 1] = PoolTestDir::Variance(i, region);
    }
    if (cells[0] == "rhythm" && region == 1) y[3] = kNaN;
    const PooledFit fit = FitPooled(z, y, v, PoolMethod::kMixed);
    EXPECT_EQ(Cell(table, r, "n"), fit.n);
    // Shortest round-trip decimals: the table reads back to the same doubles.
    EXPECT_EQ(Cell(table, r, "tau2"), fit.tau2);
    EXPECT_EQ(Cell(table, r, "dof"), fit.n - 2);
    if (cells[1] == "mean") {
      EXPECT_EQ(Cell(table, r, "estimate"), fit.beta[0]);
      EXPECT_EQ(Cell(table, r, "variance"), fit.covariance(0, 0));
      EXPECT_TRUE(std::isnan(Cell(table, r, "f")));
    } else {
      EXPECT_TRUE(std::isnan(Cell(table, r, "estimate")));
      EXPECT_EQ(Cell(table, r, "dof_numerator"), 2);
      EXPECT_GT(Cell(table, r, "f"), 0);
    }
    ++checked;
  }
  EXPECT_EQ(checked, 12);
  const std::string json = dir.Read("out/summary.json");
  EXPECT_NE(json.find("\"method\": \"mixed\""), std::string::npos);
  EXPECT_NE(json.find("\"subjects\": [\"v1\", \"v2\""), std::string::npos);
  EXPECT_NE(json.find("\"n_min\": 7"), std::string::npos);
  EXPECT_NE(json.find("\"version\": \"" BOLDSUM_VERSION "\""), std::string::npos);
}

// A pool-ready folder: 8 subjects on a 4 x 3 x 2 grid, the mask leaving out 5 voxels.
class ImageStudy {
 public:
  explicit ImageStudy(const PoolTestDir& dir) : dir_(dir) {
    geometry_.dims = {4, 3, 2};
    geometry_.voxel_mm = {2, 2, 2};
    std::filesystem::create_directories(dir.Path("ready"));
    std::vector<float> mask(24, 1.0f);
    for (int i : {0, 5, 11, 17, 23}) mask[i] = 0.0f;
    WriteImage(dir.Path("ready/mask.nii.gz"), geometry_, mask);
    dir.Write("ready/subjects.tsv", "subject\n" + Subjects());
    dir.Write("participants.tsv", "participant_id\n" + Subjects());
    for (const char* contrast : {"melody", "rhythm"}) WriteStacks(contrast, 8);
  }

  static std::string Subjects() {
    std::string text;
    for (int i = 1; i <= 8; ++i) text += "sub-0" + std::to_string(i) + "\n";
    return text;
  }
  // Values exact in float32, so the library and the test see the same numbers.
  static float Estimate(int subject, int voxel) {
    return static_cast<float>(((subject * 5 + voxel * 3) % 11) * 0.25 - 1.0);
  }
  static float Variance(int subject, int voxel) {
    return static_cast<float>(0.125 + 0.0625 * ((subject + voxel) % 5));
  }

  void WriteStacks(const std::string& contrast, int volumes) const {
    std::vector<float> estimates, variances;
    for (int s = 0; s < volumes; ++s) {
      for (int voxel = 0; voxel < 24; ++voxel) {
        estimates.push_back(Estimate(s, voxel));
        variances.push_back(voxel == 7 && s == 2 ? kNaN : Variance(s, voxel));
      }
    }
    WriteImage(dir_.Path("ready/" + contrast + ".estimate.nii.gz"), geometry_, estimates,
               volumes);
    WriteImage(dir_.Path("ready/" + contrast + ".variance.nii.gz"), geometry_, variances,
               volumes);
  }

 private:
  const PoolTestDir& dir_;
  ImageGeometry geometry_;
};

TEST(RunPoolImages, MapsMatchTheSingleFitsAndAreNaNOutsideTheMask) {
  PoolTestDir dir;
  const ImageStudy study(dir);
  const LoadedGroupConfig loaded =
      dir.Load("input: ready\nparticipants: participants.tsv\noutput: out\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << dir.Messages(loaded)[0];
  EXPECT_EQ(loaded.spec.input.kind, PoolInputKind::kImages);
  const PoolSummary summary = RunPool(loaded.spec, {});
  // Per contrast: intercept.{estimate,variance,t,z}, n, tau2; then summary.json.
  EXPECT_EQ(summary.files_written.size(), 2u * 6u + 1u);
  ImageGeometry geometry;
  const std::vector<float> estimate =
      ReadVolume(dir.Path("out/melody/intercept.estimate.nii.gz"), &geometry);
  const std::vector<float> n = ReadVolume(dir.Path("out/melody/n.nii.gz"), &geometry);
  const std::vector<float> tau2 = ReadVolume(dir.Path("out/rhythm/tau2.nii.gz"), &geometry);
  EXPECT_EQ(geometry.dims, (std::array<int, 3>{4, 3, 2}));
  for (int voxel = 0; voxel < 24; ++voxel) {
    if (voxel == 0 || voxel == 5 || voxel == 11 || voxel == 17 || voxel == 23) {
      EXPECT_TRUE(std::isnan(estimate[voxel]) && std::isnan(n[voxel])) << voxel;
      continue;
    }
    Eigen::VectorXd y(8), v(8);
    for (int s = 0; s < 8; ++s) {
      y[s] = ImageStudy::Estimate(s, voxel);
      v[s] = voxel == 7 && s == 2 ? kNaN : ImageStudy::Variance(s, voxel);
    }
    const PooledFit fit = FitPooled(Eigen::MatrixXd::Ones(8, 1), y, v, PoolMethod::kMixed);
    EXPECT_EQ(estimate[voxel], static_cast<float>(fit.beta[0])) << voxel;
    EXPECT_EQ(tau2[voxel], static_cast<float>(fit.tau2)) << voxel;
    EXPECT_EQ(n[voxel], voxel == 7 ? 7.0f : 8.0f);
  }
}

TEST(RunPoolImages, ThreadCountAndSlabSizeDoNotChangeTheFiles) {
  PoolTestDir dir;
  const ImageStudy study(dir);
  LoadedGroupConfig loaded = dir.Load("input: ready\noutput: one\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors());
  PoolRunOptions options;
  options.threads = 1;
  RunPool(loaded.spec, options);
  loaded.spec.output_dir = dir.Path("three");
  options.threads = 3;
  RunPool(loaded.spec, options);
  // Slabs of 5 voxels (16 bytes per subject and voxel, 8 subjects): 4 passes per stack.
  loaded.spec.output_dir = dir.Path("slabs");
  options.slab_bytes = 16 * 8 * 5;
  RunPool(loaded.spec, options);
  for (const char* file : {"melody/intercept.z.nii.gz", "rhythm/tau2.nii.gz", "rhythm/n.nii.gz"}) {
    const std::string one = dir.Read(std::string("one/") + file);
    EXPECT_FALSE(one.empty()) << file;
    EXPECT_EQ(one, dir.Read(std::string("three/") + file)) << file;
    EXPECT_EQ(one, dir.Read(std::string("slabs/") + file)) << file;
  }
}

TEST(RunPoolImages, NothingIsWrittenWhenAnInputFailsToRead) {
  PoolTestDir dir;
  const ImageStudy study(dir);
  const LoadedGroupConfig loaded = dir.Load("input: ready\noutput: out\n");
  ASSERT_FALSE(loaded.diagnostics.HasErrors());
  // Damage the second contrast after validation: its data are read only by RunPool.
  std::string bytes = dir.Read("ready/rhythm.variance.nii.gz");
  dir.Write("ready/rhythm.variance.nii.gz", bytes.substr(0, bytes.size() / 2));
  EXPECT_THROW(RunPool(loaded.spec, {}), Error);
  EXPECT_EQ(dir.FilesUnder("out"), std::vector<std::string>{});
}

TEST(RunPoolImages, StackWithTheWrongVolumeCountIsAConfigError) {
  PoolTestDir dir;
  const ImageStudy study(dir);
  study.WriteStacks("rhythm", 7);
  const LoadedGroupConfig loaded = dir.Load("input: ready\n");
  const std::vector<std::string> messages = dir.Messages(loaded);
  ASSERT_EQ(messages.size(), 2u);
  EXPECT_EQ(messages[0], "D/ready/rhythm.estimate.nii.gz: error: has 7 volumes but subjects.tsv "
                         "lists 8 subjects (volume i is row i)");
}

}  // namespace
}  // namespace boldsum
