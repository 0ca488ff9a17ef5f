// Small SVG figures for the report pages: histogram, regressor time courses with their
// events, matrix heat map, bar chart, colour bar, and the frame around a slice mosaic.
// Each returns a self-contained <svg> element (no ids, no external references), so any
// number of them can be inlined in one page. Drawing only; no statistics.
#pragma once

#include <Eigen/Dense>
#include <string>
#include <vector>

#include "boldsum/config.h"
#include "boldsum/design.h"
#include "report/png_image.h"

namespace boldsum {

// Shortest "%.*g"-style text of a number for labels ("0.25", "-3", "1.2e+03").
std::string LabelNumber(double value, int significant = 3);

// Counts of the finite `values` in `bins` equal bins over [low, high] (values outside
// are counted in the end bins), drawn as bars; `mean_line` marks the mean.
std::string HistogramSvg(const std::vector<double>& values, double low, double high, int bins,
                         const std::string& title, const std::string& x_label);

// One panel per condition: its main regressor (the condition's column; with the FIR
// basis the sum of its bins) against time (volume k at (k + slice_reference) * tr), with each event
// drawn as a shaded band from onset to onset + duration (a tick for zero duration).
std::string RegressorsSvg(const DesignMatrix& design, const ModelSpec& model,
                          const EventsByCondition& events, const std::string& title);

// A square matrix as coloured cells on the diverging scale from -limit to +limit, with
// row and column labels; values are printed in the cells when there are at most 14.
// NaN cells are grey.
std::string MatrixSvg(const Eigen::MatrixXd& values, const std::vector<std::string>& labels,
                      double limit, const std::string& title);

// Horizontal bars from zero, coloured on the diverging scale (-limit..limit), one per
// label; `reference` draws dashed vertical lines at +-reference when > 0.
std::string BarChartSvg(const std::vector<std::string>& labels, const std::vector<double>& values,
                        double limit, double reference, const std::string& title,
                        const std::string& x_label);

// A horizontal colour bar of the diverging scale from -limit to +limit (or 0..limit when
// `positive_only`), ticks labelled; the band |v| < threshold is greyed out and labelled
// "not shown" when threshold > 0.
std::string ColourBarSvg(double limit, double threshold, bool positive_only,
                         const std::string& label);

// A mosaic picture with the label of each tile written in its top-left corner. The image
// has one pixel per voxel (sizes and gap in image pixels); the page shows it magnified
// `scale` times with pixelated rendering, so each voxel stays a sharp square and the
// embedded PNG stays small.
struct MosaicPicture {
  RgbImage image;
  int tile_width = 0, tile_height = 0, columns = 1, gap = 0;
  int scale = 1;
  std::vector<std::string> tile_labels;
};
std::string MosaicSvg(const MosaicPicture& mosaic, const std::string& title);

}  // namespace boldsum
