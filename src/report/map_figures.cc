#include "report/map_figures.h"

#include <algorithm>
#include <cmath>
#include <cstdio>

#include "report/html_page.h"
#include "report/mosaic.h"
#include "report/peaks.h"
#include "report/svg_plots.h"

namespace boldsum {
namespace {

constexpr int kPeaksPerSign = 5;

}  // namespace

void ImageFrame::ScaleBackground() {
  const auto range = ValueRange(background, extent, 0.02, 0.99);
  low = range.first;
  high = range.second;
}

std::string FixedText(double value, int digits) {
  if (!std::isfinite(value)) return "n/a";
  char text[32];
  std::snprintf(text, sizeof text, "%.*f", digits, value);
  return text;
}

std::string MapFigure(const ImageFrame& frame, const std::vector<float>& overlay, double limit,
                      double threshold, bool positive_only, const std::string& title,
                      const std::string& scale_label, const std::string& caption_html) {
  SliceLayers layers;
  layers.background = frame.background.empty() ? nullptr : &frame.background;
  layers.background_low = frame.low;
  layers.background_high = frame.high;
  layers.overlay = &overlay;
  layers.overlay_limit = limit;
  layers.overlay_threshold = threshold;
  const MosaicPicture mosaic = DrawMosaic(frame.geometry, frame.extent, layers);
  if (mosaic.image.width == 0) return Paragraph("No voxels to show.", "note");
  return Figure(
      MosaicSvg(mosaic, title) + ColourBarSvg(limit, threshold, positive_only, scale_label),
      caption_html +
          " Axial slices seen from above: world +x (the subject's right) is on the "
          "right, world +y (anterior) at the top; labels give world z.");
}

double ZLimit(const std::vector<float>& z) {
  double largest = 0;
  for (float v : z) {
    if (std::isfinite(v)) largest = std::max(largest, std::abs(static_cast<double>(v)));
  }
  return std::max(4.0, std::ceil(largest));
}

std::string PeakTable(const ImageGeometry& geometry, const std::vector<float>& z, bool minima,
                      const std::vector<float>* estimate) {
  const std::vector<Peak> peaks = FindPeaks(geometry, z, kPeaksPerSign, minima);
  if (peaks.empty()) return Paragraph("No local extrema (the map is empty).", "note");
  HtmlTable table;
  table.caption = "Peaks: local extrema of z (26 neighbours), strongest first";
  table.header = {"z", "x (mm)", "y (mm)", "z (mm)", "voxel i, j, k"};
  if (estimate) table.header.push_back("estimate");
  table.numeric = {true, true, true, true, false, true};
  for (const Peak& p : peaks) {
    std::vector<std::string> row = {FixedText(p.value, 2), FixedText(p.world[0], 1),
                                    FixedText(p.world[1], 1), FixedText(p.world[2], 1),
                                    std::to_string(p.voxel[0]) + ", " + std::to_string(p.voxel[1]) +
                                        ", " + std::to_string(p.voxel[2])};
    if (estimate) {
      const size_t index = static_cast<size_t>(
          p.voxel[0] +
          int64_t{geometry.dims[0]} * (p.voxel[1] + int64_t{geometry.dims[1]} * p.voxel[2]));
      row.push_back(Html(LabelNumber((*estimate)[index], 4)));
    }
    table.rows.push_back(row);
  }
  return table.ToHtml();
}

}  // namespace boldsum
