#include "events/hrf.h"

#include <cmath>

#include "boldsum/error.h"

namespace boldsum {
namespace {

// weight * exp(log_constant) * t^power * exp(-t / scale).
struct Lobe {
  double weight;
  double power;
  double scale;
  double log_constant;
};

// Gamma density of shape k and scale theta: t^(k-1) e^(-t/theta) / (Gamma(k) theta^k).
Lobe GammaDensityLobe(double weight, double shape, double scale) {
  return {weight, shape - 1.0, scale, -std::lgamma(shape) - shape * std::log(scale)};
}

// Glover's lobe (t/d)^a exp(-(t-d)/b) with d = a b.
Lobe GloverLobe(double weight, double a, double b) {
  return {weight, a, b, -a * std::log(a * b) + a};
}

void Lobes(HrfShape shape, double first_scale_shift, Lobe* first, Lobe* second) {
  switch (shape) {
    case HrfShape::kDoubleGamma:
      *first = GammaDensityLobe(1.0, 6.0, 1.0 + first_scale_shift);
      *second = GammaDensityLobe(-1.0 / 6.0, 16.0, 1.0);
      return;
    case HrfShape::kGlover:
      *first = GloverLobe(1.0, 6.0, 0.9 + first_scale_shift);
      *second = GloverLobe(-0.35, 12.0, 0.9);
      return;
    case HrfShape::kFir:
      break;
  }
  throw Error("the FIR basis has no HRF kernel");
}

double LobeValue(const Lobe& lobe, double t) {
  return lobe.weight * std::exp(lobe.log_constant + lobe.power * std::log(t) - t / lobe.scale);
}

bool IsInSupport(double t) { return t > 0.0 && t <= kHrfSupportS; }

}  // namespace

double RawHrf(HrfShape shape, double t, double first_scale_shift) {
  Lobe first, second;
  Lobes(shape, first_scale_shift, &first, &second);
  if (!IsInSupport(t)) return 0.0;  // both lobes vanish at t = 0 (power > 0)
  return LobeValue(first, t) + LobeValue(second, t);
}

double RawHrfTimeDerivative(HrfShape shape, double t) {
  Lobe first, second;
  Lobes(shape, 0.0, &first, &second);
  if (!IsInSupport(t)) return 0.0;  // powers are >= 5, so the slope at 0 is 0
  double slope = 0.0;
  for (const Lobe& lobe : {first, second}) {
    slope += LobeValue(lobe, t) * (lobe.power / t - 1.0 / lobe.scale);
  }
  return slope;
}

SampledHrf SampleHrf(HrfShape shape, HrfDerivatives derivatives, double dt) {
  if (!(dt > 0.0)) throw Error("HRF grid spacing must be positive");
  SampledHrf hrf;
  hrf.dt = dt;
  const int last = static_cast<int>(std::floor(kHrfSupportS / dt * (1.0 + 1e-9)));
  hrf.main.resize(last + 1);
  double sum = 0.0;
  for (int i = 0; i <= last; ++i) {
    hrf.main[i] = RawHrf(shape, i * dt);
    sum += hrf.main[i];
  }
  // Unit area on the grid: main_i = K h(t_i) dt with K = 1 / (dt sum h(t_j)), so
  // sum(main) = 1; the derivative kernels are K h'(t_i) dt, i.e. h'(t_i) / sum h(t_j).
  const double normaliser = 1.0 / sum;
  for (double& value : hrf.main) value *= normaliser;
  if (derivatives != HrfDerivatives::kNone) {
    hrf.time.resize(last + 1);
    for (int i = 0; i <= last; ++i) {
      hrf.time[i] = RawHrfTimeDerivative(shape, i * dt) * normaliser;
    }
  }
  if (derivatives == HrfDerivatives::kTimeDispersion) {
    hrf.dispersion.resize(last + 1);
    for (int i = 0; i <= last; ++i) {
      const double t = i * dt;
      hrf.dispersion[i] =
          (RawHrf(shape, t, kDispersionStepS) - RawHrf(shape, t)) / kDispersionStepS * normaliser;
    }
  }
  return hrf;
}

}  // namespace boldsum
