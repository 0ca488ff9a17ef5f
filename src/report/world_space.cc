#include "report/world_space.h"

#include <algorithm>
#include <cmath>

namespace boldsum {

Affine VoxelToWorld(const ImageGeometry& g) {
  // The map is affine: its columns are the steps along each voxel axis.
  const std::array<double, 3> origin = g.WorldPosition(0, 0, 0);
  Affine affine;
  for (int axis = 0; axis < 3; ++axis) {
    const std::array<double, 3> step = g.WorldPosition(axis == 0, axis == 1, axis == 2);
    for (int row = 0; row < 3; ++row) affine[row][axis] = step[row] - origin[row];
  }
  for (int row = 0; row < 3; ++row) affine[row][3] = origin[row];
  return affine;
}

std::array<double, 3> WorldPosition(const Affine& a, double i, double j, double k) {
  std::array<double, 3> world;
  for (int row = 0; row < 3; ++row) {
    world[row] = a[row][0] * i + a[row][1] * j + a[row][2] * k + a[row][3];
  }
  return world;
}

AxisOrder DominantAxes(const Affine& a) {
  AxisOrder order{{-1, -1, -1}, {1, 1, 1}};
  std::array<bool, 3> used = {false, false, false};
  // Take the strongest (world axis, voxel axis) pairings first.
  for (int round = 0; round < 3; ++round) {
    double best = -1.0;
    int best_world = 0, best_voxel = 0;
    for (int w = 0; w < 3; ++w) {
      if (order.voxel_axis[w] >= 0) continue;
      for (int v = 0; v < 3; ++v) {
        if (used[v]) continue;
        const double strength = std::abs(a[w][v]);
        if (strength > best) {
          best = strength;
          best_world = w;
          best_voxel = v;
        }
      }
    }
    order.voxel_axis[best_world] = best_voxel;
    order.sign[best_world] = a[best_world][best_voxel] < 0 ? -1 : 1;
    used[best_voxel] = true;
  }
  return order;
}

}  // namespace boldsum
