#include "report/peaks.h"

#include <algorithm>
#include <cmath>

#include "report/world_space.h"

namespace boldsum {
namespace {

// True when `a` (value, index) beats `b` as a maximum of sign +1 or a minimum of -1.
bool Beats(double a, int64_t ia, double b, int64_t ib, int sign) {
  return sign * a > sign * b || (a == b && ia < ib);
}

std::vector<Peak> Extrema(const ImageGeometry& g, const std::vector<float>& map, int count,
                          int sign) {
  const int nx = g.dims[0], ny = g.dims[1], nz = g.dims[2];
  const Affine affine = VoxelToWorld(g);
  std::vector<Peak> peaks;
  for (int k = 0; k < nz; ++k) {
    for (int j = 0; j < ny; ++j) {
      for (int i = 0; i < nx; ++i) {
        const int64_t index = i + int64_t{nx} * (j + int64_t{ny} * k);
        const double value = map[static_cast<size_t>(index)];
        if (!std::isfinite(value) || !(sign * value > 0)) continue;
        bool best = true;
        for (int dk = -1; dk <= 1 && best; ++dk) {
          for (int dj = -1; dj <= 1 && best; ++dj) {
            for (int di = -1; di <= 1 && best; ++di) {
              const int x = i + di, y = j + dj, z = k + dk;
              if ((di == 0 && dj == 0 && dk == 0) || x < 0 || y < 0 || z < 0 || x >= nx ||
                  y >= ny || z >= nz)
                continue;
              const int64_t other = x + int64_t{nx} * (y + int64_t{ny} * z);
              const double neighbour = map[static_cast<size_t>(other)];
              if (std::isfinite(neighbour) && Beats(neighbour, other, value, index, sign)) {
                best = false;
              }
            }
          }
        }
        if (!best) continue;
        Peak peak;
        peak.value = value;
        peak.voxel = {i, j, k};
        peak.world = WorldPosition(affine, i, j, k);
        peaks.push_back(peak);
      }
    }
  }
  std::stable_sort(peaks.begin(), peaks.end(), [sign](const Peak& a, const Peak& b) {
    return sign * a.value > sign * b.value;
  });
  if (static_cast<int>(peaks.size()) > count) peaks.resize(static_cast<size_t>(count));
  return peaks;
}

}  // namespace

std::vector<Peak> FindPeaks(const ImageGeometry& geometry, const std::vector<float>& map, int count,
                            bool minima) {
  std::vector<Peak> peaks = Extrema(geometry, map, count, +1);
  if (minima) {
    const std::vector<Peak> low = Extrema(geometry, map, count, -1);
    peaks.insert(peaks.end(), low.begin(), low.end());
  }
  return peaks;
}

}  // namespace boldsum
