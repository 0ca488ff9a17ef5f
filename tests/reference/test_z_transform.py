#!/usr/bin/python3
"""t -> z and F -> z (boldsum_stats, through tests/tools/stats_probe) against outside
references:

* mpmath (Debian python3-mpmath) at mp.dps = 50 everywhere, including far beyond where
  double precision underflows: the t and F upper tails from mpmath.betainc(...,
  regularized=True) with the identities P(T > t) = I_{dof/(dof+t^2)}(dof/2, 1/2) / 2 and
  P(F > f) = I_{d2/(d2+d1 f)}(d2/2, d1/2) (Abramowitz & Stegun 26.7.1 and 26.6.2), and
  the inverse normal upper tail by mpmath.findroot on log(mpmath.erfc(z/sqrt 2)/2).
  A subset is recomputed at mp.dps = 80 to show the 50-digit values are settled.
* scipy.stats (Debian python3-scipy): z = norm.isf(t.sf(t, dof)) and norm.isf(f.sf(...))
  where the tail probability is representable (> 1e-300).

Prints the largest relative errors found and fails when one exceeds its tolerance.
"""
import math
import os
import subprocess
import sys

import mpmath as mp
from mpmath.libmp import NoConvergence
import numpy as np
from scipy import stats

mp.mp.dps = 50

PROBE = os.path.join(os.environ.get("BOLDSUM_PROBE_DIR", "build/tests"), "stats_probe")

# Tolerances. z from t: a few roundings in p (relative) give a z error of ~eps
# relative; 1e-14 (45 eps) leaves room for the continued fraction of the far tail,
# whose per-step roundings add up in log space.
TOL_Z_MPMATH = 1e-14
# log P(T > t): absolute error of a few eps per step, relative to |log P| >= 0.69.
TOL_LOGP_MPMATH = 1e-14
# F: Boost's ibeta loses accuracy as its parameters grow: measured 1.5e-14 relative in
# P(F > f) at dof2 = 1e6 (f = 1, dof1 = 20), ~1e-15 for dof2 <= 1e4. Near z = 0 (F near
# its median) z comes from p ~ 1/2 whose absolute error is ~eps, so the z error is
# judged against max(|z|, 1) there.
TOL_F_MPMATH = 5e-14
# scipy: norm.isf(t.sf(t)) forms p ~ 1/2 with absolute error eps near z = 0, so it is
# judged against max(|z|, 1), at the 1e-12 the task states for scipy, beyond scipy's own
# distance from the mpmath value: scipy 1.10's f.sf (cephes incbet) is off by up to
# 4e-10 from mpmath at dof2 = 1e6 and 1e-11 at dof2 = 1e4 (measured; printed below).
TOL_Z_SCIPY = 1e-12


def run_probe(lines):
    out = subprocess.run([PROBE], input="\n".join(lines) + "\n", capture_output=True,
                         text=True, check=True).stdout.strip().split("\n")
    assert len(out) == len(lines), (len(out), len(lines))
    return [[float(v) for v in row.split()] for row in out]


def z_from_log_tail(log_p):
    """mpmath: the z >= 0 with log(erfc(z/sqrt 2)/2) = log_p, for log_p <= log(1/2)."""
    log_p = mp.mpf(log_p)
    assert log_p <= mp.log(mp.mpf("0.5"))
    if log_p == mp.log(mp.mpf("0.5")):
        return mp.mpf(0)
    if log_p > mp.log(mp.mpf("0.2")):
        start = mp.mpf("0.5")
    else:
        start = max(mp.sqrt(-2 * log_p - mp.log(-2 * log_p) - mp.log(2 * mp.pi)), mp.mpf(1))
    return mp.findroot(lambda z: mp.log(mp.erfc(z / mp.sqrt(2)) / 2) - log_p, start)


def z_from_log_tails(log_upper, log_lower):
    """mpmath: z with P(Z > z) = exp(log_upper) = 1 - exp(log_lower), from the smaller
    tail (Phi_c(-z) = 1 - Phi_c(z))."""
    if log_upper <= log_lower:
        return z_from_log_tail(log_upper)
    return -z_from_log_tail(log_lower)


def log_integral_from(kernel, a, upper=True):
    """mpmath: log of the integral of exp(kernel(s)) over s > a (or 0 < s < a), by
    mpmath.quad (tanh-sinh) on exp(kernel(s) - kernel(a)), with breakpoints at multiples
    of the decay length 1 / |kernel'(a)| so that the peak at a is resolved."""
    if not upper:
        return kernel(a) + mp.log(mp.quad(lambda s: mp.exp(kernel(s) - kernel(a)), [0, a / 2, a]))
    scale = 1 / abs(mp.diff(kernel, a))
    points = [a + k * scale for k in (0, 1, 10, 100)] + [mp.inf]
    return kernel(a) + mp.log(mp.quad(lambda s: mp.exp(kernel(s) - kernel(a)), points))


def log_tail_t(a, dof, method="auto"):
    """mpmath: log P(T > a) for a >= 0, Student's t with dof degrees of freedom.
    Central region (a < 3): 1/2 - I_y(1/2, dof/2) / 2 with y = a^2 / (dof + a^2); tail:
    I_x(dof/2, 1/2) / 2 with x = 1 - y (A&S 26.7.1). mpmath's betainc (its 2F1) is slow
    or gives up for x near 1 with a large first parameter, so the far tail at dof >= 1e5
    integrates the t density instead."""
    a, dof = mp.mpf(a), mp.mpf(dof)
    if a == 0:
        return mp.log(mp.mpf("0.5"))
    if method == "auto" and a < 3:  # P(T > 3) > 0.001 for every dof: no cancellation
        y = a * a / (dof + a * a)
        return mp.log(mp.mpf("0.5") - mp.betainc(mp.mpf("0.5"), dof / 2, 0, y, regularized=True) / 2)
    if method == "betainc" or (method == "auto" and dof < 1e5):
        return mp.log(mp.betainc(dof / 2, mp.mpf("0.5"), 0, dof / (dof + a * a),
                                 regularized=True) / 2)
    log_c = mp.loggamma((dof + 1) / 2) - mp.loggamma(dof / 2) - mp.log(dof * mp.pi) / 2
    return log_c + log_integral_from(lambda s: -(dof + 1) / 2 * mp.log1p(s * s / dof), a)


def log_tails_f(f, d1, d2, method="auto"):
    """mpmath: (log P(F > f), log P(F < f)) for the F distribution with (d1, d2) dof:
    I_x(d2/2, d1/2) and I_y(d1/2, d2/2) with x = d2 / (d2 + d1 f), y = 1 - x (A&S
    26.6.2), each computed directly so that neither loses digits to a subtraction. As for
    t, d2 >= 1e5 integrates the F density instead of calling betainc."""
    f, d1, d2 = mp.mpf(f), mp.mpf(d1), mp.mpf(d2)
    if method == "betainc" or (method == "auto" and d2 < 1e5):
        upper = mp.betainc(d2 / 2, d1 / 2, 0, d2 / (d2 + d1 * f), regularized=True)
        lower = mp.betainc(d1 / 2, d2 / 2, 0, d1 * f / (d2 + d1 * f), regularized=True)
        sums_to_one.add(float(abs(upper + lower - 1)), f"f={f} d1={d1} d2={d2}")
        return mp.log(upper), mp.log(lower)
    log_c = (d1 / 2) * mp.log(d1) + (d2 / 2) * mp.log(d2) - mp.log(mp.beta(d1 / 2, d2 / 2))
    kernel = lambda s: (d1 / 2 - 1) * mp.log(s) - (d1 + d2) / 2 * mp.log(d2 + d1 * s)
    upper = log_c + log_integral_from(kernel, f)
    if upper <= mp.log(mp.mpf("0.5")):
        return upper, mp.log1p(-mp.exp(upper))
    lower = log_c + log_integral_from(kernel, f, upper=False)
    return mp.log1p(-mp.exp(lower)), lower


def rel_err(value, reference, floor=0.0):
    """|value - reference| / max(|reference|, floor); a zero reference demands zero."""
    reference = float(reference) if not isinstance(reference, float) else reference
    if reference == 0 and floor == 0:
        return abs(value)
    if math.isinf(reference) or math.isinf(value):
        return 0.0 if value == reference else math.inf
    return abs(value - reference) / max(abs(reference), floor, 1e-300)


class Worst:
    def __init__(self, name, tolerance):
        self.name, self.tolerance, self.value, self.where, self.count = name, tolerance, -1.0, "", 0

    def add(self, err, where):
        self.count += 1
        if not err <= self.value:  # NaN counts as worst
            self.value, self.where = err, where

    def report(self):
        ok = self.value <= self.tolerance
        print(f"{'ok ' if ok else 'FAIL'} {self.name}: {self.count} points, max rel err "
              f"{self.value:.3g} (tolerance {self.tolerance:g}) at {self.where}")
        return ok


# Reference self-check: the two F tails from betainc, computed independently, sum to 1.
sums_to_one = Worst("mpmath F tails sum to 1 (reference check)", 1e-40)


def main():
    t_values = [0.0, 1e-12, 1e-6, 0.1, 0.5, 1.0, 2.0, 3.0, 5.0, 10.0, 20.0, 37.0, 40.0,
                50.0, 100.0, 200.0, 300.0, 500.0, 700.0, 1000.0]
    t_dofs = [1.0, 1.5, 2.0, 3.7, 5.0, 10.0, 30.0, 200.0, 1e3, 1e4, 1e6]
    t_cases = [(s * t, d) for t in t_values for d in t_dofs
               for s in ((1, -1) if t in (0.5, 3.0, 1000.0) else (1,))]
    # Very large dof, beyond any fMRI design, where a continued fraction for the tail
    # would cancel: a smaller grid (the mpmath reference integrates the density).
    t_cases += [(t, d) for t in (0.5, 3.0, 37.0, 40.0, 100.0, 1000.0) for d in (1e8, 1e10, 1e12, 1e15)]
    # The body, which ZFromT evaluates in double precision, more densely at the dofs of
    # whole-brain runs (N - p for N = 300 and 1200), on both sides of t = 1 where the
    # central and upper-tail formulas meet.
    t_cases += [(s * t, d) for t in (0.05, 0.3, 0.7, 0.95, 1.05, 1.5, 2.5, 4.0, 6.0, 8.0)
                for d in (20.0, 276.0, 1170.0) for s in (1, -1)]
    f_values = [1e-8, 1e-3, 0.1, 0.5, 1.0, 2.0, 5.0, 10.0, 100.0, 1e3, 1e4, 1e5, 1e6]
    f_dofs = [(d1, d2) for d1 in (1, 2, 3, 5, 10, 20) for d2 in (1.0, 2.5, 10.0, 30.0, 200.0, 1e4)]
    f_cases = [(f, d1, d2) for f in f_values for (d1, d2) in f_dofs]
    # dof2 = 1e6 needs the slower integral reference: a smaller grid.
    f_cases += [(f, d1, 1e6) for f in (1e-3, 0.5, 1.0, 10.0, 1e3, 1e6) for d1 in (1, 5, 20)]
    # The double-precision body of ZFromF (dof1 <= 3) and the promoted path just above it.
    f_cases += [(f, d1, d2) for f in (0.05, 0.4, 0.9, 1.3, 3.0, 8.0, 30.0)
                for d1 in (1, 2, 2.5, 3, 4) for d2 in (276.0, 1170.0, 4680.0)]
    # Lower tail below 1e-300 (f^(d1/2) underflows): z far below -37.
    f_cases += [(f, d1, d2) for f in (1e-40, 1e-100) for d1 in (10, 20) for d2 in (2.5, 200.0)]
    logbeta_cases = [(0.5, 0.5), (100.0, 0.5), (5e5, 0.5), (5e5, 10.0), (300.0, 400.0),
                     (1e4, 1e4), (1e6, 20.0), (12.5, 3e5), (700.0, 800.0), (10.0, 1e4)]
    normal_cases = [-5.0, 0.0, 1.0, 10.0, 36.9, 37.0, 37.1, 40.0, 100.0, 1e3, 1e5]
    zlog_cases = [-1e-20, -0.1, math.log(0.5), -1.0, -100.0, -690.0, -691.0, -700.0,
                  -1e4, -1e6, -1e10]

    lines = [f"t {t!r} {d!r}" for t, d in t_cases] + [f"f {f!r} {a!r} {b!r}" for f, a, b in f_cases]
    lines += [f"logbeta {a!r} {b!r}" for a, b in logbeta_cases]
    lines += [f"lognormal {z!r}" for z in normal_cases] + [f"zlog {v!r}" for v in zlog_cases]
    results = run_probe(lines)
    t_res = results[:len(t_cases)]
    f_res = results[len(t_cases):len(t_cases) + len(f_cases)]
    rest = results[len(t_cases) + len(f_cases):]

    z_t_mp = Worst("ZFromT vs mpmath", TOL_Z_MPMATH)
    lp_t_mp = Worst("LogUpperTailT vs mpmath", TOL_LOGP_MPMATH)
    z_t_sp = Worst("ZFromT vs scipy (t.sf -> norm.isf), beyond scipy's own error", TOL_Z_SCIPY)
    sp_t_own = Worst("(info) scipy t.sf -> norm.isf vs mpmath", math.inf)
    z_t_far = Worst("ZFromT vs mpmath where P < 1e-300", TOL_Z_MPMATH)
    for (t, dof), (z, lp) in zip(t_cases, t_res):
        tail = log_tail_t(abs(t), dof)  # mpmath, 50 digits
        ref_lp = tail if t >= 0 else mp.log1p(-mp.exp(tail))
        ref_z = (1 if t >= 0 else -1) * z_from_log_tail(tail)  # mpmath findroot on erfc
        where = f"t={t:g} dof={dof:g}"
        if not (math.isfinite(z) and math.isfinite(lp)):
            z_t_mp.add(math.inf, where + " (not finite)")
            continue
        z_t_mp.add(rel_err(z, ref_z), where)
        lp_t_mp.add(rel_err(lp, ref_lp), where)
        if ref_lp < math.log(1e-300):
            z_t_far.add(rel_err(z, ref_z), where)
        else:
            # scipy.stats reference: only where the tail is a representable double.
            z_sp = math.copysign(stats.norm.isf(stats.t.sf(abs(t), dof)), t)
            if np.isfinite(z_sp):
                own = rel_err(float(z_sp), ref_z, 1.0)
                sp_t_own.add(own, where)
                z_t_sp.add(max(0.0, rel_err(z, float(z_sp), 1.0) - own), where)

    z_f_mp = Worst("ZFromF vs mpmath (|z|<1 judged absolutely)", TOL_F_MPMATH)
    lp_f_mp = Worst("LogUpperTailF vs mpmath", TOL_F_MPMATH)
    z_f_sp = Worst("ZFromF vs scipy (f.sf -> norm.isf), beyond scipy's own error", TOL_Z_SCIPY)
    sp_f_own = Worst("(info) scipy f.sf -> norm.isf vs mpmath", math.inf)
    z_f_far = Worst("ZFromF vs mpmath where P < 1e-300", TOL_F_MPMATH)
    for (f, d1, d2), (z, lp) in zip(f_cases, f_res):
        ref_lp, ref_lower = log_tails_f(f, d1, d2)  # mpmath, 50 digits
        ref_z = z_from_log_tails(ref_lp, ref_lower)  # mpmath findroot on erfc
        where = f"f={f:g} d1={d1:g} d2={d2:g}"
        if not (math.isfinite(z) and math.isfinite(lp)):
            z_f_mp.add(math.inf, where + " (not finite)")
            continue
        z_f_mp.add(rel_err(z, ref_z, 1.0), where)
        # |log P| tiny near f = 0: judge log P absolutely below 1 as well.
        lp_f_mp.add(rel_err(lp, ref_lp, 1e-8), where)
        if min(ref_lp, ref_lower) < math.log(1e-300):
            z_f_far.add(rel_err(z, ref_z), where)
        else:
            p_up = stats.f.sf(f, d1, d2)  # scipy.stats reference
            z_sp = stats.norm.isf(p_up) if p_up <= 0.5 else -stats.norm.isf(stats.f.cdf(f, d1, d2))
            if np.isfinite(z_sp):
                own = rel_err(float(z_sp), ref_z, 1.0)
                sp_f_own.add(own, where)
                z_f_sp.add(max(0.0, rel_err(z, float(z_sp), 1.0) - own), where)

    lb = Worst("LogBeta vs mpmath.log(mpmath.beta) (absolute)", 1e-14)
    ln = Worst("LogNormalUpperTail vs mpmath log(erfc/2)", 1e-14)
    zl = Worst("ZFromLogUpperTail vs mpmath findroot", 1e-14)
    k = 0
    for a, b in logbeta_cases:
        lb.add(abs(rest[k][0] - float(mp.log(mp.beta(a, b)))) / max(1.0, abs(float(mp.log(mp.beta(a, b))))), f"a={a:g} b={b:g}")
        k += 1
    for z in normal_cases:
        ln.add(rel_err(rest[k][0], mp.log(mp.erfc(mp.mpf(z) / mp.sqrt(2)) / 2)), f"z={z:g}")
        k += 1
    for v in zlog_cases:
        ref = z_from_log_tails(v, mp.log1p(-mp.exp(v)))
        zl.add(rel_err(rest[k][0], ref, 1.0), f"log_p={v:g}")  # |z| < 1: absolute
        k += 1

    # The references are settled: a far-tail subset again at 80 digits, and the density
    # integral against betainc where both work.
    settled = Worst("mpmath dps 50 vs dps 80 (reference check)", 1e-40)
    for t, dof in [(1000.0, 1.0), (1000.0, 200.0), (1000.0, 1e4), (40.0, 1e6)]:
        r50 = z_from_log_tail(log_tail_t(t, dof))
        with mp.workdps(80):
            r80 = z_from_log_tail(log_tail_t(t, dof))
        settled.add(float(abs(r50 - r80) / abs(r80)), f"t={t:g} dof={dof:g}")
    for f, d1, d2 in [(1e6, 20, 1e6), (0.5, 1, 1e6)]:
        r50 = log_tails_f(f, d1, d2)
        with mp.workdps(80):
            r80 = log_tails_f(f, d1, d2)
        settled.add(float(abs(r50[0] - r80[0]) / abs(r80[0])), f"f={f:g} d1={d1} d2={d2:g}")
    methods = Worst("mpmath quad vs betainc (reference check)", 1e-40)
    for t, dof in [(40.0, 1e4), (300.0, 1e4)]:
        quad, beta = log_tail_t(t, dof, "quad"), log_tail_t(t, dof, "betainc")
        methods.add(float(abs(quad / beta - 1)), f"t={t:g} dof={dof:g}")
    for f, d1, d2 in [(10.0, 5, 1e4), (1e6, 20, 1e4), (0.1, 3, 1e4)]:
        quad, beta = log_tails_f(f, d1, d2, "quad"), log_tails_f(f, d1, d2, "betainc")
        small = 0 if beta[0] < beta[1] else 1  # the tail both compute directly
        methods.add(float(abs(quad[small] / beta[small] - 1)), f"f={f:g} d1={d1} d2={d2:g}")

    checks = [z_t_mp, z_t_far, lp_t_mp, z_t_sp, sp_t_own, z_f_mp, z_f_far, lp_f_mp, z_f_sp,
              sp_f_own, lb, ln, zl,
              settled, methods, sums_to_one]
    ok = all([c.report() for c in checks])
    # Monotone over the grid in t, per dof (the grid holds t >= 0 in increasing order).
    for dof in t_dofs:
        zs = [z for (t, d), (z, _) in zip(t_cases, t_res) if d == dof and t >= 0]
        if any(b <= a for a, b in zip(zs, zs[1:])):
            print(f"FAIL ZFromT not increasing over the grid at dof={dof:g}: {zs}")
            ok = False
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
