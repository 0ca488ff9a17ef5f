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

}  // namespace

void PrintDemoComparison(const std::string& dir, std::ostream& out) {
  const Table truth = ReadTable((fs::path(dir) / "truth.tsv").string());
  const std::string contrast = "known_vs_new";
  out << "known_vs_new (familiar minus new melodies), data units; ROI = region table fit, "
         "image = mean of the voxel map over the region\n";
  out << std::left << std::setw(6) << "subj" << std::setw(16) << "region" << std::right
      << std::setw(9) << "true" << std::setw(10) << "ROI est" << std::setw(8) << "ROI se"
      << std::setw(10) << "image" << "\n";
  double squared_error = 0, true_sum = 0;
  int count = 0, covered = 0;
  std::map<std::string, const DemoRegion*> regions;
  const std::vector<DemoRegion> demo_regions = DemoRegions();
  for (const DemoRegion& region : demo_regions) regions[region.name] = &region;
  for (size_t row = 0; row < truth.rows.size(); ++row) {
    const std::string subject = Text(truth, row, "subject");
    const std::string region = Text(truth, row, "region");
    if (Text(truth, row, "condition") != "melody_known" || region.find("auditory") == std::string::npos) {
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
    const double image_mean = fs::exists(image) ? RegionMean(image, *regions.at(region)) : std::nan("");
    const double se = std::sqrt(variance);
    out << std::left << std::setw(6) << subject << std::setw(16) << region << std::right
        << std::fixed << std::setprecision(2) << std::setw(9) << true_value << std::setw(10)
        << estimate << std::setw(8) << se << std::setw(10) << image_mean << "\n";
    squared_error += (estimate - true_value) * (estimate - true_value);
    true_sum += true_value;
    covered += std::abs(estimate - true_value) <= 1.96 * se;
    ++count;
  }
  out << std::setprecision(2) << "ROI estimates: root-mean-square error " << std::sqrt(squared_error / count)
      << " against a mean true effect of " << true_sum / count << "; " << covered << " of " << count
      << " true values inside estimate +/- 1.96 se\n";
}

}  // namespace boldsum
