// RapidCheck generators of real numbers for the stats and combine tests. RapidCheck's
// gen::inRange on doubles only yields whole numbers, so reals are built from a uniform
// integer; gen::resize(100) removes RapidCheck's size ramp so every case spans the range.
#pragma once

#include <rapidcheck.h>

#include <cmath>
#include <cstdint>

namespace boldsum::testing {

constexpr std::int64_t kRealSteps = std::int64_t{1} << 40;

// Uniform on [lo, hi] in steps of (hi - lo) / 2^40.
inline rc::Gen<double> Uniform(double lo, double hi) {
  return rc::gen::resize(100, rc::gen::map(rc::gen::inRange<std::int64_t>(0, kRealSteps + 1),
                                           [lo, hi](std::int64_t k) {
                                             const double u = static_cast<double>(k) / kRealSteps;
                                             return u == 1.0 ? hi : lo + (hi - lo) * u;
                                           }));
}

// Log-uniform on [lo, hi], lo > 0.
inline rc::Gen<double> LogUniform(double lo, double hi) {
  return rc::gen::map(Uniform(std::log(lo), std::log(hi)), [lo, hi](double v) {
    return std::fmin(hi, std::fmax(lo, std::exp(v)));
  });
}

}  // namespace boldsum::testing
