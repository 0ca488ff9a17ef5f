"""fit_probe (FitRun, EstimateContrast, TestContrast) against outside references:
statsmodels GLS/OLS (Debian python3-statsmodels), numpy.linalg.lstsq, an explicit
N x N numpy solution of the bias-corrected AR(1) system, and mpmath tail areas."""
import os
import sys

import mpmath
import numpy as np
import scipy.linalg
import statsmodels.api as sm

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from fit_reference_data import as_float32, ar1_noise, block_design, run_probe  # noqa: E402

TOL = 1e-6  # the brief's bound for beta, effect, variance, t (relative)
failures = []
worst = {}


def check(name, got, want, tol=TOL, floor=0.0):
    got, want = np.asarray(got, float), np.asarray(want, float)
    err = np.max(np.abs(got - want) / np.maximum(np.abs(want), floor if floor else 1e-300))
    worst[name] = max(worst.get(name, 0.0), err)
    if not err <= tol:
        failures.append(f"{name}: max relative error {err:.3g} > {tol:g}")


def z_from_tail(log_p):
    """z with log Phi_c(z) = log_p, by mpmath at 50 digits (mpmath reference)."""
    mpmath.mp.dps = 50
    p = mpmath.exp(mpmath.mpf(log_p))
    return float(-mpmath.sqrt(2) * mpmath.erfinv(2 * p - 1))


def log_sf_t(t, dof):
    # P(T > t) = I_{dof/(dof+t^2)}(dof/2, 1/2) / 2 for t > 0 (Abramowitz & Stegun 26.7.1),
    # by mpmath's regularised incomplete beta.
    mpmath.mp.dps = 50
    t, dof = mpmath.mpf(float(t)), mpmath.mpf(int(dof))
    tail = mpmath.betainc(dof / 2, 0.5, 0, dof / (dof + t * t), regularized=True) / 2
    return float(mpmath.log(tail if t > 0 else 1 - tail))


def log_sf_f(f, d1, d2):
    # P(F > f) = I_{d2/(d2+d1 f)}(d2/2, d1/2) (Abramowitz & Stegun 26.6.2), mpmath.
    mpmath.mp.dps = 50
    f, d1, d2 = mpmath.mpf(float(f)), mpmath.mpf(int(d1)), mpmath.mpf(int(d2))
    return float(mpmath.log(mpmath.betainc(d2 / 2, d1 / 2, 0, d2 / (d2 + d1 * f),
                                           regularized=True)))


def worsley_rho(x, y):
    """Bias-corrected lag-1 correlation from explicit N x N matrices (numpy): R = I - X X^+,
    D1 = L + L', m_jk = tr(R Dj R Dk), m gamma = (e'e, e'D1 e) (Worsley et al. 2002)."""
    n = x.shape[0]
    r = np.eye(n) - x @ np.linalg.pinv(x)
    d = np.eye(n, k=1) + np.eye(n, k=-1)
    ds = [np.eye(n), d]
    m = np.array([[np.trace(r @ a @ r @ b) for b in ds] for a in ds])
    e = r @ y
    g = np.linalg.solve(m, np.array([e @ e, e @ d @ e]))
    return np.clip(g[1] / g[0], -0.99, 0.99)


def compare_voxels(x, y, c, noise, label):
    q = c.shape[0]
    rec = run_probe(x, y, c, noise=noise, threads=2, block=37)
    n = x.shape[0]
    rank = np.linalg.matrix_rank(x)
    assert rec["dof"][0] == n - rank, label
    for v in range(y.shape[1]):
        yv = y[:, v]
        if noise == "ar1":
            rho_ref = worsley_rho(x, yv)
            check(f"{label} rho vs explicit numpy", rec["rho"][v], rho_ref, tol=1e-9, floor=1.0)
            rho = rec["rho"][v]
        else:
            rho = 0.0
            assert rec["rho"][v] == 0.0
        # statsmodels GLS with the AR(1) correlation matrix at our rho (Debian
        # python3-statsmodels); with rho = 0 this is OLS.
        sigma = scipy.linalg.toeplitz(rho ** np.arange(n))
        res = sm.GLS(yv, x, sigma=sigma).fit()
        beta = np.array([rec[f"beta{j}"][v] for j in range(x.shape[1])])
        kept = rec["kept"].astype(int)
        if len(kept) == x.shape[1]:
            check(f"{label} beta vs statsmodels", beta, res.params, floor=1e-3 * np.abs(res.params).max())
        # statsmodels' scale is the marginal variance sigma2 / (1 - rho^2).
        check(f"{label} sigma2 vs statsmodels", rec["sigma2"][v], res.scale * (1 - rho ** 2))
        effect = np.array([rec[f"effect{i}"][v] for i in range(q)])
        cov = np.array([rec[f"cov{k}"][v] for k in range(q * q)]).reshape(q, q, order="F")
        check(f"{label} effect vs statsmodels", effect, c @ res.params,
              floor=1e-3 * np.abs(c @ res.params).max())
        check(f"{label} covariance vs statsmodels", cov, res.cov_params(r_matrix=c),
              floor=1e-3 * np.abs(np.diag(res.cov_params(r_matrix=c))).max())
        dof = int(n - rank)
        if q == 1:
            tt = res.t_test(c)
            check(f"{label} t vs statsmodels t_test", rec["t"][v], tt.tvalue.item())
            check(f"{label} z(t) vs mpmath", rec["zt"][v],
                  z_from_tail(log_sf_t(rec["t"][v], dof)), tol=1e-9, floor=1e-3)
        ft = res.f_test(c)
        check(f"{label} F vs statsmodels f_test", rec["f"][v], np.asarray(ft.fvalue).item())
        assert ft.df_denom == dof and ft.df_num == q, label
        check(f"{label} z(F) vs mpmath", rec["zf"][v],
              z_from_tail(log_sf_f(rec["f"][v], q, dof)), tol=1e-9, floor=1e-3)


def main():
    rng = np.random.default_rng(20240601)
    n, tr = 160, 2.0
    x = block_design(n, tr)
    p = x.shape[1]
    rhos = [0.1, 0.25, 0.4, 0.55, 0.7, 0.3]
    noise = ar1_noise(n, rhos, rng)
    signal = x @ np.column_stack([rng.normal(0, 2, p) for _ in rhos])
    y = signal + noise
    y[:, :5] += 100.0
    y[:, 5] += 1e4 - 100.0  # a large baseline against unit noise (offset handling)
    y = as_float32(y)

    c_t = np.zeros((1, p)); c_t[0, 0], c_t[0, 1] = 1.0, -1.0
    c_f = np.zeros((2, p)); c_f[0, 0] = c_f[1, 1] = 1.0
    for noise_model in ("ar1", "none"):
        compare_voxels(x, y, c_t, noise_model, f"{noise_model} t")
        compare_voxels(x, y, c_f, noise_model, f"{noise_model} F")

    # OLS against numpy.linalg.lstsq (numpy reference).
    rec = run_probe(x, y, c_t, noise="none")
    ols, rss, _, _ = np.linalg.lstsq(x, y, rcond=None)
    beta = np.array([rec[f"beta{j}"] for j in range(p)])
    check("ols beta vs numpy lstsq", beta, ols, floor=1e-3 * np.abs(ols).max())
    check("ols sigma2 vs numpy lstsq", rec["sigma2"], rss / (n - p))

    # Rank-deficient design: a duplicated condition column. Estimable contrasts agree
    # with statsmodels' pinv-based GLS; a contrast on one copy alone is not estimable.
    xd = np.column_stack([x[:, :1], x])
    c_est = np.zeros((1, p + 1)); c_est[0, 0] = c_est[0, 1] = 0.5; c_est[0, 2] = -1.0
    for noise_model in ("ar1", "none"):
        compare_voxels(xd, y, c_est, noise_model, f"{noise_model} duplicated column")
    c_bad = np.zeros((1, p + 1)); c_bad[0, 0] = 1.0
    rec = run_probe(xd, y, c_bad)
    if rec["estimable"][0] != 0 or rec["rank"][0] != p:
        failures.append("duplicated column: contrast on one copy should be non-estimable")

    for name, err in sorted(worst.items()):
        print(f"{name}: max relative error {err:.2e}")
    if failures:
        print("FAILED:\n  " + "\n  ".join(failures))
        sys.exit(1)
    print("all fit reference checks passed")


if __name__ == "__main__":
    main()
