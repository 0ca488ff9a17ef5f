// The colours of the report's pictures: a diverging scale for signed values and a grey
// ramp for backgrounds. Drawing only; no statistics.
#pragma once

#include <array>
#include <cstdint>
#include <string>

namespace boldsum {

struct Rgb {
  uint8_t r = 0, g = 0, b = 0;
};

// The diverging scale, 2 * kDivergingHalfSteps + 1 colours from the negative end
// (index 0, deep blue) through near-white (the middle) to the positive end (deep
// orange-red). Built by linear interpolation in CIELAB between five anchors chosen
// inside the sRGB gamut (our own design):
//   -1: L* 29, a* 20, b* -50     -0.5: L* 62, a* -4, b* -34     0: L* 97, a* 0, b* 0
//   +0.5: L* 74, a* 20, b* 56    +1: L* 41, a* 44, b* 41
// then converted to 8-bit sRGB (CIE 1976 L*a*b* with the D65 white; the sRGB matrix and
// transfer curve of IEC 61966-2-1). L* falls monotonically from the middle towards
// either end, and the two hues (blue, orange) stay apart for red-green colour-blind
// viewers; tests/reference/test_colour_scale.py checks both.
inline constexpr int kDivergingHalfSteps = 128;
inline constexpr int kDivergingSize = 2 * kDivergingHalfSteps + 1;

// Colour `index` of the table, 0 <= index < kDivergingSize.
Rgb DivergingEntry(int index);

// The colour of `value` on a scale from -limit to +limit (clamped; NaN gives the middle).
Rgb DivergingColour(double value, double limit);

// Grey level of a value between low (black) and high (white), clamped.
Rgb Grey(double value, double low, double high);

// "#rrggbb".
std::string HexColour(Rgb colour);

}  // namespace boldsum
