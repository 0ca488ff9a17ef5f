// Tail-safe t -> z and F -> z. Where the tail probability is representable (>= 1e-300)
// it comes from Boost.Math (cdf of the complement, no 1 - cdf); beyond, from the log-space
// incomplete beta in stats/log_beta.h, then inverted by ZFromLogUpperTail.
// The body (tail probability >= kFastTail) is evaluated with the same formulas in
// double precision, several times faster than Boost's default promotion to long double;
// the tails keep the promoted path.
#include <boost/math/distributions/fisher_f.hpp>
#include <boost/math/distributions/normal.hpp>
#include <boost/math/distributions/students_t.hpp>
#include <boost/math/special_functions/erf.hpp>
#include <cmath>
#include <limits>

#include "boldsum/stats.h"
#include "stats/boost_policy.h"
#include "stats/log_beta.h"
#include "stats/normal_tail.h"

namespace boldsum {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Boost treats dof beyond 1/eps as normal (students_t.hpp); the log-space path agrees.
constexpr double kNormalDof = 1.0 / std::numeric_limits<double>::epsilon();

using StudentT = boost::math::students_t_distribution<double, StatsPolicy>;
using FisherF = boost::math::fisher_f_distribution<double, StatsPolicy>;
using Normal = boost::math::normal_distribution<double, StatsPolicy>;

// StatsPolicy without the promotion of double to long double. Measured against mpmath
// at 400 digits (t from 1e-3 to 1e2, dof 1 to 1e4, tail probabilities down to 1e-300):
// z from t within 1.1e-15 relative (against 4.3e-16 promoted); the reference checks in
// tests/reference/test_z_transform.py hold it to their unchanged tolerances. About six
// times faster than the promoted path (x87 long double).
using FastPolicy = boost::math::policies::policy<
    boost::math::policies::domain_error<boost::math::policies::ignore_error>,
    boost::math::policies::pole_error<boost::math::policies::ignore_error>,
    boost::math::policies::overflow_error<boost::math::policies::ignore_error>,
    boost::math::policies::evaluation_error<boost::math::policies::ignore_error>,
    boost::math::policies::promote_double<false>>;
using FastStudentT = boost::math::students_t_distribution<double, FastPolicy>;
using FastFisherF = boost::math::fisher_f_distribution<double, FastPolicy>;
using FastNormal = boost::math::normal_distribution<double, FastPolicy>;

// Tail probabilities at least this large take the double-precision path (|z| < 9.2).
constexpr double kFastTail = 1e-20;

bool IsBadDof(double dof) { return !(dof > 0); }  // also true for NaN

// P(T > t) for t >= 0, by Boost (exact to ~2e-16 while representable; 0 on underflow).
// Only used where P(T > t) <= 1/4: Boost 1.74 computes the central region through
// ibetac(1/2, dof/2, t^2/(dof + t^2)), which is wrong by up to ~1e-12 (absolute) for
// tiny arguments (ibetac(0.5, 0.5, 1e-20) returns exactly 1).
double UpperTailT(double t, double dof) {
  if (std::isinf(dof)) return boost::math::cdf(boost::math::complement(Normal(0, 1), t));
  return boost::math::cdf(boost::math::complement(StudentT(dof), t));
}

// P(0 < T < |t|) = I_y(1/2, dof/2) / 2 with y = t^2 / (dof + t^2) (A&S 26.7.1), accurate
// relative to itself as t -> 0; NaN when t^2 / dof overflows (then it is ~1/2).
double CentralT(double t, double dof) {
  const double u = t / std::sqrt(dof);
  const double y = u * u / (1.0 + u * u);
  if (!std::isfinite(y)) return kNaN;
  return 0.5 * boost::math::ibeta(0.5, 0.5 * dof, y, StatsPolicy());
}

// log P(T > t) for t >= 0 where P(T > t) < 1e-300:
// P(T > t) = I_x(dof/2, 1/2) / 2 with x = dof / (dof + t^2) (DLMF 8.17.1 applied to
// Student's t; Abramowitz & Stegun 26.7.1 for the tail of t).
double LogTinyUpperTailT(double t, double dof) {
  if (dof > kNormalDof) return LogNormalUpperTail(t);
  const double u = t / std::sqrt(dof);  // t^2 / dof = u^2 may overflow; its log does not
  const BetaArgument arg = BetaArgumentFromRatio(u * u, 2.0 * std::log(u));
  return LogRegularizedBeta(0.5 * dof, 0.5, arg) - boost::math::constants::ln_two<double>();
}

// The argument x = d2 / (d2 + d1 f) of P(F > f) = I_x(d2/2, d1/2) (A&S 26.6.2), built
// from r = d1 f / d2 (so that P(F < f) = I_y(d1/2, d2/2) with y = 1 - x exactly).
BetaArgument FArgument(double f, double dof1, double dof2) {
  const double r = dof1 * f / dof2;
  return BetaArgumentFromRatio(r, std::log(dof1) + std::log(f) - std::log(dof2));
}

double LogTinyUpperTailF(double f, double dof1, double dof2) {
  return LogRegularizedBeta(0.5 * dof2, 0.5 * dof1, FArgument(f, dof1, dof2));
}

double LogTinyLowerTailF(double f, double dof1, double dof2) {
  const BetaArgument arg = FArgument(f, dof1, dof2);
  return LogRegularizedBeta(0.5 * dof1, 0.5 * dof2, {arg.y, arg.x, arg.log_y, arg.log_x});
}

// z with Phi_c(z) = p for a representable p in [1e-300, 1/2].
double ZFromSmallTail(double p) {
  return boost::math::quantile(boost::math::complement(Normal(0, 1), p));
}

// The promoted (long double) path for t >= 0 with finite t and dof.
double ZFromTPromoted(double t, double dof) {
  // Central region: z = sqrt(2) erf^-1(2q), q = P(0 < T < t), keeps full relative
  // accuracy as t -> 0 (1/2 - P(T > t) would cancel).
  const double q = CentralT(t, dof);
  if (q < 0.25) {
    return boost::math::constants::root_two<double>() *
           boost::math::erf_inv(2.0 * q, StatsPolicy());
  }
  const double p = UpperTailT(t, dof);
  if (p >= kSmallestDirectTail) return ZFromSmallTail(p);
  return ZFromLogUpperTail(LogTinyUpperTailT(t, dof));
}

// The promoted path for finite f > 0.
double ZFromFPromoted(double f, double dof1, double dof2) {
  const FisherF dist(dof1, dof2);
  const double upper = boost::math::cdf(boost::math::complement(dist, f));
  if (upper <= 0.5) {
    if (upper >= kSmallestDirectTail) return ZFromSmallTail(upper);
    return ZFromLogUpperTail(LogTinyUpperTailF(f, dof1, dof2));
  }
  // Lower half: z = -Phi_c^-1(P(F < f)), so small f keeps full relative accuracy.
  const double lower = boost::math::cdf(dist, f);
  if (lower >= kSmallestDirectTail) return -ZFromSmallTail(lower);
  return -ZFromLogUpperTail(LogTinyLowerTailF(f, dof1, dof2));
}

}  // namespace

double LogUpperTailT(double t, double dof) {
  if (std::isnan(t) || IsBadDof(dof)) return kNaN;
  if (std::isinf(t)) return t > 0 ? -kInf : 0.0;
  if (!std::isinf(dof)) {
    const double q = CentralT(std::fabs(t), dof);
    if (q < 0.25) {  // log(1/2 -+ q) = log(1/2) + log1p(-+2q)
      return -boost::math::constants::ln_two<double>() + std::log1p(t >= 0 ? -2.0 * q : 2.0 * q);
    }
  }
  const double p = UpperTailT(std::fabs(t), dof);
  if (t < 0) return std::log1p(-p);  // P(T > -t) <= 1/2: no cancellation
  if (p >= kSmallestDirectTail) return std::log(p);
  return LogTinyUpperTailT(t, dof);
}

double LogUpperTailF(double f, double dof1, double dof2) {
  if (std::isnan(f) || IsBadDof(dof1) || IsBadDof(dof2) || f < 0) return kNaN;
  if (std::isinf(f)) return -kInf;
  const double p = boost::math::cdf(boost::math::complement(FisherF(dof1, dof2), f));
  if (p > 0.5) return std::log1p(-boost::math::cdf(FisherF(dof1, dof2), f));
  if (p >= kSmallestDirectTail) return std::log(p);
  return LogTinyUpperTailF(f, dof1, dof2);
}

double ZFromT(double t, double dof) {
  if (std::isnan(t) || IsBadDof(dof)) return kNaN;
  if (t < 0) return -ZFromT(-t, dof);  // odd by construction
  if (std::isinf(t)) return kInf;
  if (std::isinf(dof)) return t;
  // The body in double precision, by the same two formulas as below. For dof >= 1,
  // P(0 < T < t) >= 1/4 once t >= 1 (equality for dof = 1), so the central probability
  // is needed only below t = 1.
  if (t < 1.0 || dof < 1.0) {
    const double u = t / std::sqrt(dof);
    const double y = u * u / (1.0 + u * u);
    if (std::isfinite(y)) {
      const double q = 0.5 * boost::math::ibeta(0.5, 0.5 * dof, y, FastPolicy());
      if (q < 0.25) {
        return boost::math::constants::root_two<double>() *
               boost::math::erf_inv(2.0 * q, FastPolicy());
      }
    }
  }
  if (dof <= kNormalDof) {
    const double p = boost::math::cdf(boost::math::complement(FastStudentT(dof), t));
    if (p >= kFastTail && p <= 0.25) {
      return boost::math::quantile(boost::math::complement(FastNormal(0, 1), p));
    }
  }
  return ZFromTPromoted(t, dof);
}

double ZFromF(double f, double dof1, double dof2) {
  if (std::isnan(f) || IsBadDof(dof1) || IsBadDof(dof2) || f < 0) return kNaN;
  if (f == 0) return -kInf;
  if (std::isinf(f)) return kInf;
  // The body in double precision, by the same formulas as the promoted path, where that
  // was measured accurate: dof1 <= 3 (Boost's ibeta(dof2/2, dof1/2) in double drifts to
  // ~2e-13 relative at dof1 >= 4 and dof2 ~1e4; within 2.2e-15 of mpmath for dof1 <= 3,
  // dof2 from 1 to 1e7).
  if (dof1 <= 3.0) {
    const FastFisherF dist(dof1, dof2);
    const double upper = boost::math::cdf(boost::math::complement(dist, f));
    if (upper <= 0.5) {
      if (upper >= kFastTail) {
        return boost::math::quantile(boost::math::complement(FastNormal(0, 1), upper));
      }
    } else {
      const double lower = boost::math::cdf(dist, f);
      if (lower >= kFastTail && lower <= 0.5) {
        return -boost::math::quantile(boost::math::complement(FastNormal(0, 1), lower));
      }
    }
  }
  return ZFromFPromoted(f, dof1, dof2);
}

}  // namespace boldsum
