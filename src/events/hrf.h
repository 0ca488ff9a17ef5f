// Haemodynamic response kernels sampled on the fine time grid of the convolution.
//
// Every kernel is a weighted sum of two gamma-shaped lobes, t^p * exp(-t / theta), on the
// support 0..32 s (common practice), scaled so that its samples sum to 1/dt: on the grid
// the kernel has unit area, so a sustained block plateaus at exactly 1.
//
//   kDoubleGamma: g(t; 6, 1) - g(t; 16, 1) / 6, g(t; k, theta) the gamma density of shape k
//     and scale theta seconds (common practice).
//   kGlover: (t/d1)^a1 exp(-(t-d1)/b1) - c (t/d2)^a2 exp(-(t-d2)/b2), d_i = a_i b_i, with
//     a1 = 6, a2 = 12, b1 = b2 = 0.9 s, c = 0.35 (Glover 1999, NeuroImage 9:416-429;
//     parameter values recalled from memory).
//
// Derivative kernels (both use the main kernel's normalising constant K, so that they are
// in the same units as the main kernel):
//   time:       K * d/dt [raw kernel](t), analytic (per second). A response delayed by a
//               small delta is approximately main - delta * time.
//   dispersion: K * ([raw kernel with b1 + 0.01 s](t) - [raw kernel](t)) / 0.01 s, a forward
//               difference in the scale of the first lobe only (b1 = 1 s for the double
//               gamma, 0.9 s for Glover, whose d1 = a1 b1 follows b1).
#pragma once

#include <vector>

#include "boldsum/config.h"

namespace boldsum {

// Support of every kernel, in seconds (common practice).
inline constexpr double kHrfSupportS = 32.0;
// Step in the first lobe's scale used for the dispersion derivative, in seconds.
inline constexpr double kDispersionStepS = 0.01;

// A kernel sampled at t_i = i * dt, i = 0..L with L = floor(32 / dt) (to 1e-9 relative).
// `main` sums to exactly 1 (up to rounding): it is the discrete kernel h(t_i) * dt.
// `time` and `dispersion` hold the derivative kernels times dt, and are empty unless asked.
struct SampledHrf {
  double dt = 0.0;
  std::vector<double> main;
  std::vector<double> time;
  std::vector<double> dispersion;
};

// REQUIRES: shape is kDoubleGamma or kGlover (throws Error for kFir); dt > 0.
SampledHrf SampleHrf(HrfShape shape, HrfDerivatives derivatives, double dt);

// The unnormalised kernel and its analytic time derivative at t seconds (0 for t < 0 or
// t > 32 s); `first_scale_shift` is added to b1. Exposed for the probes and tests.
double RawHrf(HrfShape shape, double t, double first_scale_shift = 0.0);
double RawHrfTimeDerivative(HrfShape shape, double t);

}  // namespace boldsum
