#include "events/hrf.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

namespace boldsum {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

TEST(RawHrf, DoubleGammaMatchesScipy) {
  // Reference: scipy.stats.gamma.pdf(t, 6) - scipy.stats.gamma.pdf(t, 16) / 6 (Debian
  // python3-scipy 1.10), printed with repr(). tests/reference/test_hrf.py checks many more.
  const double reference[][2] = {{1.0, 0.0030656620097151326},
                                 {5.0, 0.17544116219546385},
                                 {10.0, 0.03204692986362342},
                                 {15.0, -0.015136856322163364},
                                 {25.0, -0.0016473632276457306}};
  for (const auto& [t, value] : reference) {
    // exp/lgamma and scipy's own evaluation differ by a few ulps of the larger lobe.
    EXPECT_NEAR(RawHrf(HrfShape::kDoubleGamma, t), value, 64 * kEps * 0.2) << "t = " << t;
  }
}

TEST(RawHrf, ZeroOutsideSupport) {
  for (HrfShape shape : {HrfShape::kDoubleGamma, HrfShape::kGlover}) {
    EXPECT_EQ(RawHrf(shape, 0.0), 0.0);
    EXPECT_EQ(RawHrf(shape, -1.0), 0.0);
    EXPECT_EQ(RawHrf(shape, 32.01), 0.0);
    EXPECT_NE(RawHrf(shape, 32.0), 0.0);
    EXPECT_EQ(RawHrfTimeDerivative(shape, 0.0), 0.0);
  }
}

TEST(RawHrf, GloverFirstLobeIsOneAtItsPeak) {
  // (t/d1)^a1 exp(-(t-d1)/b1) = 1 at t = d1 = a1 b1 = 5.4 s (Glover 1999, parameters
  // recalled from memory); the second lobe there is -0.35 (5.4/10.8)^12 e^(5.4/0.9).
  const double second = -0.35 * std::pow(5.4 / 10.8, 12) * std::exp(5.4 / 0.9);
  EXPECT_NEAR(RawHrf(HrfShape::kGlover, 5.4), 1.0 + second, 16 * kEps);
}

TEST(RawHrf, TimeDerivativeMatchesCentralDifference) {
  // Central difference f'(t) ~ (f(t+h) - f(t-h)) / 2h, error h^2 f'''/6 ~ 1e-10 at h = 1e-4
  // (plus rounding eps * f / h ~ 1e-12).
  for (HrfShape shape : {HrfShape::kDoubleGamma, HrfShape::kGlover}) {
    for (double t = 0.5; t < 31.5; t += 0.37) {
      const double h = 1e-4;
      const double difference = (RawHrf(shape, t + h) - RawHrf(shape, t - h)) / (2 * h);
      EXPECT_NEAR(RawHrfTimeDerivative(shape, t), difference, 2e-9) << "t = " << t;
    }
  }
}

TEST(SampleHrf, UnitAreaOnTheGrid) {
  for (HrfShape shape : {HrfShape::kDoubleGamma, HrfShape::kGlover}) {
    for (double dt : {0.1, 0.05, 0.045, 1.0 / 16}) {
      const SampledHrf hrf = SampleHrf(shape, HrfDerivatives::kTimeDispersion, dt);
      const double sum = std::accumulate(hrf.main.begin(), hrf.main.end(), 0.0);
      EXPECT_NEAR(sum, 1.0, 400 * kEps);  // summing ~700 terms
      EXPECT_EQ(hrf.main.size(), static_cast<size_t>(std::floor(32.0 / dt + 1e-6)) + 1);
      EXPECT_EQ(hrf.time.size(), hrf.main.size());
      EXPECT_EQ(hrf.dispersion.size(), hrf.main.size());
    }
  }
}

TEST(SampleHrf, PeakAndUndershootTimes) {
  // Common practice: the canonical (double-gamma) response peaks about 5 s after onset
  // and undershoots near 15 s. Glover's undershoot lobe peaks at d2 = a2 b2 = 10.8 s, so the
  // sum dips a little later, near 12 s (from the formula; Glover 1999).
  const struct {
    HrfShape shape;
    double dip_low, dip_high;
  } cases[] = {{HrfShape::kDoubleGamma, 14.0, 16.5}, {HrfShape::kGlover, 11.0, 13.5}};
  for (const auto& c : cases) {
    const SampledHrf hrf = SampleHrf(c.shape, HrfDerivatives::kNone, 0.1);
    const auto peak = std::max_element(hrf.main.begin(), hrf.main.end()) - hrf.main.begin();
    const auto dip = std::min_element(hrf.main.begin(), hrf.main.end()) - hrf.main.begin();
    EXPECT_GT(peak * 0.1, 4.5);
    EXPECT_LT(peak * 0.1, 5.6);
    EXPECT_GT(dip * 0.1, c.dip_low);
    EXPECT_LT(dip * 0.1, c.dip_high);
  }
}

TEST(SampleHrf, DerivativeKernelsFollowTheirDefinitions) {
  const double dt = 0.1;
  const SampledHrf hrf = SampleHrf(HrfShape::kDoubleGamma, HrfDerivatives::kTimeDispersion, dt);
  double raw_sum = 0.0;
  for (size_t i = 0; i < hrf.main.size(); ++i) raw_sum += RawHrf(HrfShape::kDoubleGamma, i * dt);
  for (size_t i = 0; i < hrf.main.size(); i += 7) {
    const double t = i * dt;
    EXPECT_NEAR(hrf.time[i], RawHrfTimeDerivative(HrfShape::kDoubleGamma, t) / raw_sum, 1e-15);
    const double forward =
        (RawHrf(HrfShape::kDoubleGamma, t, 0.01) - RawHrf(HrfShape::kDoubleGamma, t)) / 0.01;
    EXPECT_NEAR(hrf.dispersion[i], forward / raw_sum, 1e-14);
  }
}

TEST(SampleHrf, RejectsFirAndBadSpacing) {
  EXPECT_THROW(SampleHrf(HrfShape::kFir, HrfDerivatives::kNone, 0.1), Error);
  EXPECT_THROW(SampleHrf(HrfShape::kDoubleGamma, HrfDerivatives::kNone, 0.0), Error);
}

}  // namespace
}  // namespace boldsum
