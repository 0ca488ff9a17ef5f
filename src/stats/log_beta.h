// Logarithms of the beta function and of the regularised incomplete beta function,
// for arguments where the values themselves underflow.
#pragma once

namespace boldsum {

// log B(a, b) for a, b > 0, accurate to a few eps in absolute terms even when B
// underflows (Stirling series for large arguments). NaN for a or b <= 0.
double LogBeta(double a, double b);

// The argument of I_x(a, b) in every form the log-space evaluation needs. Callers build
// it from the ratio r = y / x so that y = 1 - x keeps full precision when x is near 1.
struct BetaArgument {
  double x = 0, y = 1;          // x + y = 1
  double log_x = 0, log_y = 0;  // log_x may be -inf (x = 0)
};

// x = 1 / (1 + r), y = r / (1 + r) for r in [0, inf]. `log_r` must be log(r); it is
// used where r overflows or underflows (pass it separately so that r = t^2 / dof may
// overflow while log r = 2 log(t / sqrt(dof)) does not).
BetaArgument BetaArgumentFromRatio(double r, double log_r);

// log I_x(a, b), the regularised incomplete beta function, for a, b > 0. Made for the
// far tail, where I underflows (I < 1e-300): there it integrates the beta density past
// x in a scaled form (see log_beta.cc), accurate to a few eps relative to log I for any
// a and b. Before the tail (kappa = (a + b) y - (b - 1) < 1, near or below the mode)
// it returns log of Boost.Math's value.
double LogRegularizedBeta(double a, double b, const BetaArgument& arg);

}  // namespace boldsum
