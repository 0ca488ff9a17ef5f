// The strongest local extrema of a statistic map, located in world space.
#pragma once

#include <array>
#include <vector>

#include "boldsum/io.h"

namespace boldsum {

struct Peak {
  double value = 0.0;
  std::array<int, 3> voxel = {0, 0, 0};     // i, j, k
  std::array<double, 3> world = {0, 0, 0};  // mm (report/world_space.h)
};

// Local maxima with value > 0 and local minima with value < 0 among the finite voxels:
// a voxel is a maximum when no finite voxel of its 26 neighbours is larger (among equal
// values the lowest linear index counts). Returns at most `count` maxima, largest first,
// then (when `minima`) at most `count` minima, most negative first.
std::vector<Peak> FindPeaks(const ImageGeometry& geometry, const std::vector<float>& map, int count,
                            bool minima);

}  // namespace boldsum
