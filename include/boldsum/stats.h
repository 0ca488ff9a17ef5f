// Distributions, and the conversion of t and F statistics to z through the upper tail.
// Every function is thread-safe and never throws: a NaN argument, dof <= 0, f < 0 or
// log_p > 0 gives NaN. Accuracy (measured against mpmath at 50 digits in
// tests/reference/test_z_transform.py): log P to ~5e-16 relative for t and z to ~1e-15
// (the body, tail probability >= 1e-20, is evaluated in double precision), to ~1.5e-14
// for F (Boost.Math's incomplete beta at dof2 ~1e6); near z = 0 the error of ZFromF is
// absolute. Beyond dof = 1/eps (4.5e15) t is treated as normal, as Boost does.
#pragma once

namespace boldsum {

// Natural log of the upper-tail probability P(T > t) for Student's t with `dof`
// degrees of freedom (dof > 0, not necessarily integer). Finite for every finite t.
double LogUpperTailT(double t, double dof);

// log P(F > f) for the F distribution with (dof1, dof2) degrees of freedom; f >= 0.
double LogUpperTailF(double f, double dof1, double dof2);

// The z whose standard-normal upper tail equals the log-probability `log_p`
// (log_p <= 0). Accurate where exp(log_p) underflows (asymptotic expansion).
double ZFromLogUpperTail(double log_p);

// z with P(Z > z) = P(T > t): finite, monotone and odd in t for |t| up to at least
// 1e3 and any dof >= 1. NaN in, NaN out.
double ZFromT(double t, double dof);

// z with P(Z > z) = P(F > f); f >= 0. NaN in, NaN out.
double ZFromF(double f, double dof1, double dof2);

}  // namespace boldsum
