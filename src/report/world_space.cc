#include "report/world_space.h"

#include <algorithm>
#include <cmath>

namespace boldsum {

Affine VoxelToWorld(const ImageGeometry& g) {
  if (g.sform_code > 0) return g.srow;
  const double dx = g.voxel_mm[0], dy = g.voxel_mm[1], dz = g.voxel_mm[2];
  if (g.qform_code <= 0) {
    return {{{dx, 0, 0, 0}, {0, dy, 0, 0}, {0, 0, dz, 0}}};
  }
  double b = g.quatern_b, c = g.quatern_c, d = g.quatern_d;
  double a = 1.0 - (b * b + c * c + d * d);
  if (a < 1e-7) {  // nifti1.h: a 180-degree rotation; renormalise (b, c, d)
    const double norm = std::sqrt(b * b + c * c + d * d);
    b /= norm;
    c /= norm;
    d /= norm;
    a = 0.0;
  } else {
    a = std::sqrt(a);
  }
  const double r[3][3] = {
      {a * a + b * b - c * c - d * d, 2 * b * c - 2 * a * d, 2 * b * d + 2 * a * c},
      {2 * b * c + 2 * a * d, a * a + c * c - b * b - d * d, 2 * c * d - 2 * a * b},
      {2 * b * d - 2 * a * c, 2 * c * d + 2 * a * b, a * a + d * d - c * c - b * b}};
  const double qfac = g.qfac < 0 ? -1.0 : 1.0;
  const double scale[3] = {dx, dy, qfac * dz};
  const double offset[3] = {g.qoffset_x, g.qoffset_y, g.qoffset_z};
  Affine affine;
  for (int row = 0; row < 3; ++row) {
    for (int col = 0; col < 3; ++col) affine[row][col] = r[row][col] * scale[col];
    affine[row][3] = offset[row];
  }
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
