#include "report/svg_plots.h"

#include <algorithm>
#include <cmath>
#include <cstdio>

#include "report/colour_scale.h"

namespace boldsum {
namespace {

constexpr double kCharWidth = 6.2;  // average width of an 11 px sans-serif character

std::string N(double value) {
  char text[32];
  std::snprintf(text, sizeof text, "%.2f", value);
  return text;
}

std::string Open(double width, double height, const std::string& title) {
  return "<svg xmlns=\"http://www.w3.org/2000/svg\" class=\"figure\" width=\"" + N(width) +
         "\" height=\"" + N(height) + "\" viewBox=\"0 0 " + N(width) + " " + N(height) +
         "\" font-family=\"sans-serif\" font-size=\"11\" role=\"img\">\n<title>" +
         EscapeXml(title) + "</title>\n<rect width=\"100%\" height=\"100%\" fill=\"white\"/>\n" +
         "<text x=\"6\" y=\"15\" font-size=\"12\" font-weight=\"bold\">" + EscapeXml(title) +
         "</text>\n";
}

std::string Text(double x, double y, const std::string& text, const std::string& anchor = "start",
                 const std::string& extra = "") {
  return "<text x=\"" + N(x) + "\" y=\"" + N(y) + "\" text-anchor=\"" + anchor + "\"" + extra +
         ">" + EscapeXml(text) + "</text>\n";
}

std::string Line(double x1, double y1, double x2, double y2, const std::string& stroke,
                 const std::string& extra = "") {
  return "<line x1=\"" + N(x1) + "\" y1=\"" + N(y1) + "\" x2=\"" + N(x2) + "\" y2=\"" + N(y2) +
         "\" stroke=\"" + stroke + "\"" + extra + "/>\n";
}

std::string Rect(double x, double y, double w, double h, const std::string& fill,
                 const std::string& extra = "") {
  return "<rect x=\"" + N(x) + "\" y=\"" + N(y) + "\" width=\"" + N(std::max(w, 0.0)) +
         "\" height=\"" + N(std::max(h, 0.0)) + "\" fill=\"" + fill + "\"" + extra + "/>\n";
}

// About five round tick values covering [low, high].
std::vector<double> Ticks(double low, double high) {
  std::vector<double> ticks;
  if (!(high > low)) return {low};
  const double raw = (high - low) / 5.0;
  const double power = std::pow(10.0, std::floor(std::log10(raw)));
  double step = power;
  for (double factor : {1.0, 2.0, 5.0, 10.0}) {
    if (factor * power >= raw) {
      step = factor * power;
      break;
    }
  }
  for (double t = std::ceil(low / step - 1e-9) * step; t <= high + 1e-9 * step; t += step) {
    ticks.push_back(std::abs(t) < 1e-12 * step ? 0.0 : t);
  }
  return ticks;
}

std::vector<int> ConditionColumns(const DesignMatrix& design, const std::string& condition) {
  std::vector<int> columns;
  for (int c = 0; c < design.n_columns(); ++c) {
    const DesignColumn& column = design.columns[static_cast<size_t>(c)];
    if (column.condition == condition &&
        (column.kind == ColumnKind::kCondition || column.kind == ColumnKind::kFirBin)) {
      columns.push_back(c);
    }
  }
  return columns;
}

}  // namespace

std::string LabelNumber(double value, int significant) {
  if (!std::isfinite(value)) return std::isnan(value) ? "n/a" : (value > 0 ? "inf" : "-inf");
  char text[32];
  std::snprintf(text, sizeof text, "%.*g", significant, value);
  return std::string(text) == "-0" ? "0" : text;
}

std::string HistogramSvg(const std::vector<double>& values, double low, double high, int bins,
                         const std::string& title, const std::string& x_label) {
  const double width = 420, height = 230, left = 52, right = 14, top = 28, bottom = 44;
  const double plot_w = width - left - right, plot_h = height - top - bottom;
  std::vector<int> counts(static_cast<size_t>(bins), 0);
  double sum = 0;
  int n = 0;
  for (double v : values) {
    if (!std::isfinite(v)) continue;
    const int b =
        std::clamp(static_cast<int>(std::floor((v - low) / (high - low) * bins)), 0, bins - 1);
    ++counts[static_cast<size_t>(b)];
    sum += v;
    ++n;
  }
  const int most = std::max(1, *std::max_element(counts.begin(), counts.end()));
  std::string svg = Open(width, height, title);
  const double bar_w = plot_w / bins;
  for (int b = 0; b < bins; ++b) {
    const double h = plot_h * counts[static_cast<size_t>(b)] / most;
    const double centre = low + (b + 0.5) * (high - low) / bins;
    svg += Rect(left + b * bar_w, top + plot_h - h, bar_w, h,
                HexColour(DivergingColour(centre, std::max(std::abs(low), std::abs(high)))),
                " stroke=\"#555\" stroke-width=\"0.4\"");
  }
  svg += Line(left, top + plot_h, left + plot_w, top + plot_h, "black");
  svg += Line(left, top, left, top + plot_h, "black");
  for (double t : Ticks(low, high)) {
    const double x = left + (t - low) / (high - low) * plot_w;
    svg += Line(x, top + plot_h, x, top + plot_h + 4, "black");
    svg += Text(x, top + plot_h + 15, LabelNumber(t), "middle");
  }
  svg += Text(left - 6, top + 4, std::to_string(most), "end");
  svg += Text(left - 6, top + plot_h + 4, "0", "end");
  svg += Text(left + plot_w / 2, height - 8, x_label, "middle");
  svg += Text(14, top + plot_h / 2, "count", "middle",
              " transform=\"rotate(-90 14 " + N(top + plot_h / 2) + ")\"");
  if (n > 0) {
    const double mean = sum / n;
    const double x = left + std::clamp((mean - low) / (high - low), 0.0, 1.0) * plot_w;
    svg += Line(x, top, x, top + plot_h, "black", " stroke-dasharray=\"4 3\"");
    svg += Text(x + 4, top + 10, "mean " + LabelNumber(mean));
  }
  return svg + "</svg>\n";
}

std::string RegressorsSvg(const DesignMatrix& design, const ModelSpec& model,
                          const EventsByCondition& events, const std::string& title) {
  const double width = 760, left = 120, right = 16, top = 26, panel = 64, gap = 10, bottom = 40;
  const double plot_w = width - left - right;
  const int n = design.n_volumes();
  const double duration = n * model.tr_s;
  const double height = top + model.conditions.size() * (panel + gap) + bottom;
  std::string svg = Open(width, height, title);
  const auto x_of = [&](double t) { return left + std::clamp(t / duration, 0.0, 1.0) * plot_w; };
  double y0 = top;
  for (const std::string& condition : model.conditions) {
    const std::vector<int> columns = ConditionColumns(design, condition);
    Eigen::VectorXd main = Eigen::VectorXd::Zero(n);
    for (int c : columns) main += design.x.col(c);
    const double lo = std::min(0.0, n ? main.minCoeff() : 0.0);
    const double hi = std::max(lo + 1e-12, n ? main.maxCoeff() : 1.0);
    svg += Rect(left, y0, plot_w, panel, "#fafafa", " stroke=\"#999\" stroke-width=\"0.5\"");
    const auto found = events.find(condition);
    if (found != events.end()) {
      for (const Event& event : found->second) {
        const double x = x_of(event.onset_s);
        if (event.duration_s > 0) {
          svg += Rect(x, y0, x_of(event.onset_s + event.duration_s) - x, panel,
                      HexColour(DivergingEntry(kDivergingHalfSteps + 40)));
        } else {
          svg += Line(x, y0, x, y0 + panel, HexColour(DivergingEntry(kDivergingHalfSteps + 96)),
                      " stroke-width=\"1.2\"");
        }
      }
    }
    std::string points;
    for (int k = 0; k < n; ++k) {
      const double t = (k + model.slice_reference) * model.tr_s;
      const double y = y0 + panel - 4 - (main[k] - lo) / (hi - lo) * (panel - 8);
      points += N(x_of(t)) + "," + N(y) + " ";
    }
    svg += "<polyline fill=\"none\" stroke=\"" + HexColour(DivergingEntry(0)) +
           "\" stroke-width=\"1.4\" points=\"" + points + "\"/>\n";
    svg += Text(left - 8, y0 + panel / 2 + 4, condition, "end");
    if (columns.empty()) svg += Text(left + 6, y0 + 14, "(no column in this design)");
    y0 += panel + gap;
  }
  for (double t : Ticks(0, duration)) {
    svg += Line(x_of(t), y0 - gap, x_of(t), y0 - gap + 4, "black");
    svg += Text(x_of(t), y0 - gap + 15, LabelNumber(t, 4), "middle");
  }
  svg += Text(left + plot_w / 2, height - 8,
              "time (s); shaded: events (onset to onset + duration), line: regressor", "middle");
  return svg + "</svg>\n";
}

std::string MatrixSvg(const Eigen::MatrixXd& values, const std::vector<std::string>& labels,
                      double limit, const std::string& title) {
  const int p = static_cast<int>(values.rows());
  size_t longest = 4;
  for (const std::string& label : labels) longest = std::max(longest, label.size());
  const double cell = std::clamp(420.0 / std::max(p, 1), 10.0, 40.0);
  const double label_w = kCharWidth * longest + 8;
  const double left = label_w + 8, top = 28 + 0.87 * label_w;
  const double width = left + p * cell + 0.5 * label_w + 16, height = top + p * cell + 16;
  std::string svg = Open(width, height, title);
  const bool print_values = p <= 14;
  for (int i = 0; i < p; ++i) {
    for (int j = 0; j < p; ++j) {
      const double v = values(i, j);
      const Rgb colour = std::isfinite(v) ? DivergingColour(v, limit) : Rgb{190, 190, 190};
      svg += Rect(left + j * cell, top + i * cell, cell, cell, HexColour(colour),
                  " stroke=\"white\" stroke-width=\"0.5\"");
      if (print_values && std::isfinite(v)) {
        const bool dark = std::abs(v) > 0.6 * limit;
        char text[16];
        std::snprintf(text, sizeof text, "%.2f", v);
        svg += Text(left + (j + 0.5) * cell, top + (i + 0.5) * cell + 3,
                    std::string(text) == "-0.00" ? "0.00" : text, "middle",
                    std::string(" font-size=\"") + N(std::min(10.0, cell / 3.6)) + "\" fill=\"" +
                        (dark ? "white" : "black") + "\"");
      }
    }
    const std::string& label = i < static_cast<int>(labels.size()) ? labels[i] : "";
    svg += Text(left - 6, top + (i + 0.5) * cell + 4, label, "end");
    const double x = left + (i + 0.5) * cell + 3, y = top - 4;
    svg += Text(x, y, label, "start", " transform=\"rotate(-60 " + N(x) + " " + N(y) + ")\"");
  }
  return svg + "</svg>\n";
}

std::string BarChartSvg(const std::vector<std::string>& labels, const std::vector<double>& values,
                        double limit, double reference, const std::string& title,
                        const std::string& x_label) {
  size_t longest = 4;
  for (const std::string& label : labels) longest = std::max(longest, label.size());
  const double left = kCharWidth * longest + 16, plot_w = 360, row = 22, top = 28;
  const double width = left + plot_w + 60, height = top + row * labels.size() + 40;
  // Signed values get a range symmetric about zero; values that are all >= 0 start at 0.
  double low = 0, high = 0;
  for (double v : values) {
    if (!std::isfinite(v)) continue;
    low = std::min(low, v);
    high = std::max(high, v);
  }
  high = std::max(high, reference);
  if (low < 0) {
    low = -std::max(-low, high);
    high = -low;
  }
  if (!(high > low)) high = low + 1;
  // Room for the value printed beyond the end of the longest bars.
  const double pad = 0.12 * (high - low);
  if (low < 0) low -= pad;
  high += pad;
  std::string svg = Open(width, height, title);
  const auto x_of = [&](double v) { return left + (v - low) / (high - low) * plot_w; };
  for (size_t i = 0; i < labels.size(); ++i) {
    const double y = top + i * row;
    const double v = i < values.size() ? values[i] : std::nan("");
    svg += Text(left - 8, y + row / 2 + 4, labels[i], "end");
    if (std::isfinite(v)) {
      const double x0 = x_of(0), x1 = x_of(v);
      svg += Rect(std::min(x0, x1), y + 3, std::abs(x1 - x0), row - 6,
                  HexColour(DivergingColour(v, limit)), " stroke=\"#555\" stroke-width=\"0.4\"");
      svg +=
          Text(v >= 0 ? x1 + 4 : x1 - 4, y + row / 2 + 4, LabelNumber(v), v >= 0 ? "start" : "end");
    } else {
      svg += Text(x_of(0) + 4, y + row / 2 + 4, "n/a");
    }
  }
  const double bottom = top + row * labels.size();
  svg += Line(x_of(0), top, x_of(0), bottom, "black");
  if (reference > 0) {
    for (double r : {-reference, reference}) {
      if (r < low || r > high) continue;
      svg += Line(x_of(r), top, x_of(r), bottom, "#444", " stroke-dasharray=\"4 3\"");
    }
  }
  for (double t : Ticks(low, high)) {
    svg += Line(x_of(t), bottom, x_of(t), bottom + 4, "black");
    svg += Text(x_of(t), bottom + 15, LabelNumber(t), "middle");
  }
  svg += Text(left + plot_w / 2, height - 6, x_label, "middle");
  return svg + "</svg>\n";
}

std::string ColourBarSvg(double limit, double threshold, bool positive_only,
                         const std::string& label) {
  const double width = 420, left = 20, plot_w = 380, top = 22, bar_h = 14;
  const double low = positive_only ? 0.0 : -limit;
  std::string svg = Open(width, 70, label);
  const int steps = 96;
  const auto x_of = [&](double v) { return left + (v - low) / (limit - low) * plot_w; };
  for (int s = 0; s < steps; ++s) {
    const double v = low + (s + 0.5) * (limit - low) / steps;
    svg += Rect(left + s * plot_w / steps, top, plot_w / steps + 0.3, bar_h,
                HexColour(DivergingColour(v, limit)));
  }
  if (threshold > 0) {
    const double from = positive_only ? 0.0 : -threshold;
    svg += Rect(x_of(from), top, x_of(threshold) - x_of(from), bar_h, "#bdbdbd",
                " stroke=\"#777\" stroke-width=\"0.5\"");
    svg += Text((x_of(from) + x_of(threshold)) / 2, top + bar_h - 3, "not shown", "middle",
                " font-size=\"9\"");
  }
  svg += Rect(left, top, plot_w, bar_h, "none", " stroke=\"black\" stroke-width=\"0.6\"");
  std::vector<double> ticks = {low, limit};
  if (!positive_only) ticks.push_back(0.0);
  if (threshold > 0) {
    ticks.push_back(threshold);
    if (!positive_only) ticks.push_back(-threshold);
  }
  std::sort(ticks.begin(), ticks.end());
  for (double t : ticks) {
    svg += Line(x_of(t), top + bar_h, x_of(t), top + bar_h + 4, "black");
    svg += Text(x_of(t), top + bar_h + 15, LabelNumber(t), "middle");
  }
  return svg + "</svg>\n";
}

std::string MosaicSvg(const MosaicPicture& mosaic, const std::string& title) {
  const double top = 22;
  const int s = mosaic.scale;
  const int shown_width = mosaic.image.width * s, shown_height = mosaic.image.height * s;
  const double width = std::max(shown_width, 200), height = top + shown_height;
  std::string svg = Open(width, height, title);
  svg += "<image x=\"0\" y=\"" + N(top) + "\" width=\"" + std::to_string(shown_width) +
         "\" height=\"" + std::to_string(shown_height) +
         "\" preserveAspectRatio=\"none\" style=\"image-rendering:pixelated\" href=\"" +
         PngDataUri(mosaic.image) + "\"/>\n";
  for (size_t t = 0; t < mosaic.tile_labels.size(); ++t) {
    const int column = static_cast<int>(t) % mosaic.columns;
    const int row = static_cast<int>(t) / mosaic.columns;
    const double x = column * (mosaic.tile_width + mosaic.gap) * s + 3;
    const double y = top + row * (mosaic.tile_height + mosaic.gap) * s + 12;
    svg += Text(x, y, mosaic.tile_labels[t], "start",
                " fill=\"white\" stroke=\"black\" stroke-width=\"2\" paint-order=\"stroke\"");
  }
  return svg + "</svg>\n";
}

}  // namespace boldsum
