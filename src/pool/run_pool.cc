#include <algorithm>
#include <filesystem>

#include "boldsum/io.h"
#include "boldsum/pool.h"
#include "pool/pool_outputs.h"

namespace boldsum {

namespace fs = std::filesystem;

namespace {

void Append(const Eigen::VectorXd& part, Eigen::Index offset, Eigen::VectorXd* whole) {
  whole->segment(offset, part.size()) = part;
}

// Reads and pools one image contrast slab by slab of mask voxels; the per-voxel fits do
// not depend on the slab, so the maps equal those of a single pass.
PooledMaps PoolImageContrast(const GroupSpec& spec, const PoolRunOptions& options,
                             const std::string& contrast, PoolData* data) {
  const Eigen::Index n = spec.design.z.rows();
  const Eigen::Index voxels = static_cast<Eigen::Index>(data->voxels.size());
  const Eigen::Index slab =
      std::max<Eigen::Index>(1, options.slab_bytes / (16 * std::max<Eigen::Index>(1, n)));
  if (voxels == 0) {
    return PoolVoxels(spec.design.z, Eigen::MatrixXd(n, 0), Eigen::MatrixXd(n, 0),
                      spec.contrasts, spec.method, options.threads, options.reml);
  }
  PooledMaps whole;
  for (Eigen::Index begin = 0; begin < voxels; begin += slab) {
    const Eigen::Index end = std::min(voxels, begin + slab);
    const std::vector<int64_t> part(data->voxels.begin() + begin, data->voxels.begin() + end);
    ReadImageSlab(spec.input, contrast, data->geometry, part, &data->estimates, &data->variances);
    PooledMaps maps = PoolVoxels(spec.design.z, data->estimates, data->variances, spec.contrasts,
                                 spec.method, options.threads, options.reml);
    if (begin == 0 && end == voxels) return maps;
    if (begin == 0) {
      // Sized for every voxel from the first slab's layout; filled slab by slab.
      whole = maps;
      for (Eigen::VectorXd* map : {&whole.n, &whole.tau2, &whole.sigma2}) {
        map->conservativeResize(voxels);
      }
      whole.iterations.resize(static_cast<size_t>(voxels));
      whole.converged.resize(static_cast<size_t>(voxels));
      for (PooledContrastMaps& c : whole.contrasts) {
        for (Eigen::VectorXd* map : {&c.estimate, &c.variance, &c.stat, &c.z, &c.dof}) {
          map->conservativeResize(voxels);
        }
      }
    }
    Append(maps.n, begin, &whole.n);
    Append(maps.tau2, begin, &whole.tau2);
    Append(maps.sigma2, begin, &whole.sigma2);
    std::copy(maps.iterations.begin(), maps.iterations.end(), whole.iterations.begin() + begin);
    std::copy(maps.converged.begin(), maps.converged.end(), whole.converged.begin() + begin);
    for (size_t c = 0; c < maps.contrasts.size(); ++c) {
      Append(maps.contrasts[c].estimate, begin, &whole.contrasts[c].estimate);
      Append(maps.contrasts[c].variance, begin, &whole.contrasts[c].variance);
      Append(maps.contrasts[c].stat, begin, &whole.contrasts[c].stat);
      Append(maps.contrasts[c].z, begin, &whole.contrasts[c].z);
      Append(maps.contrasts[c].dof, begin, &whole.contrasts[c].dof);
    }
  }
  return whole;
}

}  // namespace

PoolSummary RunPool(const GroupSpec& spec, const PoolRunOptions& options) {
  if (spec.first_level_contrasts.empty()) {
    throw Error(spec.config_path + ": no first-level contrast to pool");
  }
  // Everything is read and fitted before the first file is written.
  std::vector<PooledContrast> pooled;
  for (const std::string& contrast : spec.first_level_contrasts) {
    PooledContrast one;
    one.contrast = contrast;
    if (static_cast<Eigen::Index>(spec.input.subjects.size()) != spec.design.z.rows()) {
      throw Error(spec.config_path + ": the design has " + std::to_string(spec.design.z.rows()) +
                  " rows but the input has " + std::to_string(spec.input.subjects.size()) +
                  " subjects");
    }
    if (spec.input.kind == PoolInputKind::kImages) {
      one.data.voxels = ReadPoolMask(spec.input, &one.data.geometry);
      one.maps = PoolImageContrast(spec, options, contrast, &one.data);
    } else {
      one.data = ReadRegionData(spec.input, contrast);
      one.maps = PoolVoxels(spec.design.z, one.data.estimates, one.data.variances,
                            spec.contrasts, spec.method, options.threads, options.reml);
    }
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
