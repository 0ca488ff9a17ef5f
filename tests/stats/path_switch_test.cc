// No jumps where the computation changes method: tail 1e-300 (Boost -> log-space
// incomplete beta), tail 1e-20 (double-precision body -> long double tails of ZFromT and,
// for dof1 <= 3, ZFromF; both sides in either F tail), dof1 = 3 (ZFromF's double path
// ends), P = 1/4 (central erf^-1 path -> upper-tail path), F's upper/lower tail choice at
// P = 1/2, and z = 37 / log p = log 1e-300 in the normal tail. On a grid
// fine enough that z steps by ~1e-12 relative, every step must match the mean step to
// 1%: evaluation noise (~2e-16 relative) is 1e-4 of a step, while a branch offset of
// even 1e-14 relative would show as a 1% outlier.
#include <gtest/gtest.h>

#include <cmath>
#include <functional>
#include <string>
#include <vector>

#include "boldsum/stats.h"
#include "stats/normal_tail.h"

namespace boldsum {
namespace {

// The x with g(x) = target for increasing (or decreasing) g, by bisection on [lo, hi].
double Solve(const std::function<double(double)>& g, double target, double lo, double hi) {
  const bool increasing = g(hi) > g(lo);
  for (int i = 0; i < 200; ++i) {
    const double mid = lo <= 0 || hi / lo < 4 ? 0.5 * (lo + hi) : std::sqrt(lo) * std::sqrt(hi);
    if ((g(mid) < target) == increasing)
      lo = mid;
    else
      hi = mid;
  }
  return 0.5 * (lo + hi);
}

// Checks that f is smooth and strictly monotone around x0: 201 points spaced so that f
// changes by ~`relative_step` of |f| per point, each step within 1% of the mean step.
void ExpectSmoothAround(const std::function<double(double)>& f, double x0, double relative_step,
                        const std::string& what) {
  const double h = std::fmax(std::fabs(x0) * 1e-7, 1e-300);
  const double slope = (f(x0 + h) - f(x0 - h)) / (2 * h);
  ASSERT_TRUE(std::isfinite(slope) && slope != 0) << what;
  const double dx = relative_step * std::fmax(std::fabs(f(x0)), 1.0) / std::fabs(slope);
  std::vector<double> steps;
  double previous = f(x0 - 100 * dx);
  for (int k = -99; k <= 100; ++k) {
    const double value = f(x0 + k * dx);
    steps.push_back(value - previous);
    previous = value;
  }
  double mean = 0;
  for (double s : steps) mean += s / steps.size();
  for (std::size_t k = 0; k < steps.size(); ++k) {
    EXPECT_NEAR(steps[k] / mean, 1.0, 0.01) << what << ", step " << k << " around x = " << x0;
  }
}

TEST(PathSwitch, TTailAt1e300) {
  for (double dof : {1.0, 1.5, 3.7, 30.0, 200.0, 1e4, 1e6}) {
    const auto log_p = [dof](double t) { return LogUpperTailT(t, dof); };
    const double t0 = Solve(log_p, std::log(1e-300), 1.0, 1e305);
    const std::string what = "dof " + std::to_string(dof);
    ExpectSmoothAround([dof](double t) { return ZFromT(t, dof); }, t0, 1e-12, "z, " + what);
    ExpectSmoothAround(log_p, t0, 1e-12, "log p, " + what);
  }
}

TEST(PathSwitch, TBodyAt1e20) {
  for (double dof : {1.0, 2.5, 30.0, 274.0, 1e4, 1e6}) {
    const auto log_p = [dof](double t) { return LogUpperTailT(t, dof); };
    const double t0 = Solve(log_p, std::log(1e-20), 1.0, 1e25);
    const std::string what = "dof " + std::to_string(dof);
    ExpectSmoothAround([dof](double t) { return ZFromT(t, dof); }, t0, 1e-12, "z, " + what);
    ExpectSmoothAround([dof](double t) { return ZFromT(t, dof); }, -t0, 1e-12, "z at -t, " + what);
  }
}

TEST(PathSwitch, FBodyAt1e20AndAtDof1Three) {
  for (double d1 : {1.0, 2.0, 3.0}) {
    for (double d2 : {2.5, 30.0, 1e4, 1e6}) {
      const auto z = [d1, d2](double f) { return ZFromF(f, d1, d2); };
      const std::string what = "dof " + std::to_string(d1) + ", " + std::to_string(d2);
      const double upper = Solve([d1, d2](double f) { return LogUpperTailF(f, d1, d2); },
                                 std::log(1e-20), 1e-3, 1e308);
      if (upper < 1e300) ExpectSmoothAround(z, upper, 1e-12, "z upper, " + what);
      // P(F < f) = 1e-20 where z = -Phi_c^-1(1e-20).
      const double lower = Solve(z, -ZFromLogUpperTail(std::log(1e-20)), 1e-300, 1.0);
      ExpectSmoothAround(z, lower, 1e-12, "z lower, " + what);
    }
  }
  // Across dof1 = 3 (double path at and below, promoted above) z moves smoothly with dof1.
  for (double d2 : {30.0, 1e4}) {
    for (double f : {0.3, 2.0, 20.0}) {
      ExpectSmoothAround([f, d2](double d1) { return ZFromF(f, d1, d2); }, 3.0, 1e-10,
                         "z over dof1 at f " + std::to_string(f) + ", dof2 " + std::to_string(d2));
    }
  }
}

TEST(PathSwitch, TCentralAtQuarter) {
  for (double dof : {1.0, 3.7, 200.0, 1e6}) {
    const auto log_p = [dof](double t) { return LogUpperTailT(t, dof); };
    const double t0 = Solve(log_p, std::log(0.25), 0.0, 10.0);
    const std::string what = "dof " + std::to_string(dof);
    ExpectSmoothAround([dof](double t) { return ZFromT(t, dof); }, t0, 1e-10, "z, " + what);
    ExpectSmoothAround(log_p, t0, 1e-10, "log p, " + what);
    ExpectSmoothAround(log_p, -t0, 1e-10, "log p at -t, " + what);
  }
}

TEST(PathSwitch, FUpperTailAt1e300AndMedian) {
  for (double d1 : {1.0, 2.0, 5.0, 20.0}) {
    for (double d2 : {1.0, 2.5, 30.0, 1e4, 1e6}) {
      const auto log_p = [d1, d2](double f) { return LogUpperTailF(f, d1, d2); };
      const auto z = [d1, d2](double f) { return ZFromF(f, d1, d2); };
      const std::string what = "dof " + std::to_string(d1) + ", " + std::to_string(d2);
      const double far = Solve(log_p, std::log(1e-300), 1e-3, 1e308);
      if (far < 1e300) {  // dof2 = 1 reaches 1e-300 only beyond f = 1e300
        ExpectSmoothAround(z, far, 1e-12, "z far, " + what);
        ExpectSmoothAround(log_p, far, 1e-12, "log p far, " + what);
      }
      const double median = Solve(log_p, std::log(0.5), 1e-6, 1e6);
      ExpectSmoothAround(log_p, median, 1e-10, "log p median, " + what);
      // z ~ 0 at the median: step z by ~1e-10 absolute instead (|f| floor of 1).
      ExpectSmoothAround(z, median, 1e-10, "z median, " + what);
    }
  }
}

TEST(PathSwitch, FLowerTailAt1e300) {
  // P(F < f) = 1e-300 where z = -Phi_c^-1(1e-300); the lower tail ~ f^(d1/2) gets there
  // at f > 1e-150 for these dof1.
  const double z_switch = -ZFromLogUpperTail(std::log(1e-300));
  for (double d1 : {5.0, 20.0}) {
    for (double d2 : {2.5, 200.0, 1e6}) {
      const auto z = [d1, d2](double f) { return ZFromF(f, d1, d2); };
      const double f0 = Solve(z, z_switch, 1e-300, 1.0);
      ExpectSmoothAround(z, f0, 1e-12,
                         "z lower, dof " + std::to_string(d1) + ", " + std::to_string(d2));
    }
  }
}

TEST(PathSwitch, NormalTail) {
  ExpectSmoothAround(LogNormalUpperTail, 37.0, 1e-12, "log Phi_c at 37");
  ExpectSmoothAround(ZFromLogUpperTail, std::log(1e-300), 1e-12, "z at 1e-300");
  ExpectSmoothAround(ZFromLogUpperTail, std::log(0.5), 1e-10, "z at 1/2");
}

}  // namespace
}  // namespace boldsum
