#include "stats/normal_tail.h"

#include <boost/math/constants/constants.hpp>
#include <boost/math/distributions/normal.hpp>
#include <cmath>
#include <limits>

#include "boldsum/stats.h"
#include "stats/boost_policy.h"

namespace boldsum {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kEps = std::numeric_limits<double>::epsilon();

// Beyond this z, Phi_c(z) < 1e-300 and the asymptotic series is used.
constexpr double kAsymptoticFrom = 37.0;

// Phi_c(z) * z / phi(z) - 1 for z >= 37: the asymptotic Mills-ratio series
// sum_{k>=1} (-1)^k (2k-1)!! / z^(2k) (DLMF 7.12.1 with z -> z / sqrt 2). It is summed
// while the terms shrink; at z = 37 the eighth term is below 2e-17.
double MillsSeries(double z) {
  const double inv2 = 1.0 / (z * z);
  double term = 1.0, sum = 0.0;
  for (int k = 1; k < 40; ++k) {
    const double next = -term * (2.0 * k - 1.0) * inv2;
    if (std::fabs(next) >= std::fabs(term)) break;
    term = next;
    sum += term;
    if (std::fabs(term) < 1e-18) break;
  }
  return sum;
}

const boost::math::normal_distribution<double, StatsPolicy>& StandardNormal() {
  static const boost::math::normal_distribution<double, StatsPolicy> normal(0.0, 1.0);
  return normal;
}

}  // namespace

double LogNormalUpperTail(double z) {
  if (std::isnan(z)) return kNaN;
  if (z < kAsymptoticFrom) {
    if (z < 0) return std::log1p(-boost::math::cdf(boost::math::complement(StandardNormal(), -z)));
    return std::log(boost::math::cdf(boost::math::complement(StandardNormal(), z)));
  }
  if (std::isinf(z)) return -kInf;
  // log Phi_c(z) = -z^2/2 - log z - log(2 pi)/2 + log(1 + series).
  return -0.5 * z * z - std::log(z) - boost::math::constants::log_root_two_pi<double>() +
         std::log1p(MillsSeries(z));
}

double ZFromLogUpperTail(double log_p) {
  if (std::isnan(log_p) || log_p > 0) return kNaN;
  if (log_p == 0) return -kInf;
  if (std::isinf(log_p)) return kInf;
  if (log_p > -boost::math::constants::ln_two<double>()) {
    // p > 1/2: z = -Phi_c^-1(1 - p), with 1 - p formed without cancellation.
    return -boost::math::quantile(boost::math::complement(StandardNormal(), -std::expm1(log_p)));
  }
  if (log_p >= std::log(kSmallestDirectTail)) {
    return boost::math::quantile(boost::math::complement(StandardNormal(), std::exp(log_p)));
  }
  // Newton's method on g(z) = log Phi_c(z) - log_p, with g'(z) = -phi(z)/Phi_c(z) =
  // -z / (1 + series). Start from the fixed point of z^2/2 + log z + log(2 pi)/2 = -log_p.
  const double log_root_two_pi = boost::math::constants::log_root_two_pi<double>();
  double z = std::sqrt(-2.0 * log_p);
  for (int i = 0; i < 3; ++i) z = std::sqrt(-2.0 * (log_p + std::log(z) + log_root_two_pi));
  for (int i = 0; i < 20; ++i) {
    const double series = MillsSeries(z);
    const double g = -0.5 * z * z - std::log(z) - log_root_two_pi + std::log1p(series) - log_p;
    const double step = g * (1.0 + series) / z;
    z += step;
    if (std::fabs(step) <= 2 * kEps * z) break;
  }
  return z;
}

}  // namespace boldsum
