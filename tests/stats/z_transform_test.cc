// ZFromT, ZFromF, LogUpperTailT, LogUpperTailF: closed forms first, then properties.
// The 50-digit comparisons over a wide grid live in tests/reference/test_z_transform.py.
#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <cmath>
#include <limits>
#include <vector>

#include "boldsum/stats.h"
#include "generators.h"

namespace boldsum {
namespace {

using testing::LogUniform;
using testing::Uniform;

constexpr double kEps = std::numeric_limits<double>::epsilon();
constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
const double kPi = std::acos(-1.0);

double RelErr(double value, double reference) {
  return std::fabs(value - reference) / std::fabs(reference);
}

// Closed form (dof = 1, Cauchy): P(T > t) = atan(1/t) / pi for t > 0, the integral of the
// density 1 / (pi (1 + s^2)) (Johnson, Kotz & Balakrishnan 1994, Continuous Univariate
// Distributions vol. 1, ch. 16). atan2(1, t)
// keeps full relative accuracy for any t, so this reaches far past the 1e-300 switch
// (t = 1e301 gives P = 3e-302).
TEST(LogUpperTailT, MatchesCauchyClosedForm) {
  for (double t : {1e-8, 0.5, 1.0, 3.0, 1e3, 1e10, 1e100, 1e300, 1e301, 1e305, 1e308}) {
    const double reference = std::log(std::atan2(1.0, t) / kPi);
    // A few roundings in P, each eps relative, shrink by |log P| >= 0.69 in log space.
    EXPECT_LE(RelErr(LogUpperTailT(t, 1.0), reference), 4 * kEps) << "t = " << t;
  }
}

// Closed form (dof = 2): P(T > t) = I_x(1, 1/2) / 2 with x = 2 / (2 + t^2) (A&S 26.7.1),
// and I_x(1, b) = 1 - (1 - x)^b by integrating b (1 - s)^(b - 1), so
// P(T > t) = (1 - t / s) / 2 = 1 / (s (s + t)) with s = sqrt(2 + t^2). Written in logs
// so that t = 1e200 (P = 5e-401, far beyond the switch) does not overflow.
TEST(LogUpperTailT, MatchesTwoDofClosedForm) {
  for (double t : {0.1, 1.0, 10.0, 1e5, 1e100, 1e149, 1e151, 1e160, 1e200, 1e300}) {
    const double log_s = std::log(t) + 0.5 * std::log1p(2.0 / (t * t));
    const double reference = -log_s - std::log(t) - std::log1p(std::sqrt(1.0 + 2.0 / (t * t)));
    EXPECT_LE(RelErr(LogUpperTailT(t, 2.0), reference), 8 * kEps) << "t = " << t;
  }
}

// Closed form (dof1 = 2): P(F > f) = (d2 / (d2 + 2 f))^(d2/2), because I_x(a, 1) = x^a
// (DLMF 8.17.1 with b = 1). Covers the far tail: d2 = 200, f = 1e6 gives log P = -921.
TEST(LogUpperTailF, MatchesTwoDofClosedForm) {
  for (double d2 : {1.0, 2.5, 30.0, 200.0, 1e4, 1e6}) {
    for (double f : {1e-6, 0.5, 1.0, 10.0, 1e3, 1e6, 1e100}) {
      const double reference = -0.5 * d2 * std::log1p(2.0 * f / d2);
      // Tolerance 1e-13: Boost's ibeta at a parameter of 5e5 (d2 = 1e6) is accurate to
      // ~1e-14 (measured in test_z_transform.py); elsewhere the error is a few eps.
      EXPECT_LE(RelErr(LogUpperTailF(f, 2.0, d2), reference), 1e-13)
          << "f = " << f << ", dof2 = " << d2;
    }
  }
}

// A value far beyond double underflow, from mpmath at 50 digits (mpmath.betainc and
// findroot on erfc, as in test_z_transform.py): t = 1000, dof = 200 gives
// z = 41.247289717073204008, log P(T > t) = -855.30856535325613820.
TEST(ZFromT, FarTailReferenceValue) {
  EXPECT_LE(RelErr(ZFromT(1000.0, 200.0), 41.247289717073204008), 2 * kEps);
  EXPECT_LE(RelErr(LogUpperTailT(1000.0, 200.0), -855.30856535325613820), 4 * kEps);
}

// t with infinitely many dof is standard normal: z = t exactly.
TEST(ZFromT, InfiniteDofIsIdentity) {
  for (double t : {-40.0, -1.0, 0.0, 1e-300, 2.5, 1e3}) EXPECT_EQ(ZFromT(t, kInf), t);
}

// Arguments whose ratios underflow or overflow still give finite z (f = 1e-320 is
// subnormal; t = 1e300 squared overflows).
TEST(ZFromF, FiniteAtExtremeArguments) {
  for (double f : {1e-320, 1e-300, 1e-150, 1e300}) {
    for (double d1 : {1.0, 20.0}) {
      EXPECT_TRUE(std::isfinite(ZFromF(f, d1, 30.0))) << "f = " << f << ", dof1 = " << d1;
    }
  }
  EXPECT_LT(ZFromF(1e-320, 20.0, 30.0), ZFromF(1e-300, 20.0, 30.0));
  EXPECT_TRUE(std::isfinite(ZFromT(1e300, 3.0)));
}

TEST(ZFromT, SpecialValues) {
  EXPECT_EQ(ZFromT(0.0, 5.0), 0.0);
  EXPECT_EQ(ZFromT(kInf, 5.0), kInf);
  EXPECT_EQ(ZFromT(-kInf, 5.0), -kInf);
  EXPECT_EQ(LogUpperTailT(kInf, 5.0), -kInf);
  EXPECT_EQ(LogUpperTailT(-kInf, 5.0), 0.0);
  EXPECT_EQ(ZFromF(0.0, 3.0, 20.0), -kInf);
  EXPECT_EQ(ZFromF(kInf, 3.0, 20.0), kInf);
  EXPECT_EQ(LogUpperTailF(0.0, 3.0, 20.0), 0.0);
  EXPECT_EQ(LogUpperTailF(kInf, 3.0, 20.0), -kInf);
}

// NaN in, NaN out; out-of-domain arguments (dof <= 0, f < 0) are NaN as documented.
TEST(ZFromT, NaNAndDomain) {
  EXPECT_TRUE(std::isnan(ZFromT(kNaN, 5.0)));
  EXPECT_TRUE(std::isnan(ZFromT(1.0, kNaN)));
  EXPECT_TRUE(std::isnan(ZFromT(1.0, 0.0)));
  EXPECT_TRUE(std::isnan(ZFromT(1.0, -3.0)));
  EXPECT_TRUE(std::isnan(LogUpperTailT(kNaN, 5.0)));
  EXPECT_TRUE(std::isnan(LogUpperTailT(1.0, 0.0)));
  EXPECT_TRUE(std::isnan(ZFromF(kNaN, 2.0, 5.0)));
  EXPECT_TRUE(std::isnan(ZFromF(1.0, kNaN, 5.0)));
  EXPECT_TRUE(std::isnan(ZFromF(1.0, 2.0, kNaN)));
  EXPECT_TRUE(std::isnan(ZFromF(-1e-300, 2.0, 5.0)));
  EXPECT_TRUE(std::isnan(ZFromF(1.0, 0.0, 5.0)));
  EXPECT_TRUE(std::isnan(ZFromF(1.0, 2.0, -1.0)));
  EXPECT_TRUE(std::isnan(LogUpperTailF(-1.0, 2.0, 5.0)));
  EXPECT_TRUE(std::isnan(LogUpperTailF(kNaN, 2.0, 5.0)));
}

// T^2 = Z^2 / (chi^2_nu / nu) is F(1, nu) by the definitions of t and F, so
// P(F > t^2) = 2 P(T > t) for t > 0: two different code paths, compared in both the
// direct and the log-space regimes.
RC_GTEST_PROP(LogUpperTail, SquaredTIsF, ()) {
  const double t = *LogUniform(1e-3, 1e150);
  const double dof = *LogUniform(1.0, 1e6);
  const double from_f = LogUpperTailF(t * t, 1.0, dof);
  const double from_t = std::log(2.0) + LogUpperTailT(t, dof);
  // Boost's t and F tails are each accurate to ~1e-14 (more at dof near 1e6): 1e-13.
  RC_ASSERT(std::fabs(from_f - from_t) <= 1e-13 * std::fmax(1.0, std::fabs(from_t)));
}

RC_GTEST_PROP(ZFromT, IsOddExactly, ()) {
  const double t = *LogUniform(1e-300, 1e300);
  const double dof = *LogUniform(1.0, 1e7);
  RC_ASSERT(ZFromT(-t, dof) == -ZFromT(t, dof));
}

RC_GTEST_PROP(ZFromT, FiniteForFractionalAndLargeDof, ()) {
  const double t = *Uniform(-1e3, 1e3);
  const double dof = *rc::gen::oneOf(LogUniform(1.0, 1e6), rc::gen::element(1.0, 1.5, 3.7, 1e6));
  const double z = ZFromT(t, dof);
  RC_ASSERT(std::isfinite(z));
  RC_ASSERT(std::isfinite(LogUpperTailT(t, dof)));
  RC_ASSERT((t > 0) == (z > 0));
}

// Monotone on a random increasing grid. Neighbours differ by at least 1e-9 relative,
// so a true increase in z (>= ~1e-12 relative) dwarfs the ~1e-16 evaluation noise.
RC_GTEST_PROP(ZFromT, MonotoneOnRandomGrid, ()) {
  const double dof = *LogUniform(1.0, 1e6);
  double t = *Uniform(-1e3, 1e3);
  double previous = ZFromT(t, dof);
  for (int i = 0; i < 30; ++i) {
    const double step = *LogUniform(1e-9, 1.0);
    t += step * std::fmax(1.0, std::fabs(t)) * *LogUniform(1.0, 50.0);
    if (t > 1e3) break;
    const double z = ZFromT(t, dof);
    RC_ASSERT(z > previous);
    previous = z;
  }
}

RC_GTEST_PROP(ZFromF, FiniteAndMonotoneUpToAMillion, ()) {
  const int dof1 = *rc::gen::inRange(1, 21);
  const double dof2 = *LogUniform(1.0, 1e6);
  double f = *LogUniform(1e-8, 1e6);
  double previous = ZFromF(f, dof1, dof2);
  RC_ASSERT(std::isfinite(previous));
  for (int i = 0; i < 30; ++i) {
    f *= 1.0 + *LogUniform(1e-9, 1.0);
    if (f > 1e6) break;
    const double z = ZFromF(f, dof1, dof2);
    RC_ASSERT(std::isfinite(z));
    RC_ASSERT(z > previous);
    previous = z;
  }
}

}  // namespace
}  // namespace boldsum
