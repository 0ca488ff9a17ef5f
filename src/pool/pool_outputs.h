// The files the group stage writes, all under the config's `output` folder.
//
// Image input, per pooled first-level contrast <c> and group contrast <g>:
//   <c>/<g>.estimate.nii.gz   t contrast: c'beta
//   <c>/<g>.variance.nii.gz   t contrast: c' Cov(beta) c
//   <c>/<g>.t.nii.gz          t contrast: t with n - k dof
//   <c>/<g>.f.nii.gz          F contrast: F with (q, n - k) dof
//   <c>/<g>.z.nii.gz          z of the t or F (same upper tail)
//   <c>/n.nii.gz              subjects used at each voxel
//   <c>/tau2.nii.gz           mixed: REML between-subject variance; fixed: 0
//   <c>/sigma2.nii.gz         ols only (instead of tau2): RSS / (n - k)
// float32 NIfTI-1 on the mask's grid, NaN outside the mask and where n <= k.
// Region input: one table regions.tsv with a row per (contrast, group_contrast, region)
// and the columns contrast, group_contrast, region, n, tau2, sigma2, iterations,
// estimate, variance, t, f, dof_numerator, dof, z (`n/a` where a value does not apply;
// numbers with 17 significant digits, so they read back exactly).
// Both: summary.json (method, subjects used, design, contrasts, per-contrast counts,
// tool version). It is written last, so its presence marks a complete run.
#pragma once

#include <string>
#include <vector>

#include "boldsum/pool.h"
#include "pool/pool_inputs.h"

namespace boldsum {

// One pooled first-level contrast: where its values came from and what came out.
struct PooledContrast {
  std::string contrast;
  PoolData data;  // estimates/variances released after pooling; geometry, voxels, regions kept
  PooledMaps maps;
  PoolContrastSummary summary;
};

// Counts for summary.json from the maps.
PoolContrastSummary SummarizeMaps(const std::string& contrast, const PooledMaps& maps,
                                  PoolMethod method);

// Writes the image maps of one contrast into <output>/<contrast>/; returns the paths.
std::vector<std::string> WriteContrastImages(const GroupSpec& spec, const PooledContrast& pooled);

// The text of regions.tsv for all contrasts.
std::string RegionsTable(const GroupSpec& spec, const std::vector<PooledContrast>& pooled);

// The text of summary.json.
std::string PoolSummaryJson(const GroupSpec& spec, const PoolRunOptions& options,
                            const std::vector<PooledContrast>& pooled);

}  // namespace boldsum
