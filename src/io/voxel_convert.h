// Internal: conversion of raw NIfTI voxel values to float, with byte swapping and
// scl_slope/scl_inter scaling.
#pragma once

#include <cstdint>
#include <vector>

#include "io/nifti_header.h"

namespace boldsum {

// Converts `count` consecutive raw values at `raw` into `out`.
void ConvertValues(const NiftiLayout& layout, const unsigned char* raw, int64_t count,
                   float* out);

// Converts `n_volumes` consecutive raw volumes at `raw` into rows
// [first_row, first_row + n_volumes) of the column-major matrix `block` with `rows`
// rows: column j receives voxel `voxels[j]` (a linear index within a volume).
void GatherVolumes(const NiftiLayout& layout, const unsigned char* raw, int n_volumes,
                   const std::vector<int64_t>& voxels, float* block, int64_t rows,
                   int64_t first_row);

// Adds each voxel of `n_volumes` consecutive raw volumes at `raw`, converted, to
// sums[voxel] (sums has one entry per voxel of a volume).
void SumVolumes(const NiftiLayout& layout, const unsigned char* raw, int n_volumes,
                double* sums);

}  // namespace boldsum
