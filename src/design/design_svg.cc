// DesignToSvg and EscapeXml (declared in boldsum/design.h): the design as a grey-scale
// picture.
//
// Each column is scaled to its own range (minimum black, maximum white; a constant column
// is white when non-zero, black when zero). Runs longer than kMaxDisplayRows volumes are
// shown as that many bands, each the mean of its volumes, so the file stays small; vertical
// runs of one grey level are drawn as one rectangle.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>

#include "boldsum/design.h"

namespace boldsum {
namespace {

constexpr int kMaxDisplayRows = 400;
constexpr double kPlotHeight = 480.0;
constexpr double kLeftMargin = 64.0;
constexpr double kRightMargin = 24.0;
constexpr double kBottomMargin = 16.0;
constexpr double kFontSize = 11.0;
// Bands overlap the next one by this much, so that no background seam shows where a band
// edge falls between pixels.
constexpr double kSeamOverlap = 0.5;

std::string Number(double value) {
  char text[32];
  std::snprintf(text, sizeof text, "%.2f", value);
  return text;
}

// Grey level 0..255 of every display row of column c.
std::vector<int> GreyLevels(const DesignMatrix& design, int c, int display_rows) {
  const int n = design.n_volumes();
  const Eigen::VectorXd column = design.x.col(c);
  const double low = column.minCoeff();
  const double high = column.maxCoeff();
  std::vector<int> levels(static_cast<size_t>(display_rows));
  for (int i = 0; i < display_rows; ++i) {
    const int from = static_cast<int>(static_cast<long long>(i) * n / display_rows);
    const int to =
        std::max(from + 1, static_cast<int>(static_cast<long long>(i + 1) * n / display_rows));
    const double mean = column.segment(from, to - from).mean();
    double fraction = 0.0;
    if (high > low) {
      fraction = (mean - low) / (high - low);
    } else {
      fraction = high != 0.0 ? 1.0 : 0.0;
    }
    levels[static_cast<size_t>(i)] =
        static_cast<int>(std::lround(255.0 * std::clamp(fraction, 0.0, 1.0)));
  }
  return levels;
}

// A step of 1, 2 or 5 times a power of ten giving at most about eight ticks over n.
int TickStep(int n) {
  for (int scale = 1;; scale *= 10) {
    for (int factor : {1, 2, 5}) {
      if (n / (factor * scale) <= 8) return factor * scale;
    }
  }
}

}  // namespace

std::string EscapeXml(const std::string& text) {
  std::string escaped;
  for (char ch : text) {
    switch (ch) {
      case '&':
        escaped += "&amp;";
        break;
      case '<':
        escaped += "&lt;";
        break;
      case '>':
        escaped += "&gt;";
        break;
      case '"':
        escaped += "&quot;";
        break;
      case '\'':
        escaped += "&apos;";
        break;
      default:
        escaped += ch;
    }
  }
  return escaped;
}

std::string DesignToSvg(const DesignMatrix& design, const std::string& title) {
  const int n = design.n_volumes();
  const int p = design.n_columns();
  const int display_rows = std::max(1, std::min(n, kMaxDisplayRows));
  const double cell_width = std::clamp(640.0 / std::max(p, 1), 6.0, 36.0);
  const double row_height = kPlotHeight / display_rows;
  size_t longest = 0;
  for (const DesignColumn& column : design.columns) longest = std::max(longest, column.name.size());
  // Labels are rotated by -60 degrees: their height is about 0.87 of their length.
  const double label_height = std::min(220.0, 0.87 * 0.62 * kFontSize * longest + 8.0);
  const double top = 28.0 + label_height;
  const double width = kLeftMargin + p * cell_width + kRightMargin + 0.5 * label_height;
  const double height = top + kPlotHeight + kBottomMargin;

  std::string svg = "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + Number(width) +
                    "\" height=\"" + Number(height) + "\" viewBox=\"0 0 " + Number(width) + " " +
                    Number(height) + "\" font-family=\"sans-serif\" font-size=\"" +
                    Number(kFontSize) + "\">\n";
  svg += "<title>" + EscapeXml(title) + "</title>\n";
  svg += "<rect width=\"100%\" height=\"100%\" fill=\"white\"/>\n";
  svg += "<text x=\"8\" y=\"16\" font-size=\"13\" font-weight=\"bold\">" + EscapeXml(title) +
         "</text>\n";

  svg += "<g shape-rendering=\"crispEdges\">\n";
  for (int c = 0; c < p; ++c) {
    const std::vector<int> levels = GreyLevels(design, c, display_rows);
    const double x = kLeftMargin + c * cell_width;
    for (int start = 0; start < display_rows;) {
      int end = start + 1;
      while (end < display_rows && levels[end] == levels[start]) ++end;
      const int grey = levels[static_cast<size_t>(start)];
      char colour[8];
      std::snprintf(colour, sizeof colour, "#%02x%02x%02x", grey, grey, grey);
      svg += "<rect x=\"" + Number(x) + "\" y=\"" + Number(top + start * row_height) +
             "\" width=\"" + Number(cell_width) + "\" height=\"" +
             Number((end - start) * row_height + (end < display_rows ? kSeamOverlap : 0.0)) +
             "\" fill=\"" + colour + "\"/>\n";
      start = end;
    }
  }
  for (int c = 1; c < p; ++c) {  // thin separators, so equal neighbours stay apart
    const double x = kLeftMargin + c * cell_width;
    svg += "<line x1=\"" + Number(x) + "\" y1=\"" + Number(top) + "\" x2=\"" + Number(x) +
           "\" y2=\"" + Number(top + kPlotHeight) +
           "\" stroke=\"#808080\" stroke-width=\"0.5\"/>\n";
  }
  svg += "</g>\n";
  svg += "<rect x=\"" + Number(kLeftMargin) + "\" y=\"" + Number(top) + "\" width=\"" +
         Number(p * cell_width) + "\" height=\"" + Number(kPlotHeight) +
         "\" fill=\"none\" stroke=\"black\"/>\n";

  for (int c = 0; c < p; ++c) {
    const double x = kLeftMargin + (c + 0.5) * cell_width + 3.0;
    const double y = top - 4.0;
    svg += "<text x=\"" + Number(x) + "\" y=\"" + Number(y) + "\" transform=\"rotate(-60 " +
           Number(x) + " " + Number(y) + ")\">" + EscapeXml(design.columns[c].name) + "</text>\n";
  }

  // Volume axis: tick v marks the top edge of volume v.
  const int step = TickStep(std::max(n, 1));
  for (int v = 0; v < n; v += step) {
    const double y = top + kPlotHeight * v / n;
    svg += "<line x1=\"" + Number(kLeftMargin - 5.0) + "\" y1=\"" + Number(y) + "\" x2=\"" +
           Number(kLeftMargin) + "\" y2=\"" + Number(y) + "\" stroke=\"black\"/>\n";
    svg += "<text x=\"" + Number(kLeftMargin - 8.0) + "\" y=\"" + Number(y + 4.0) +
           "\" text-anchor=\"end\">" + std::to_string(v) + "</text>\n";
  }
  const double middle = top + kPlotHeight / 2.0;
  svg += "<text x=\"16\" y=\"" + Number(middle) +
         "\" text-anchor=\"middle\" transform=\"rotate(-90 16 " + Number(middle) +
         ")\">volume</text>\n";
  svg += "</svg>\n";
  return svg;
}

}  // namespace boldsum
