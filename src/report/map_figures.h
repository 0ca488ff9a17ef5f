// Figures of maps on an image grid shared by the subject and study pages: a slice mosaic
// with its colour bar, and the table of peaks.
#pragma once

#include <string>
#include <vector>

#include "boldsum/io.h"

namespace boldsum {

// The grid, the voxels shown and the grey background of a set of maps.
struct ImageFrame {
  ImageGeometry geometry;
  std::vector<unsigned char> extent;  // grid: the voxels that decide the slices shown
  std::vector<float> background;      // grid
  double low = 0, high = 1;           // background black .. white

  // Sets low and high from the background's 2nd and 99th percentiles inside extent.
  void ScaleBackground();
};

// The overlay (grid values) as a slice mosaic over the frame with a colour bar from
// -limit (0 when positive_only) to limit; |value| < threshold is not drawn.
std::string MapFigure(const ImageFrame& frame, const std::vector<float>& overlay, double limit,
                      double threshold, bool positive_only, const std::string& title,
                      const std::string& scale_label, const std::string& caption_html);

// The colour limit of a z map: the largest |z| rounded up, at least 4.
double ZLimit(const std::vector<float>& z);

// The strongest local maxima (and minima when `minima`) of a z map with their world
// and voxel coordinates, and the value of `estimate` there when it is given.
std::string PeakTable(const ImageGeometry& geometry, const std::vector<float>& z, bool minima,
                      const std::vector<float>* estimate);

// "%.{digits}f", or "n/a" for NaN and infinities.
std::string FixedText(double value, int digits);

}  // namespace boldsum
