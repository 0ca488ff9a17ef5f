#include <array>
#include <cmath>
#include <filesystem>
#include <iomanip>
#include <map>
#include <ostream>

#include "boldsum/io.h"
#include "boldsum/study.h"
#include "study/demo_study.h"

namespace fs = std::filesystem;

namespace boldsum {
namespace {

double Cell(const Table& table, size_t row, const std::string& column) {
  double value = std::nan("");
  const int index = table.ColumnIndex(column);
  if (index < 0 || !ParseNumber(table.rows[row][static_cast<size_t>(index)], &value)) {
    throw Error(table.CellLocation(static_cast<int>(row), std::max(index, 0) + 1),
                "expected a number in column '" + column + "'");
  }
  return value;
}

std::string Text(const Table& table, size_t row, const std::string& column) {
  return table.rows[row][static_cast<size_t>(table.ColumnIndex(column))];
}

// Mean over the region's voxels of a subject's image map.
double RegionMean(const std::string& image, const DemoRegion& region) {
  ImageGeometry geometry;
  const std::vector<float> values = ReadVolume(image, &geometry);
  double sum = 0;
  for (int64_t voxel : region.voxels) sum += values[static_cast<size_t>(voxel)];
  return sum / static_cast<double>(region.voxels.size());
}

// The planted group mean of a first-level contrast in a region: the mean over subjects of
// the true contrast value (truth.tsv's true_beta per condition).
double TrueGroupMean(const Table& truth, const std::string& contrast, const std::string& region) {
  std::map<std::string, std::map<std::string, double>> beta;  // subject -> condition -> value
  for (size_t row = 0; row < truth.rows.size(); ++row) {
    if (Text(truth, row, "region") != region) continue;
    beta[Text(truth, row, "subject")][Text(truth, row, "condition")] =
        Cell(truth, row, "true_beta");
  }
  double sum = 0;
  for (auto& [subject, value] : beta) {
    sum += contrast == "known_vs_new" ? value["melody_known"] - value["melody_new"]
                                      : 0.5 * value["melody_known"] + 0.5 * value["melody_new"];
  }
  return sum / static_cast<double>(beta.size());
}

// One pooled first-level contrast's group_mean maps against the planted regions: per
// region the share of voxels above the threshold and the map's mean estimate against the
// planted group mean; elsewhere in the mask, the false-positive fractions; then where the
// effect was found.
void PrintGroupMaps(const fs::path& dir, const Table& truth, const std::string& contrast,
                    std::ostream& out) {
  // One-sided p < 0.001 uncorrected (common practice for a voxelwise display threshold).
  constexpr double kThreshold = 3.09;
  const fs::path folder = dir / "results" / "group" / contrast;
  ImageGeometry geometry;
  const std::vector<float> z = ReadVolume((folder / "group_mean.z.nii.gz").string(), &geometry);
  const std::vector<float> estimate =
      ReadVolume((folder / "group_mean.estimate.nii.gz").string(), nullptr);
  std::vector<char> in_region(z.size(), 0);
  out << std::defaultfloat << std::setprecision(6) << contrast << " (group_mean); z > "
      << kThreshold << " counts as found (one-sided p < 0.001 uncorrected)\n";
  out << std::left << std::setw(16) << "region" << std::right << std::setw(12) << "voxels>thr"
      << std::setw(11) << "true mean" << std::setw(11) << "estimate" << std::setw(9) << "max z"
      << "\n";
  std::string found, partly;
  for (const DemoRegion& region : DemoRegions()) {
    int above = 0;
    double sum = 0, peak = -INFINITY;
    for (int64_t voxel : region.voxels) {
      const size_t i = static_cast<size_t>(voxel);
      in_region[i] = 1;
      above += z[i] > kThreshold;
      sum += estimate[i];
      peak = std::max(peak, static_cast<double>(z[i]));
    }
    const int n = static_cast<int>(region.voxels.size());
    out << std::left << std::setw(16) << region.name << std::right << std::setw(12)
        << (std::to_string(above) + "/" + std::to_string(n)) << std::fixed << std::setprecision(2)
        << std::setw(11) << TrueGroupMean(truth, contrast, region.name) << std::setw(11) << sum / n
        << std::setw(9) << peak << "\n";
    if (2 * above >= n) {
      found += (found.empty() ? "" : ", ") + region.name;
    } else if (above > 0) {
      partly += (partly.empty() ? "" : ", ") + region.name + " (" + std::to_string(above) + " of " +
                std::to_string(n) + " voxels)";
    }
  }
  int64_t outside = 0, above = 0, either_tail = 0, best = -1;
  for (size_t i = 0; i < z.size(); ++i) {
    if (in_region[i] || !std::isfinite(z[i])) continue;
    ++outside;
    above += z[i] > kThreshold;
    either_tail += std::fabs(z[i]) > 1.96;
    if (best < 0 || z[i] > z[static_cast<size_t>(best)]) best = static_cast<int64_t>(i);
  }
  const int64_t nx = geometry.dims[0], ny = geometry.dims[1];
  const std::array<double, 3> world =
      geometry.WorldPosition(best % nx, best / nx % ny, best / (nx * ny));
  out << std::setprecision(2) << "elsewhere in the mask (" << outside
      << " voxels): " << 100.0 * static_cast<double>(above) / static_cast<double>(outside)
      << "% with z > " << kThreshold << " (0.10% expected by chance), "
      << 100.0 * static_cast<double>(either_tail) / static_cast<double>(outside)
      << "% with |z| > 1.96 (5% expected); highest z there " << z[static_cast<size_t>(best)]
      << " at " << std::setprecision(0) << world[0] << "," << world[1] << "," << world[2]
      << " mm\n";
  out << "the planted effect (both auditory regions) was found ";
  if (!found.empty()) out << "in: " << found << (partly.empty() ? "" : "; partly in: ") << partly;
  if (found.empty()) out << (partly.empty() ? "in no region" : "only in parts of: " + partly);
  out << "; elsewhere " << above << " voxels above it\n";
}

// The region tables' group means (regions.tsv of `boldsum pool group_roi.yaml`) against
// the planted group means.
void PrintGroupRegions(const fs::path& dir, const Table& truth, std::ostream& out) {
  const Table pooled = ReadTable((dir / "results-roi" / "group" / "regions.tsv").string());
  out << "\nGroup stage of the region tables (boldsum pool group_roi.yaml), group_mean\n";
  out << std::left << std::setw(18) << "contrast" << std::setw(16) << "region" << std::right
      << std::setw(11) << "true mean" << std::setw(10) << "estimate" << std::setw(8) << "se"
      << std::setw(8) << "z" << std::setw(9) << "tau2"
      << "\n";
  for (size_t row = 0; row < pooled.rows.size(); ++row) {
    if (Text(pooled, row, "group_contrast") != "group_mean") continue;
    const std::string contrast = Text(pooled, row, "contrast");
    const std::string region = Text(pooled, row, "region");
    out << std::left << std::setw(18) << contrast << std::setw(16) << region << std::right
        << std::fixed << std::setprecision(2) << std::setw(11)
        << TrueGroupMean(truth, contrast, region) << std::setw(10) << Cell(pooled, row, "estimate")
        << std::setw(8) << std::sqrt(Cell(pooled, row, "variance")) << std::setw(8)
        << Cell(pooled, row, "z") << std::setw(9) << Cell(pooled, row, "tau2") << "\n";
  }
}

}  // namespace

void PrintDemoComparison(const std::string& dir, std::ostream& out) {
  const Table truth = ReadTable((fs::path(dir) / "truth.tsv").string());
  const std::string contrast = "known_vs_new";
  out << "known_vs_new (familiar minus new melodies), data units; ROI = region table fit, "
         "image = mean of the voxel map over the region\n";
  out << std::left << std::setw(6) << "subj" << std::setw(16) << "region" << std::right
      << std::setw(9) << "true" << std::setw(10) << "ROI est" << std::setw(8) << "ROI se"
      << std::setw(10) << "image"
      << "\n";
  double squared_error = 0, true_sum = 0;
  int count = 0, covered = 0;
  std::map<std::string, const DemoRegion*> regions;
  const std::vector<DemoRegion> demo_regions = DemoRegions();
  for (const DemoRegion& region : demo_regions) regions[region.name] = &region;
  for (size_t row = 0; row < truth.rows.size(); ++row) {
    const std::string subject = Text(truth, row, "subject");
    const std::string region = Text(truth, row, "region");
    if (Text(truth, row, "condition") != "melody_known" ||
        region.find("auditory") == std::string::npos) {
      continue;
    }
    const double true_value = Cell(truth, row, "true_known_vs_new");
    const Table roi = ReadTable((fs::path(dir) / "results-roi" / subject / "summary.tsv").string());
    double estimate = std::nan(""), variance = std::nan("");
    for (size_t r = 0; r < roi.rows.size(); ++r) {
      if (Text(roi, r, "contrast") == contrast && Text(roi, r, "region") == region) {
        estimate = Cell(roi, r, "estimate");
        variance = Cell(roi, r, "variance");
      }
    }
    const std::string image =
        (fs::path(dir) / "results" / subject / (contrast + ".estimate.nii.gz")).string();
    const double image_mean =
        fs::exists(image) ? RegionMean(image, *regions.at(region)) : std::nan("");
    const double se = std::sqrt(variance);
    out << std::left << std::setw(6) << subject << std::setw(16) << region << std::right
        << std::fixed << std::setprecision(2) << std::setw(9) << true_value << std::setw(10)
        << estimate << std::setw(8) << se << std::setw(10) << image_mean << "\n";
    squared_error += (estimate - true_value) * (estimate - true_value);
    true_sum += true_value;
    covered += std::abs(estimate - true_value) <= 1.96 * se;
    ++count;
  }
  out << std::setprecision(2) << "ROI estimates: root-mean-square error "
      << std::sqrt(squared_error / count) << " against a mean true effect of " << true_sum / count
      << "; " << covered << " of " << count << " true values inside estimate +/- 1.96 se\n";
  if (fs::exists(fs::path(dir) / "results" / "group" / "summary.json")) {
    out << "\nGroup stage (boldsum pool group.yaml), mixed effects, voxel maps over the demo "
           "regions\n";
    for (const char* first_level : {"melodies_vs_rest", "known_vs_new"}) {
      PrintGroupMaps(fs::path(dir), truth, first_level, out);
    }
  }
  if (fs::exists(fs::path(dir) / "results-roi" / "group" / "summary.json")) {
    PrintGroupRegions(fs::path(dir), truth, out);
  }
}

}  // namespace boldsum
