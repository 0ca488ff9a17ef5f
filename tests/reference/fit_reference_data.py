"""Synthetic runs for the fit reference tests: a block design convolved with a
difference-of-gammas HRF (scipy), cosine drift and an intercept; AR(1) noise."""
import os
import subprocess
import tempfile

import numpy as np
import scipy.signal
import scipy.stats


def hrf(dt):
    # Difference of two gamma densities, shapes 6 and 16, scale 1 s, the second weighted
    # 1/6, support 0-32 s, unit area (the project's default kernel; common practice).
    t = np.arange(0.0, 32.0, dt)
    h = scipy.stats.gamma.pdf(t, 6) - scipy.stats.gamma.pdf(t, 16) / 6.0
    return h / (h.sum() * dt)


def block_design(n, tr, cutoff=128.0, n_conditions=2, seed=0):
    """N x p design: n_conditions block regressors, cosine drift, intercept."""
    rng = np.random.default_rng(seed)
    dt = tr / 16.0
    grid = np.arange(0.0, n * tr, dt)
    kernel = hrf(dt)
    cols = []
    for c in range(n_conditions):
        box = np.zeros_like(grid)
        onset = 10.0 + 7.0 * c
        while onset < n * tr - 20:
            box[(grid >= onset) & (grid < onset + 15.0)] = 1.0
            onset += 30.0 * n_conditions + rng.uniform(0, 6)
        conv = scipy.signal.fftconvolve(box, kernel)[: grid.size] * dt
        times = (np.arange(n) + 0.5) * tr
        cols.append(np.interp(times, grid, conv))
    k = np.arange(n)
    for j in range(1, int(np.floor(2 * n * tr / cutoff)) + 1):
        cols.append(np.cos(np.pi * j * (k + 0.5) / n))
    cols.append(np.ones(n))
    return np.column_stack(cols)


def ar1_noise(n, rhos, rng):
    """N x V stationary AR(1) series with unit innovation variance."""
    v = len(rhos)
    e = np.empty((n, v))
    e[0] = rng.standard_normal(v) / np.sqrt(1 - np.asarray(rhos) ** 2)
    for k in range(1, n):
        e[k] = np.asarray(rhos) * e[k - 1] + rng.standard_normal(v)
    return e


def as_float32(y):
    """The data as the fit sees it (BlockSource blocks are float32)."""
    return np.asarray(y, dtype=np.float32).astype(np.float64)


def write_matrix(path, m):
    np.savetxt(path, np.atleast_2d(m), fmt="%.17g", delimiter="\t")


def run_probe(x, y, c, noise="ar1", threads=1, block=64):
    """Runs fit_probe and returns its records as a dict of numpy arrays."""
    probe = os.path.join(os.environ.get("BOLDSUM_PROBE_DIR", "."), "fit_probe")
    with tempfile.TemporaryDirectory() as tmp:
        paths = [os.path.join(tmp, n) for n in ("x.tsv", "y.tsv", "c.tsv")]
        for path, m in zip(paths, (x, y, c)):
            write_matrix(path, m)
        out = subprocess.run([probe, *paths, "--noise", noise, "--threads", str(threads),
                              "--block", str(block)], check=True, capture_output=True,
                             text=True).stdout
    rec = {}
    for line in out.splitlines():
        key, *vals = line.split("\t")
        rec[key] = np.array([float(v) for v in vals])
    return rec
