#include <filesystem>

#include "boldsum/io.h"
#include "boldsum/pool.h"
#include "pool/pool_outputs.h"

namespace boldsum {

namespace fs = std::filesystem;

PoolSummary RunPool(const GroupSpec& spec, const PoolRunOptions& options) {
  if (spec.first_level_contrasts.empty()) {
    throw Error(spec.config_path + ": no first-level contrast to pool");
  }
  // Everything is read and fitted before the first file is written.
  std::vector<PooledContrast> pooled;
  for (const std::string& contrast : spec.first_level_contrasts) {
    PooledContrast one;
    one.contrast = contrast;
    one.data = ReadPoolData(spec.input, contrast);
    if (one.data.estimates.rows() != spec.design.z.rows()) {
      throw Error(spec.config_path + ": the design has " + std::to_string(spec.design.z.rows()) +
                  " rows but the input has " + std::to_string(one.data.estimates.rows()) +
                  " subjects");
    }
    one.maps = PoolVoxels(spec.design.z, one.data.estimates, one.data.variances, spec.contrasts,
                          spec.method, options.threads, options.reml);
    one.data.estimates.resize(0, 0);
    one.data.variances.resize(0, 0);
    one.summary = SummarizeMaps(contrast, one.maps, spec.method);
    pooled.push_back(std::move(one));
  }
  const std::string json = PoolSummaryJson(spec, options, pooled);
  const bool images = spec.input.kind == PoolInputKind::kImages;
  std::string table;
  if (!images) table = RegionsTable(spec, pooled);

  std::error_code error;
  for (const PooledContrast& one : pooled) {
    const fs::path folder =
        images ? fs::path(spec.output_dir) / one.contrast : fs::path(spec.output_dir);
    fs::create_directories(folder, error);
    if (error) {
      throw Error(folder.string() + ": cannot create the output folder (" + error.message() +
                  ")");
    }
  }
  PoolSummary summary;
  if (images) {
    for (const PooledContrast& one : pooled) {
      for (const std::string& path : WriteContrastImages(spec, one)) {
        summary.files_written.push_back(path);
      }
    }
  } else {
    const std::string path = (fs::path(spec.output_dir) / "regions.tsv").string();
    WriteFileAtomically(path, table);
    summary.files_written.push_back(path);
  }
  const std::string summary_path = (fs::path(spec.output_dir) / "summary.json").string();
  WriteFileAtomically(summary_path, json);
  summary.files_written.push_back(summary_path);
  for (const PooledContrast& one : pooled) summary.contrasts.push_back(one.summary);
  return summary;
}

}  // namespace boldsum
