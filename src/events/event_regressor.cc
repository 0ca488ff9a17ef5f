#include "events/event_regressor.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>

#include "boldsum/error.h"
#include "events/fft_convolve.h"
#include "events/hrf.h"

namespace boldsum {
namespace {

std::string Format(double value) {
  char text[32];
  std::snprintf(text, sizeof text, "%.10g", value);
  return text;
}

void CheckEvent(const Event& event) {
  if (!std::isfinite(event.onset_s) || !std::isfinite(event.duration_s) ||
      !std::isfinite(event.amplitude)) {
    throw Error("event at onset " + Format(event.onset_s) +
                " s: onset, duration and amplitude must be finite numbers");
  }
  if (event.duration_s < 0.0) {
    throw Error("event at onset " + Format(event.onset_s) + " s: duration " +
                Format(event.duration_s) + " s is negative");
  }
}

}  // namespace

FineGrid ChooseFineGrid(double tr_s, double slice_reference) {
  if (!(tr_s > 0.0) || !std::isfinite(tr_s)) {
    throw Error("TR must be a positive number of seconds, got " + Format(tr_s));
  }
  FineGrid grid;
  grid.tr_s = tr_s;
  grid.slice_reference = slice_reference;
  grid.per_volume = std::max(kMinGridPerVolume,
                             static_cast<int>(std::ceil(tr_s / kMaxGridStepS * (1.0 - 1e-12))));
  grid.dt = tr_s / grid.per_volume;
  return grid;
}

std::vector<double> EventWeightsOnGrid(const std::vector<Event>& events, const FineGrid& grid,
                                       int first, int last) {
  std::vector<double> weights(static_cast<size_t>(std::max(0, last - first + 1)), 0.0);
  auto add = [&](double j, double value) {
    if (j >= first && j <= last) weights[static_cast<size_t>(j - first)] += value;
  };
  for (const Event& event : events) {
    CheckEvent(event);
    const double start = grid.Coordinate(event.onset_s);
    if (event.duration_s == 0.0) {
      if (!(start >= first - 1.0 && start <= last + 1.0)) continue;
      const double j = std::floor(start);
      const double fraction = start - j;
      const double mass = event.amplitude / grid.dt;
      add(j, mass * (1.0 - fraction));
      add(j + 1.0, mass * fraction);
      continue;
    }
    // Only cells that touch [first, last] matter.
    const double from = std::max(start, first - 1.0);
    const double to = std::min(grid.Coordinate(event.onset_s + event.duration_s), last + 1.0);
    for (double j = std::floor(from); j < to; j += 1.0) {
      const double p = std::max(from, j);
      const double q = std::min(to, j + 1.0);
      if (q <= p) continue;
      const double mass = event.amplitude * (q - p);
      const double centroid = 0.5 * (p + q);
      add(j, mass * (j + 1.0 - centroid));
      add(j + 1.0, mass * (centroid - j));
    }
  }
  return weights;
}

Eigen::MatrixXd ConvolvedRegressors(const std::vector<Event>& events, const HrfSpec& hrf,
                                    double tr_s, double slice_reference, int n_volumes) {
  if (hrf.shape == HrfShape::kFir) throw Error("the FIR basis is not a convolution");
  const FineGrid grid = ChooseFineGrid(tr_s, slice_reference);
  const SampledHrf kernel = SampleHrf(hrf.shape, hrf.derivatives, grid.dt);
  std::vector<std::vector<double>> kernels = {kernel.main};
  if (!kernel.time.empty()) kernels.push_back(kernel.time);
  if (!kernel.dispersion.empty()) kernels.push_back(kernel.dispersion);

  Eigen::MatrixXd columns = Eigen::MatrixXd::Zero(n_volumes, static_cast<int>(kernels.size()));
  if (events.empty() || n_volumes <= 0) return columns;
  // Grid points before -(kernel length - 1) cannot reach volume 0.
  const int reach = static_cast<int>(kernel.main.size()) - 1;
  double earliest = 0.0;
  for (const Event& event : events) earliest = std::min(earliest, grid.Coordinate(event.onset_s));
  const int first = std::max(-reach, static_cast<int>(std::floor(std::max(earliest, -1e9))));
  const int last = (n_volumes - 1) * grid.per_volume;
  const std::vector<double> weights = EventWeightsOnGrid(events, grid, first, last);
  const std::vector<std::vector<double>> convolved = ConvolveCausal(weights, kernels);
  // reached[i]: number of non-zero weights before index i. A volume whose kernel window
  // holds none is exactly 0 (the FFT would leave ~1e-17 there).
  std::vector<int> reached(weights.size() + 1, 0);
  for (size_t i = 0; i < weights.size(); ++i) reached[i + 1] = reached[i] + (weights[i] != 0.0);
  for (int k = 0; k < n_volumes; ++k) {
    const int m = k * grid.per_volume - first;
    if (reached[static_cast<size_t>(m) + 1] ==
        reached[static_cast<size_t>(std::max(0, m - reach))]) {
      continue;
    }
    for (size_t c = 0; c < convolved.size(); ++c) {
      columns(k, static_cast<int>(c)) = convolved[c][static_cast<size_t>(m)];
    }
  }
  return columns;
}

double FirBinWidth(const HrfSpec& hrf, double tr_s) {
  return hrf.fir_bin_s > 0.0 ? hrf.fir_bin_s : tr_s;
}

int FirBinCount(const HrfSpec& hrf, double tr_s) {
  if (hrf.fir_bins > 0) return hrf.fir_bins;
  return std::max(1, static_cast<int>(std::ceil(kFirDefaultSpanS / FirBinWidth(hrf, tr_s) - 1e-9)));
}

Eigen::MatrixXd FirRegressors(const std::vector<Event>& events, const HrfSpec& hrf, double tr_s,
                              double slice_reference, int n_volumes) {
  const double width = FirBinWidth(hrf, tr_s);
  const int bins = FirBinCount(hrf, tr_s);
  if (!(width > 0.0) || !std::isfinite(width)) {
    throw Error("FIR bin width must be a positive number of seconds");
  }
  Eigen::MatrixXd columns = Eigen::MatrixXd::Zero(n_volumes, bins);
  for (const Event& event : events) {
    CheckEvent(event);
    for (int k = 0; k < n_volumes; ++k) {
      const double lag = (k + slice_reference) * tr_s - event.onset_s;
      const double bin = std::floor(lag / width + 1e-9);
      if (bin >= 0.0 && bin < bins) columns(k, static_cast<int>(bin)) += event.amplitude;
    }
  }
  return columns;
}

}  // namespace boldsum
