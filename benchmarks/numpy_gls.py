#!/usr/bin/python3
"""The first-level GLS of one run written plainly in numpy: the reference that
fit_benchmark.py times against boldsum's compute and checks it against.

Per voxel (exact, no binning of rho):
1. OLS with the pseudo-inverse of X; residuals e.
2. AR(1) from e, bias-corrected as in Worsley et al. (2002, NeuroImage 15:1-15): with
   R = I - X X+ and D0 = I, D1 = L + L' (L the lag-1 shift), solve
   [tr(R Dj R Dk)]_jk (g0, g1)' = (e'e, e'D1 e)' and take rho = g1 / g0, clamped to
   [-0.99, 0.99] (the sign of g1 times 0.99 when g0 <= 0).
3. GLS at that rho with Prais-Winsten whitening (Prais & Winsten 1954): row 0 of the
   whitened series is sqrt(1 - rho^2) y_0, row k is y_k - rho y_{k-1}; the same for each
   column of X. beta solves (WX)'WX beta = (WX)'Wy; sigma2 = |Wy - WX beta|^2 / (N - rank X).
4. Contrasts: effect C beta, covariance sigma2 C ((WX)'WX)^-1 C', t = effect / sd (one
   row) or F = effect' cov^-1 effect / q, and z through the upper tail (scipy.special).

Two vectorisations of step 3, both exact per voxel:
  "whiten"    whitens X and y for a chunk of voxels at once (a V x N x p array) and forms
              the normal equations with batched matmul: Prais-Winsten as written.
  "precision" uses the tridiagonal AR(1) precision: (WX)'WX = (1 + rho^2) X'X
              - rho X'D1 X - rho^2 (x_0 x_0' + x_{N-1} x_{N-1}'), and likewise for (WX)'Wy
              and (Wy)'Wy, so the data enter only through GEMMs (a numpy user who knows
              the AR(1) precision matrix would write this).

Command line (used by fit_benchmark.py):
  numpy_gls.py --design design.tsv --contrasts contrasts.tsv --dump DIR [--method M]
reads DIR/y.f32 (voxel-major, N values each) written by fit_throughput, fits it, times the
fit (best of --repeat), compares with boldsum's results dumped beside it and prints one
JSON object.
"""
import argparse
import ctypes
import json
import os
import sys
import time

import numpy as np
import scipy.special


def read_design(path):
    with open(path) as f:
        names = f.readline().rstrip("\n").split("\t")
    x = np.loadtxt(path, delimiter="\t", skiprows=1, ndmin=2)
    return names, x


def read_contrasts(path, p):
    """Lines: name, t or F, q, then q*p weights (the format fit_throughput reads)."""
    out = []
    with open(path) as f:
        for line in f:
            fields = line.split()
            if not fields:
                continue
            q = int(fields[2])
            weights = np.array([float(v) for v in fields[3:]]).reshape(q, p)
            out.append((fields[0], fields[1] == "F", weights))
    return out


class Design:
    """Everything that depends on X only (computed once per run)."""

    def __init__(self, x):
        self.x = x
        n, self.p = x.shape
        self.n = n
        self.rank = np.linalg.matrix_rank(x)
        if self.rank < self.p:
            raise ValueError("this reference needs a full-rank design")
        self.dof = n - self.rank
        self.pinv = np.linalg.pinv(x)
        # Worsley et al. (2002): m_jk = tr(R Dj R Dk), D0 = I, D1 = L + L'.
        r = np.eye(n) - x @ self.pinv
        d1 = np.eye(n, k=1) + np.eye(n, k=-1)
        rr = r @ r
        rd = r @ d1
        m = np.array([[np.trace(rr), np.sum(rr * d1.T)],
                      [np.sum(rr * d1.T), np.sum(rd * rd.T)]])
        self.m_inv = np.linalg.inv(m)
        # For the precision form: X'X, X'D1 X and the end rows.
        self.xtx = x.T @ x
        self.xdx = x[1:].T @ x[:-1] + x[:-1].T @ x[1:]
        self.ends = np.outer(x[0], x[0]) + np.outer(x[-1], x[-1])
        # X a = 1: the weights that carry a constant shift of y into beta.
        self.constant = self.pinv @ np.ones(n)
        if not np.allclose(x @ self.constant, 1.0, atol=1e-9):
            raise ValueError("this reference needs a design that spans the constant")

    def gram(self, rho):
        """(WX)'WX per voxel (V x p x p) from the tridiagonal AR(1) precision."""
        return ((1.0 + rho * rho)[:, None, None] * self.xtx - rho[:, None, None] * self.xdx
                - (rho * rho)[:, None, None] * self.ends)


def ar1_rho(design, y):
    """Bias-corrected AR(1) coefficient per column of y (N x V)."""
    e = y - design.x @ (design.pinv @ y)
    s0 = np.einsum("nv,nv->v", e, e)
    s1 = 2.0 * np.einsum("nv,nv->v", e[1:], e[:-1])
    g0 = design.m_inv[0, 0] * s0 + design.m_inv[0, 1] * s1
    g1 = design.m_inv[1, 0] * s0 + design.m_inv[1, 1] * s1
    safe = np.where(g0 > 0, g0, 1.0)
    return np.where(g0 > 0, np.clip(g1 / safe, -0.99, 0.99), 0.99 * np.sign(g1))


def gls_whiten(design, y, rho):
    """Prais-Winsten GLS: returns beta (V x p), sigma2 (V), A = (WX)'WX (V x p x p)."""
    x = design.x
    a = np.sqrt(1.0 - rho * rho)
    wy = np.empty_like(y)
    wy[0] = a * y[0]
    wy[1:] = y[1:] - rho * y[:-1]
    wx = np.empty((y.shape[1], design.n, design.p))
    wx[:, 0, :] = a[:, None] * x[0]
    wx[:, 1:, :] = x[None, 1:, :] - rho[:, None, None] * x[None, :-1, :]
    wxt = wx.transpose(0, 2, 1)
    gram = wxt @ wx
    rhs = wxt @ wy.T[:, :, None]
    beta = np.linalg.solve(gram, rhs)
    resid = wy.T - (wx @ beta)[:, :, 0]
    sigma2 = np.einsum("vn,vn->v", resid, resid) / design.dof
    return beta[:, :, 0], sigma2, gram


def gls_precision(design, y, rho):
    """The same GLS through the tridiagonal precision: GEMMs, then p x p solves. The
    whitened RSS y'V^-1 y - beta'X'V^-1 y cancels against a large baseline, so y is
    centred per voxel first and the mean is carried into beta through X a = 1."""
    c0 = 1.0 + rho * rho
    c2 = rho * rho
    x = design.x
    mean = y.mean(axis=0)
    y = y - mean
    xty = x.T @ y                                  # p x V
    xdy = x[1:].T @ y[:-1] + x[:-1].T @ y[1:]      # p x V
    xey = np.outer(x[0], y[0]) + np.outer(x[-1], y[-1])
    yvy = (c0 * np.einsum("nv,nv->v", y, y) - rho * 2.0 * np.einsum("nv,nv->v", y[1:], y[:-1])
           - c2 * (y[0] ** 2 + y[-1] ** 2))
    gram = design.gram(rho)
    rhs = (c0 * xty - rho * xdy - c2 * xey).T
    beta = np.linalg.solve(gram, rhs[:, :, None])[:, :, 0]
    rss = yvy - np.einsum("vp,vp->v", beta, rhs)
    return beta + mean[:, None] * design.constant, rss / design.dof, gram


def contrasts_of(design, beta, sigma2, gram, contrasts):
    """Per contrast: effect (V x q), covariance (V x q x q), statistic, z."""
    out = {}
    for name, is_f, c in contrasts:
        q = c.shape[0]
        effect = beta @ c.T
        inv_ct = np.linalg.solve(gram, np.broadcast_to(c.T, (gram.shape[0],) + c.T.shape))
        cov = sigma2[:, None, None] * (c @ inv_ct)
        if is_f:
            stat = np.einsum("vq,vq->v", effect,
                             np.linalg.solve(cov, effect[:, :, None])[:, :, 0]) / q
            log_p = np.log(scipy.special.fdtrc(q, design.dof, stat))
        else:
            stat = effect[:, 0] / np.sqrt(cov[:, 0, 0])
            log_p = np.log(scipy.special.stdtr(design.dof, -stat))
        z = -scipy.special.ndtri(np.exp(log_p))
        out[name] = (effect, cov, stat, z)
    return out


def fit(design, y32, contrasts, method="whiten", chunk_bytes=64e6):
    """Fits the N x V float32 data in chunks of voxels; returns a dict of arrays."""
    v_total = y32.shape[1]
    per_voxel = design.n * design.p * 8 * (3 if method == "whiten" else 1)
    chunk = max(16, int(chunk_bytes // per_voxel)) if method == "whiten" else 4096
    gls = gls_whiten if method == "whiten" else gls_precision
    parts = []
    for v0 in range(0, v_total, chunk):
        y = y32[:, v0:v0 + chunk].astype(np.float64)
        rho = ar1_rho(design, y)
        beta, sigma2, gram = gls(design, y, rho)
        parts.append((rho, beta, sigma2, contrasts_of(design, beta, sigma2, gram, contrasts)))
    result = {"rho": np.concatenate([p[0] for p in parts]),
              "beta": np.concatenate([p[1] for p in parts]),
              "sigma2": np.concatenate([p[2] for p in parts])}
    for name, _, _ in contrasts:
        for k, key in enumerate(("effect", "cov", "stat", "z")):
            result[name + "." + key] = np.concatenate([p[3][name][k] for p in parts])
    return result


def blas_info():
    """The BLAS library numpy loaded and, for OpenBLAS, its kernel; and its thread count
    (None when unknown)."""
    with open("/proc/self/maps") as f:
        paths = {line.split()[-1] for line in f}
    libs = sorted(p for p in paths
                  if os.path.basename(p).startswith(("libblas", "libopenblas")))
    if not libs:
        return "no BLAS library found", None
    try:
        lib = ctypes.CDLL(libs[0])
        corename, config = lib.openblas_get_corename, lib.openblas_get_config
        corename.restype = config.restype = ctypes.c_char_p
        return ("%s, kernel %s" % (config().decode().split(" NO_")[0], corename().decode()),
                int(lib.openblas_get_num_threads()))
    except (OSError, AttributeError):
        return "BLAS " + os.path.realpath(libs[0]), None


def max_rel(ours, ref, floor=None):
    """max |ours - ref| / max(|ref|, floor) over all entries."""
    scale = np.abs(ref) if floor is None else np.maximum(np.abs(ref), floor)
    return float(np.max(np.abs(ours - ref) / scale))


def compare(result, dump, design, contrasts):
    """Largest relative differences between boldsum's results dumped by fit_throughput
    and `result`. Entries that may be near zero (beta, effects, off-diagonal covariances)
    are compared relative to max(|value|, its standard error): a difference far below the
    statistical uncertainty of a value near zero is no disagreement."""
    v = result["sigma2"].size
    p = design.p
    load = lambda name: np.fromfile(os.path.join(dump, name), dtype=np.float64)
    valid = np.fromfile(os.path.join(dump, "valid.u8"), dtype=np.uint8)
    beta = load("beta.f64").reshape(v, p)
    grams = design.gram(result["rho"])
    se = np.sqrt(result["sigma2"][:, None] * np.linalg.inv(grams).diagonal(axis1=1, axis2=2))
    out = {"n_voxels": int(v), "n_invalid_ours": int(np.sum(valid != 1)),
           "beta": max_rel(beta, result["beta"], se),
           "sigma2": max_rel(load("sigma2.f64"), result["sigma2"]),
           "rho_abs": float(np.max(np.abs(load("rho.f64") - result["rho"])))}
    for name, is_f, c in contrasts:
        q = c.shape[0]
        effect = load(name + ".effect.f64").reshape(v, q)
        cov = load(name + ".cov.f64").reshape(v, q, q).transpose(0, 2, 1)  # column-major
        ref_cov = result[name + ".cov"]
        sd = np.sqrt(ref_cov.diagonal(axis1=1, axis2=2))
        out[name + ".effect"] = max_rel(effect, result[name + ".effect"], sd)
        out[name + ".variance"] = max_rel(cov, ref_cov, sd[:, :, None] * sd[:, None, :])
        # Statistics: relative, or absolute below 1.
        out[name + (".F" if is_f else ".t")] = max_rel(load(name + ".stat.f64"),
                                                       result[name + ".stat"], 1.0)
    return out


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--design", required=True)
    parser.add_argument("--contrasts", required=True)
    parser.add_argument("--dump", required=True)
    parser.add_argument("--method", choices=("whiten", "precision"), default="whiten")
    parser.add_argument("--repeat", type=int, default=1)
    args = parser.parse_args()
    _, x = read_design(args.design)
    contrasts = read_contrasts(args.contrasts, x.shape[1])
    y32 = np.fromfile(os.path.join(args.dump, "y.f32"), dtype=np.float32)
    y32 = np.ascontiguousarray(y32.reshape(-1, x.shape[0]).T)

    t0 = time.perf_counter()
    design = Design(x)
    setup_s = time.perf_counter() - t0
    best = float("inf")
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        result = fit(design, y32, contrasts, args.method)
        best = min(best, time.perf_counter() - t0)
    agreement = compare(result, args.dump, design, contrasts)
    json.dump({"method": args.method, "n_voxels": int(y32.shape[1]), "setup_s": setup_s,
               "fit_s": best, "agreement": agreement,
               "blas": blas_info()[0], "blas_threads": blas_info()[1],
               "numpy": np.__version__}, sys.stdout)
    print()


if __name__ == "__main__":
    main()
