"""An independent numpy/scipy reconstruction of a boldsum design matrix.

Written from the statistics contract in shared DESIGN.md and the column scheme of the
naming rules, not from the C++ code. Two ways to build the task regressors:

  method="grid"  the documented discretisation, done differently: grid weights from the
                 closed-form integral of the boxcar against linear "hat" functions, and a
                 direct numpy.convolve. Agrees with boldsum to rounding (~1e-12).
  method="exact" the continuous model: the boxcar convolved with the truncated kernel in
                 closed form through scipy.stats.gamma.cdf (the integral of the gamma
                 density), with the kernel normalised by its continuous area. Agrees with
                 boldsum to the grid's approximation error.

Kernels (support 0..32 s, common practice):
  double_gamma: gamma.pdf(t, 6) - gamma.pdf(t, 16) / 6  (shape, scale 1 s; common practice)
  glover: (t/d1)^a1 exp(-(t-d1)/b1) - c (t/d2)^a2 exp(-(t-d2)/b2), d_i = a_i b_i,
          a1=6, a2=12, b1=b2=0.9, c=0.35 (Glover 1999, NeuroImage 9:416-429; values recalled
          from memory). Each lobe equals a multiple of gamma.pdf(t, a+1, scale=b).
  time derivative: d/dt of the kernel; dispersion derivative: forward difference of the
  kernel in the first lobe's scale, step 0.01 s; both with the main kernel's normalisation.

Usage:
  names, x = build_design(tr=2.0, slice_reference=0.5, n_volumes=100,
                          conditions=[("melody", [(10.0, 4.0, 1.0), ...]), ...],
                          hrf="double_gamma", derivatives="none",
                          drift=("cosine", 128.0), confounds=[("shift_x", array)],
                          censor=(signal_array, 0.5))
"""
import math

import numpy as np
from scipy import fft as sfft
from scipy import special, stats
from numpy.polynomial import legendre

SUPPORT_S = 32.0
DISPERSION_STEP_S = 0.01


def _lobes(shape, first_scale_shift=0.0):
    """(weight, gamma shape, gamma scale) per lobe; lobe = weight * gamma.pdf(t, k, scale)."""
    if shape == "double_gamma":
        return [(1.0, 6.0, 1.0 + first_scale_shift), (-1.0 / 6.0, 16.0, 1.0)]
    if shape == "glover":
        lobes = []
        for c, a, b in ((1.0, 6.0, 0.9 + first_scale_shift), (-0.35, 12.0, 0.9)):
            d = a * b
            # (t/d)^a e^{-(t-d)/b} = m * gamma.pdf(t, a+1, scale=b), m = Gamma(a+1) b^(a+1) d^-a e^a
            m = math.exp(special.gammaln(a + 1.0) + (a + 1.0) * math.log(b) - a * math.log(d) + a)
            lobes.append((c * m, a + 1.0, b))
        return lobes
    raise ValueError("unknown HRF shape " + shape)


def _in_support(t):
    t = np.asarray(t, dtype=float)
    return (t > 0.0) & (t <= SUPPORT_S)


def raw_hrf(shape, t, first_scale_shift=0.0):
    t = np.asarray(t, dtype=float)
    value = sum(w * stats.gamma.pdf(t, k, scale=s) for w, k, s in _lobes(shape, first_scale_shift))
    return np.where(_in_support(t), value, 0.0)


def raw_hrf_slope(shape, t):
    """Analytic d/dt: pdf' = pdf * ((k-1)/t - 1/scale)."""
    t = np.asarray(t, dtype=float)
    safe = np.where(t > 0.0, t, 1.0)
    value = sum(w * stats.gamma.pdf(safe, k, scale=s) * ((k - 1.0) / safe - 1.0 / s)
                for w, k, s in _lobes(shape))
    return np.where(_in_support(t), value, 0.0)


def raw_hrf_integral(shape, x, first_scale_shift=0.0):
    """Integral of the truncated kernel over [0, x] (gamma.cdf is the density's integral)."""
    x = np.clip(np.asarray(x, dtype=float), 0.0, SUPPORT_S)
    return sum(w * stats.gamma.cdf(x, k, scale=s) for w, k, s in _lobes(shape, first_scale_shift))


def fine_grid(tr):
    """Grid points per TR: max(16, ceil(TR / 0.05 s)); spacing dt = TR / that."""
    per_volume = max(16, int(math.ceil(tr / 0.05 * (1.0 - 1e-12))))
    return per_volume, tr / per_volume


def sampled_kernels(shape, dt):
    last = int(math.floor(SUPPORT_S / dt * (1.0 + 1e-9)))
    t = np.arange(last + 1) * dt
    raw = raw_hrf(shape, t)
    total = raw.sum()
    dispersion = (raw_hrf(shape, t, DISPERSION_STEP_S) - raw) / DISPERSION_STEP_S
    return raw / total, raw_hrf_slope(shape, t) / total, dispersion / total


def _hat_integral(u):
    """Integral of the hat max(0, 1 - |v|) over v < u."""
    u = np.asarray(u, dtype=float)
    return np.select([u <= -1.0, u <= 0.0, u <= 1.0],
                     [0.0, 0.5 * (u + 1.0) ** 2, 1.0 - 0.5 * (1.0 - u) ** 2], default=1.0)


def grid_weights(events, tr, slice_reference, first, last):
    """Weights on grid points first..last: each boxcar integrated against the hat functions."""
    _, dt = fine_grid(tr)
    j = np.arange(first, last + 1, dtype=float)
    w = np.zeros(j.size)
    for onset, duration, amplitude in events:
        xa = (onset - slice_reference * tr) / dt
        if duration == 0.0:
            w += amplitude / dt * np.maximum(0.0, 1.0 - np.abs(xa - j))
        else:
            xb = (onset + duration - slice_reference * tr) / dt
            w += amplitude * (_hat_integral(xb - j) - _hat_integral(xa - j))
    return w


def convolved_grid(events, shape, derivatives, tr, slice_reference, n_volumes):
    per_volume, dt = fine_grid(tr)
    main, slope, dispersion = sampled_kernels(shape, dt)
    first = -(main.size + 1)
    last = (n_volumes - 1) * per_volume
    w = grid_weights(events, tr, slice_reference, first, last)
    rows = np.arange(n_volumes) * per_volume - first
    kernels = [main] + ([slope] if derivatives != "none" else []) + (
        [dispersion] if derivatives == "time_dispersion" else [])
    return np.column_stack([np.convolve(w, k)[rows] for k in kernels])


def convolved_exact(events, shape, derivatives, tr, slice_reference, n_volumes):
    t = (np.arange(n_volumes) + slice_reference) * tr
    area = raw_hrf_integral(shape, SUPPORT_S)
    cols = [np.zeros(n_volumes) for _ in range(1 + (derivatives != "none") +
                                               (derivatives == "time_dispersion"))]
    for onset, duration, amplitude in events:
        if duration == 0.0:
            parts = [raw_hrf(shape, t - onset), raw_hrf_slope(shape, t - onset),
                     (raw_hrf(shape, t - onset, DISPERSION_STEP_S) - raw_hrf(shape, t - onset))
                     / DISPERSION_STEP_S]
        else:
            end = onset + duration

            def block(shift):
                return (raw_hrf_integral(shape, t - onset, shift)
                        - raw_hrf_integral(shape, t - end, shift))
            # The time kernel is h' on (0, 32] and 0 elsewhere (no step at 32 s), so its
            # integral over the block is h at the lags clipped to [0, 32].
            def clipped(lag):
                return raw_hrf(shape, np.clip(lag, 0.0, SUPPORT_S))
            parts = [block(0.0), clipped(t - onset) - clipped(t - end),
                     (block(DISPERSION_STEP_S) - block(0.0)) / DISPERSION_STEP_S]
        for i in range(len(cols)):
            cols[i] += amplitude * parts[i] / area
    return np.column_stack(cols)


def fir_columns(events, tr, slice_reference, n_volumes, bin_s=0.0, bins=0):
    width = bin_s if bin_s > 0 else tr
    count = bins if bins > 0 else max(1, int(math.ceil(24.0 / width - 1e-9)))
    x = np.zeros((n_volumes, count))
    t = (np.arange(n_volumes) + slice_reference) * tr
    for onset, _duration, amplitude in events:
        b = np.floor((t - onset) / width + 1e-9)
        for k in range(n_volumes):
            if 0 <= b[k] < count:
                x[k, int(b[k])] += amplitude
    return x


def cosine_drift(n_volumes, tr, cutoff_s):
    """DCT-II basis from scipy.fft.dct (norm='ortho'), rows 1..J, J capped at N-1."""
    count = min(int(math.floor(2.0 * n_volumes * tr / cutoff_s)), n_volumes - 1)
    basis = sfft.dct(np.eye(n_volumes), type=2, norm="ortho", axis=0)
    return basis[1:count + 1, :].T


def legendre_drift(n_volumes, degree):
    degree = min(degree, n_volumes - 1)
    x = np.linspace(-1.0, 1.0, n_volumes) if n_volumes > 1 else np.zeros(1)
    return np.column_stack([legendre.legval(x, [0.0] * d + [1.0]) for d in range(1, degree + 1)]
                           ) if degree > 0 else np.zeros((n_volumes, 0))


def build_design(tr, slice_reference, n_volumes, conditions, hrf="double_gamma",
                 derivatives="none", fir_bin=0.0, fir_bins=0, drift=("cosine", 128.0),
                 confounds=(), censor=None, method="grid"):
    """Returns (column names, N x p numpy array).

    conditions: ordered [(name, [(onset, duration, amplitude), ...]), ...]
    confounds: ordered [(name, values with NaN for n/a), ...]; NaN -> mean of the rest.
    censor: (signal with NaN for n/a, above) or None; NaN reads as not censored.
    drift: ("cosine", cutoff_s) | ("polynomial", degree) | ("none",)
    """
    names, cols = [], []
    for name, events in conditions:
        if hrf == "fir":
            x = fir_columns(events, tr, slice_reference, n_volumes, fir_bin, fir_bins)
            names += ["%s_bin%d" % (name, b + 1) for b in range(x.shape[1])]
        else:
            build = convolved_grid if method == "grid" else convolved_exact
            x = build(events, hrf, derivatives, tr, slice_reference, n_volumes)
            names += [name] + {"none": [], "time": [name + "_dt"],
                               "time_dispersion": [name + "_dt", name + "_disp"]}[derivatives]
        cols.append(x)
    for name, values in confounds:
        values = np.asarray(values, dtype=float)
        filled = np.where(np.isnan(values), np.nanmean(values), values)
        names.append(name)
        cols.append(filled[:, None])
    if censor is not None:
        signal, above = censor
        signal = np.nan_to_num(np.asarray(signal, dtype=float), nan=0.0)
        for k in np.flatnonzero(signal > above):
            indicator = np.zeros((n_volumes, 1))
            indicator[k] = 1.0
            names.append("censor_%d" % k)
            cols.append(indicator)
    if drift[0] == "cosine":
        d = cosine_drift(n_volumes, tr, drift[1])
        names += ["drift_cos%d" % (j + 1) for j in range(d.shape[1])]
        cols.append(d)
    elif drift[0] == "polynomial":
        d = legendre_drift(n_volumes, drift[1])
        names += ["drift_poly%d" % (j + 1) for j in range(d.shape[1])]
        cols.append(d)
    names.append("intercept")
    cols.append(np.ones((n_volumes, 1)))
    return names, np.column_stack(cols)
