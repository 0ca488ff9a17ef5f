// Task regressors of one condition in one run: events -> fine-grid boxcars -> HRF
// convolution -> samples at the volume times; or the FIR basis.
//
// Timing: volume k (k = 0..N-1) is modelled at t_k = (k + slice_reference) * TR.
#pragma once

#include <Eigen/Dense>
#include <vector>

#include "boldsum/config.h"

namespace boldsum {

// The fine grid g_j = slice_reference * TR + j * dt, dt = TR / per_volume, so that
// t_k = g_{k * per_volume} exactly (by index). per_volume = max(16, ceil(TR / 0.05 s)): the
// spacing is at most TR / 16 and at most 0.05 s (finer than the contract's 0.1 s bound: the
// grid error of a regressor, O(dt^2), then stays below ~6e-5 of the plateau; see
// tests/reference/test_hrf.py).
struct FineGrid {
  double tr_s = 0.0;
  double slice_reference = 0.0;
  int per_volume = 0;
  double dt = 0.0;

  // Grid coordinate x = (t - slice_reference * TR) / dt of time t (g_j has x = j).
  double Coordinate(double t) const { return (t - slice_reference * tr_s) / dt; }
};
inline constexpr double kMaxGridStepS = 0.05;
inline constexpr int kMinGridPerVolume = 16;
// REQUIRES: tr_s > 0. Throws Error otherwise.
FineGrid ChooseFineGrid(double tr_s, double slice_reference);

// The events of one condition as weights w_j on grid points j = first..last (returned in
// that order), in units such that a sustained block of amplitude A has w_j = A.
// Each grid cell [g_j, g_{j+1}] receives the exact part of the boxcar that covers it, and
// that part is split between the two end points by the position of its centroid (linear
// "hat" assignment), so the total area is exact and the timing within a cell is kept to
// second order. A zero-duration event is an impulse of area `amplitude`: weight
// amplitude / dt split between the two neighbouring grid points by linear interpolation
// (all of it on g_j when the onset is exactly g_j). Mass outside [first, last] is dropped.
// Throws Error for a non-finite onset, duration or amplitude, or a negative duration.
std::vector<double> EventWeightsOnGrid(const std::vector<Event>& events, const FineGrid& grid,
                                       int first, int last);

// Convolved regressors, n_volumes x (1 + derivatives): main, then time derivative, then
// dispersion derivative (see events/hrf.h for their definitions). Exactly zero at every
// volume that no event can reach (none in the 32 s before it, e.g. before the first onset,
// or when `events` is empty). REQUIRES: hrf.shape != kFir (throws Error), n_volumes >= 1.
Eigen::MatrixXd ConvolvedRegressors(const std::vector<Event>& events, const HrfSpec& hrf,
                                    double tr_s, double slice_reference, int n_volumes);

// FIR bin width (fir_bin_s, or TR when 0) and bin count (fir_bins, or when 0 enough bins
// to cover 24 s: ceil(24 / width)).
double FirBinWidth(const HrfSpec& hrf, double tr_s);
int FirBinCount(const HrfSpec& hrf, double tr_s);
inline constexpr double kFirDefaultSpanS = 24.0;

// FIR regressors, n_volumes x FirBinCount: column b (0-based) of volume k is the sum of the
// amplitudes of the events with t_k - onset in [b w, (b+1) w), i.e. b = floor((t_k - onset) / w
// + 1e-9): the allowance of 1e-9 bin widths keeps onsets written on the volume grid in the
// intended bin despite rounding. Durations are ignored.
Eigen::MatrixXd FirRegressors(const std::vector<Event>& events, const HrfSpec& hrf, double tr_s,
                              double slice_reference, int n_volumes);

}  // namespace boldsum
