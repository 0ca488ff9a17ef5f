// Axial slices of a 3D image laid out as one picture: a grey background image with a
// coloured overlay on the diverging scale. Drawing only; no statistics.
#pragma once

#include <string>
#include <vector>

#include "boldsum/io.h"
#include "report/svg_plots.h"

namespace boldsum {

struct SliceLayers {
  const std::vector<float>* background = nullptr;      // grid values; nullptr draws black
  double background_low = 0.0, background_high = 1.0;  // black .. white
  const std::vector<float>* overlay = nullptr;         // grid values; NaN is not drawn
  double overlay_limit = 1.0;                          // colours saturate at +-limit
  double overlay_threshold = 0.0;                      // |value| < threshold is not drawn
};

// Up to `max_slices` slices across the voxels marked in `extent` (grid-sized, non-zero
// inside), each cropped to their bounding box plus one voxel. Slices are cut across the
// voxel axis closest to world z and shown as seen from above: world x (the subject's
// right in RAS space) increases to the right, world y (anterior) upwards. Each tile is
// labelled with its world z in mm. An empty `extent` gives an empty picture.
MosaicPicture DrawMosaic(const ImageGeometry& geometry, const std::vector<unsigned char>& extent,
                         const SliceLayers& layers, int max_slices = 12);

// The values at the given fractions (0..1) of the sorted finite values of `grid` inside
// `extent` (nearest rank); {0, 1} when there are none.
std::pair<double, double> ValueRange(const std::vector<float>& grid,
                                     const std::vector<unsigned char>& extent, double low_fraction,
                                     double high_fraction);

}  // namespace boldsum
