#include "report/mosaic.h"

#include <algorithm>
#include <array>
#include <cmath>

#include "report/colour_scale.h"
#include "report/world_space.h"

namespace boldsum {
namespace {

constexpr int kTileTarget = 170;  // displayed pixels across the larger side of a tile
constexpr int kColumns = 6;
constexpr int kGap = 1;  // image pixels between tiles

}  // namespace

std::pair<double, double> ValueRange(const std::vector<float>& grid,
                                     const std::vector<unsigned char>& extent, double low_fraction,
                                     double high_fraction) {
  std::vector<float> values;
  for (size_t i = 0; i < grid.size() && i < extent.size(); ++i) {
    if (extent[i] && std::isfinite(grid[i])) values.push_back(grid[i]);
  }
  if (values.empty()) return {0.0, 1.0};
  std::sort(values.begin(), values.end());
  const auto at = [&](double f) {
    return values[static_cast<size_t>(std::lround(f * static_cast<double>(values.size() - 1)))];
  };
  return {at(low_fraction), at(high_fraction)};
}

MosaicPicture DrawMosaic(const ImageGeometry& g, const std::vector<unsigned char>& extent,
                         const SliceLayers& layers, int max_slices) {
  MosaicPicture mosaic;
  const Affine affine = VoxelToWorld(g);
  const AxisOrder order = DominantAxes(affine);
  const int ah = order.voxel_axis[0], av = order.voxel_axis[1], as = order.voxel_axis[2];
  std::array<int, 3> lo = g.dims, hi = {-1, -1, -1};
  std::vector<int> slice_count(static_cast<size_t>(g.dims[as]), 0);
  for (int k = 0; k < g.dims[2]; ++k) {
    for (int j = 0; j < g.dims[1]; ++j) {
      for (int i = 0; i < g.dims[0]; ++i) {
        const int64_t index = i + int64_t{g.dims[0]} * (j + int64_t{g.dims[1]} * k);
        if (static_cast<size_t>(index) >= extent.size() || !extent[static_cast<size_t>(index)])
          continue;
        const std::array<int, 3> ijk = {i, j, k};
        for (int a = 0; a < 3; ++a) {
          lo[a] = std::min(lo[a], ijk[a]);
          hi[a] = std::max(hi[a], ijk[a]);
        }
        ++slice_count[static_cast<size_t>(ijk[as])];
      }
    }
  }
  if (hi[0] < 0) return mosaic;
  for (int a : {ah, av}) {
    lo[a] = std::max(0, lo[a] - 1);
    hi[a] = std::min(g.dims[a] - 1, hi[a] + 1);
  }
  std::vector<int> occupied;
  for (int s = 0; s < g.dims[as]; ++s) {
    if (slice_count[static_cast<size_t>(s)] > 0) occupied.push_back(s);
  }
  std::vector<int> slices;
  const int shown = std::min(max_slices, static_cast<int>(occupied.size()));
  for (int t = 0; t < shown; ++t) {
    const double f = shown > 1 ? static_cast<double>(t) / (shown - 1) : 0.5;
    const int s = occupied[static_cast<size_t>(std::lround(f * (occupied.size() - 1)))];
    if (slices.empty() || slices.back() != s) slices.push_back(s);
  }
  // Show inferior slices first when world z runs against the voxel axis.
  if (order.sign[2] < 0) std::reverse(slices.begin(), slices.end());

  const int w = hi[ah] - lo[ah] + 1, h = hi[av] - lo[av] + 1;
  const int scale =
      std::clamp(static_cast<int>(std::lround(double(kTileTarget) / std::max(w, h))), 1, 8);
  mosaic.scale = scale;
  mosaic.tile_width = w;
  mosaic.tile_height = h;
  mosaic.gap = kGap;
  mosaic.columns = std::min(kColumns, static_cast<int>(slices.size()));
  const int rows = (static_cast<int>(slices.size()) + mosaic.columns - 1) / mosaic.columns;
  mosaic.image = RgbImage(mosaic.columns * mosaic.tile_width + (mosaic.columns - 1) * kGap,
                          rows * mosaic.tile_height + (rows - 1) * kGap, Rgb{0, 0, 0});
  for (size_t t = 0; t < slices.size(); ++t) {
    const int x0 = static_cast<int>(t % mosaic.columns) * (mosaic.tile_width + kGap);
    const int y0 = static_cast<int>(t / mosaic.columns) * (mosaic.tile_height + kGap);
    std::array<int, 3> ijk;
    ijk[as] = slices[t];
    for (int v = 0; v < h; ++v) {
      ijk[av] = order.sign[1] > 0 ? hi[av] - v : lo[av] + v;
      for (int u = 0; u < w; ++u) {
        ijk[ah] = order.sign[0] > 0 ? lo[ah] + u : hi[ah] - u;
        const size_t index = static_cast<size_t>(
            ijk[0] + int64_t{g.dims[0]} * (ijk[1] + int64_t{g.dims[1]} * ijk[2]));
        Rgb colour{0, 0, 0};
        if (layers.background) {
          colour = Grey((*layers.background)[index], layers.background_low, layers.background_high);
        }
        if (layers.overlay) {
          const double value = (*layers.overlay)[index];
          if (std::isfinite(value) && std::abs(value) >= layers.overlay_threshold) {
            colour = DivergingColour(value, layers.overlay_limit);
          }
        }
        mosaic.image.at(x0 + u, y0 + v) = colour;
      }
    }
    // World z of the tile's centre.
    std::array<double, 3> centre;
    centre[ah] = 0.5 * (lo[ah] + hi[ah]);
    centre[av] = 0.5 * (lo[av] + hi[av]);
    centre[as] = slices[t];
    const std::array<double, 3> world = WorldPosition(affine, centre[0], centre[1], centre[2]);
    mosaic.tile_labels.push_back("z " + LabelNumber(std::round(world[2]), 4) + " mm");
  }
  return mosaic;
}

}  // namespace boldsum
