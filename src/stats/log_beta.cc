#include "stats/log_beta.h"

#include <boost/math/constants/constants.hpp>
#include <boost/math/quadrature/exp_sinh.hpp>
#include <boost/math/special_functions/beta.hpp>
#include <cmath>
#include <limits>

#include "stats/boost_policy.h"

namespace boldsum {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kEps = std::numeric_limits<double>::epsilon();

// Stirling correction log Gamma(x) - [(x - 1/2) log x - x + log(2 pi) / 2] for x >= 10:
// sum of B_2k / (2k (2k - 1) x^(2k - 1)) (DLMF 5.11.1). Eight terms leave < 1e-17 at
// x = 10 (the ninth term is 3617/122400/x^15 = 3e-17). Coefficients recalled from
// memory; LogBeta is checked against mpmath in tests/reference/test_z_transform.py.
double StirlingCorrection(double x) {
  static const double kCoefficients[] = {1.0 / 12,     -1.0 / 360,        1.0 / 1260,
                                         -1.0 / 1680,  1.0 / 1188,        -691.0 / 360360,
                                         1.0 / 156,    -3617.0 / 122400};
  const double inv2 = 1.0 / (x * x);
  double sum = 0.0;
  for (int k = 7; k >= 0; --k) sum = sum * inv2 + kCoefficients[k];
  return sum / x;
}

// log I_x(a, b) in the tail beyond the mode of the beta density, as an integral with
// an integrand of order 1. Substituting s = 1 / (1 + rho) in the integral of the beta
// density (DLMF 8.17.1) gives
//   I_x(a, b) = B(a, b)^-1 * integral_r^inf rho^(b-1) (1 + rho)^-(a+b) d rho,
// r = y / x, and with rho = r (1 + v / kappa), kappa = (a + b) y - (b - 1) > 0,
//   log I = a log x + b log y - log B(a, b) - log kappa + log J,
//   J = integral_0^inf exp((b-1) log1p(v/kappa) - (a+b) log1p(y v/kappa)) dv.
// The exponent is 0 at v = 0, has slope -1 there and decreases strictly for v > 0 when
// kappa > 0, so J is of order 1 and the double-exponential (exp-sinh) rule integrates
// it to ~1e-16 relative with ~300 evaluations, for any a and b: unlike the classical
// continued fraction (DLMF 8.17.22), no step cancels when x is close to 1 (t with
// dof ~1e15, where the fraction lost 8 digits).
double LogBetaTailIntegral(double a, double b, const BetaArgument& arg, double kappa) {
  // One integrator per thread: Boost 1.74's exp_sinh refines its abscissas lazily.
  thread_local boost::math::quadrature::exp_sinh<double> integrator;
  const double y = arg.y;
  const auto integrand = [a, b, y, kappa](double v) {
    return std::exp((b - 1.0) * std::log1p(v / kappa) - (a + b) * std::log1p(y * v / kappa));
  };
  const double j = integrator.integrate(integrand, 0.0, std::numeric_limits<double>::infinity(),
                                        64 * kEps);
  return a * arg.log_x + b * arg.log_y - LogBeta(a, b) - std::log(kappa) + std::log(j);
}

}  // namespace

double LogBeta(double a, double b) {
  if (!(a > 0) || !(b > 0)) return kNaN;
  const double value = boost::math::beta(a, b, StatsPolicy());
  if (value > 1e-300 && value < 1e300) return std::log(value);
  const double small = std::fmin(a, b), large = std::fmax(a, b);
  if (small >= 10.0) {
    // Stirling's formula (DLMF 5.11.1) for each gamma, rearranged so that the large
    // logarithms cancel analytically: with s = a + b,
    // log B = log(2 pi)/2 - log(s)/2 + (a - 1/2) log(a/s) + (b - 1/2) log(b/s) + corr.
    const double s = a + b;
    return boost::math::constants::log_root_two_pi<double>() - 0.5 * std::log(s) -
           (large - 0.5) * std::log1p(small / large) + (small - 0.5) * std::log(small / s) +
           StirlingCorrection(a) + StirlingCorrection(b) - StirlingCorrection(s);
  }
  // Only reached for absurd arguments (one below 10, the other beyond ~1e30).
  return std::lgamma(a) + std::lgamma(b) - std::lgamma(a + b);
}

BetaArgument BetaArgumentFromRatio(double r, double log_r) {
  BetaArgument arg;
  if (std::isinf(r)) {
    arg.x = 0.0;
    arg.y = 1.0;
    arg.log_x = -log_r;  // log1p(r) = log r + log1p(1/r), and 1/r < 1e-308 here
    arg.log_y = 0.0;
    return arg;
  }
  arg.x = 1.0 / (1.0 + r);
  arg.y = r / (1.0 + r);
  arg.log_x = -std::log1p(r);
  // log y = log r - log1p(r); below r = 1 from log_r, which stays finite when r
  // underflows (f ~ 1e-320 in an F lower tail).
  arg.log_y = r >= 1.0 ? -std::log1p(1.0 / r) : log_r - std::log1p(r);
  return arg;
}

double LogRegularizedBeta(double a, double b, const BetaArgument& arg) {
  if (!(a > 0) || !(b > 0)) return kNaN;
  // x itself may underflow to 0 while log x is finite (r = t^2 / dof overflowing).
  if (arg.log_x == -std::numeric_limits<double>::infinity()) return arg.log_x;
  if (arg.log_y == -std::numeric_limits<double>::infinity()) return 0.0;
  const double kappa = (a + b) * arg.y - (b - 1.0);
  if (kappa >= 1.0) return LogBetaTailIntegral(a, b, arg, kappa);
  // At or before the mode the value is not small: Boost.Math, from whichever of x and
  // y keeps full precision (I_x(a, b) = 1 - I_y(b, a), DLMF 8.17.4).
  const double value = arg.x <= 0.5 ? boost::math::ibeta(a, b, arg.x, StatsPolicy())
                                    : boost::math::ibetac(b, a, arg.y, StatsPolicy());
  return std::log(value);
}

}  // namespace boldsum
