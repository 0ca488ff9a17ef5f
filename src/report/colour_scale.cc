#include "report/colour_scale.h"

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace boldsum {
namespace {

struct Lab {
  double l, a, b;
};

struct Anchor {
  double at;
  Lab lab;
};

constexpr Anchor kAnchors[] = {{-1.0, {29, 20, -50}},
                               {-0.5, {62, -4, -34}},
                               {0.0, {97, 0, 0}},
                               {0.5, {74, 20, 56}},
                               {1.0, {41, 44, 41}}};

// CIE 1976 L*a*b* (D65 white X 0.95047, Y 1, Z 1.08883) to 8-bit sRGB: the inverse of
// f(t) = t^(1/3) above (6/29)^3, then the XYZ -> linear sRGB matrix and transfer curve
// of IEC 61966-2-1; out-of-gamut channels are clamped (none are for the anchors above).
Rgb LabToSrgb(const Lab& lab) {
  const double fy = (lab.l + 16.0) / 116.0;
  const double fx = fy + lab.a / 500.0;
  const double fz = fy - lab.b / 200.0;
  const auto finv = [](double t) {
    constexpr double delta = 6.0 / 29.0;
    return t > delta ? t * t * t : 3.0 * delta * delta * (t - 4.0 / 29.0);
  };
  const double x = 0.95047 * finv(fx), y = finv(fy), z = 1.08883 * finv(fz);
  const double linear[3] = {3.2406 * x - 1.5372 * y - 0.4986 * z,
                            -0.9689 * x + 1.8758 * y + 0.0415 * z,
                            0.0557 * x - 0.2040 * y + 1.0570 * z};
  uint8_t out[3];
  for (int c = 0; c < 3; ++c) {
    const double v = std::clamp(linear[c], 0.0, 1.0);
    const double encoded = v <= 0.0031308 ? 12.92 * v : 1.055 * std::pow(v, 1.0 / 2.4) - 0.055;
    out[c] = static_cast<uint8_t>(std::lround(255.0 * std::clamp(encoded, 0.0, 1.0)));
  }
  return {out[0], out[1], out[2]};
}

struct DivergingTable {
  std::array<Rgb, kDivergingSize> colours;
  DivergingTable() {
    for (int i = 0; i < kDivergingSize; ++i) {
      const double at = static_cast<double>(i - kDivergingHalfSteps) / kDivergingHalfSteps;
      int k = 0;
      while (k < 3 && at > kAnchors[k + 1].at) ++k;
      const Anchor& lo = kAnchors[k];
      const Anchor& hi = kAnchors[k + 1];
      const double f = (at - lo.at) / (hi.at - lo.at);
      colours[static_cast<size_t>(i)] =
          LabToSrgb({lo.lab.l + f * (hi.lab.l - lo.lab.l), lo.lab.a + f * (hi.lab.a - lo.lab.a),
                     lo.lab.b + f * (hi.lab.b - lo.lab.b)});
    }
  }
};

const DivergingTable& Table() {
  static const DivergingTable table;
  return table;
}

}  // namespace

Rgb DivergingEntry(int index) {
  return Table().colours[static_cast<size_t>(std::clamp(index, 0, kDivergingSize - 1))];
}

Rgb DivergingColour(double value, double limit) {
  if (!std::isfinite(value) || !(limit > 0)) return DivergingEntry(kDivergingHalfSteps);
  const double scaled = std::clamp(value / limit, -1.0, 1.0);
  return DivergingEntry(static_cast<int>(std::lround((scaled + 1.0) * kDivergingHalfSteps)));
}

Rgb Grey(double value, double low, double high) {
  double f = high > low ? (value - low) / (high - low) : 0.0;
  if (!std::isfinite(f)) f = 0.0;
  const auto level = static_cast<uint8_t>(std::lround(255.0 * std::clamp(f, 0.0, 1.0)));
  return {level, level, level};
}

std::string HexColour(Rgb colour) {
  char text[8];
  std::snprintf(text, sizeof text, "#%02x%02x%02x", colour.r, colour.g, colour.b);
  return text;
}

}  // namespace boldsum
