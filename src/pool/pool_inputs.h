// What the group stage reads: a pool-ready folder of 4D stacks, or a ROI summaries table.
//
// Images: `<contrast>.estimate.nii.gz` and `<contrast>.variance.nii.gz` (4D, volume i =
// row i of `subjects.tsv`; `.nii` also accepted), `mask.nii.gz` (or `mask.nii`; a voxel
// is analysed where the mask is finite and non-zero) and `subjects.tsv` (the subject id
// is the column `subject`, else `participant_id`, else the first column).
// Regions: a table with the columns subject, contrast, region, estimate, variance (dof
// and any other column are ignored); `n/a` marks a missing value. A subject without a
// row for a (contrast, region) pair is missing there.
#pragma once

#include <Eigen/Dense>
#include <cstdint>
#include <string>
#include <vector>

#include "boldsum/error.h"
#include "boldsum/io.h"
#include "boldsum/pool.h"

namespace boldsum {

// Fills `input` from `path` (a folder, or a .tsv table for regions): kind, subjects in
// input order, contrasts found. Reads headers and tables only, no voxel values. Every
// problem goes to `diagnostics`, located in the offending file or at `where` (the
// config's input key). Returns false when the input is unusable.
bool DescribePoolInput(const std::string& path, const SourceLocation& where, PoolInput* input,
                       Diagnostics* diagnostics);

// One first-level contrast's values: n x V estimates and variances (NaN where missing),
// with V the mask voxels (images) or the regions of that contrast (first-appearance order).
struct PoolData {
  Eigen::MatrixXd estimates, variances;
  ImageGeometry geometry;       // images only
  std::vector<int64_t> voxels;  // images: linear indices of the mask voxels
  std::vector<std::string> regions;  // regions only
};

// Images: the mask's voxels (finite and non-zero, increasing linear indices) and grid.
std::vector<int64_t> ReadPoolMask(const PoolInput& input, ImageGeometry* geometry);

// Images: the n x voxels.size() estimates and variances of `contrast` at `voxels`.
// Throws Error naming the file on a volume count that differs from the subjects, another
// grid than `geometry`, or a truncated or corrupt file.
void ReadImageSlab(const PoolInput& input, const std::string& contrast,
                   const ImageGeometry& geometry, const std::vector<int64_t>& voxels,
                   Eigen::MatrixXd* estimates, Eigen::MatrixXd* variances);

// Regions: the values of `contrast`. Throws Error at the cell for a bad value.
PoolData ReadRegionData(const PoolInput& input, const std::string& contrast);

// The subject id used for matching: `id` without a leading "sub-".
std::string SubjectKey(const std::string& id);

}  // namespace boldsum
