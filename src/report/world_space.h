// Where a voxel lies in the image's world space (millimetres), and how its axes run.
#pragma once

#include <array>

#include "boldsum/io.h"

namespace boldsum {

using Affine = std::array<std::array<double, 4>, 3>;  // world = A [i j k 1]'

// The voxel-to-world affine of ImageGeometry::WorldPosition (sform, else qform, else the
// voxel sizes; the NIfTI-1 rules) as a matrix, for fractional voxel positions and axis
// order.
Affine VoxelToWorld(const ImageGeometry& geometry);

std::array<double, 3> WorldPosition(const Affine& affine, double i, double j, double k);

// For each world axis (x, y, z) the voxel axis that moves most along it and whether it
// runs the same way (+1) or reversed (-1). The three voxel axes differ.
struct AxisOrder {
  std::array<int, 3> voxel_axis;
  std::array<int, 3> sign;
};
AxisOrder DominantAxes(const Affine& affine);

}  // namespace boldsum
