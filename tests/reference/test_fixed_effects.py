#!/usr/bin/python3
"""Runs -> subject fixed-effects combination (boldsum_combine, through
tests/tools/combine_probe) against statsmodels (Debian python3-statsmodels):

* q = 1: statsmodels.stats.meta_analysis.combine_effects, the inverse-variance
  fixed-effect mean (mean_effect_fe) and its variance (var_eff_w_fe).
* q = 1, 2, 3: statsmodels GLS of the stacked run estimates on stacked identity
  matrices with the block-diagonal covariance of the runs: params is the combined
  effect and normalized_cov_params = (X' Sigma^-1 X)^-1 its covariance (Aitken's
  generalised least squares for a common mean).

Random inputs from a seeded numpy generator, with covariance scales from 1e-3 to 1e3 per
voxel, one voxel invalid in one run and one voxel with a singular covariance in another
(both must come out invalid, NaN-filled). Prints the largest relative differences.
"""
import os
import subprocess
import sys

import numpy as np
import statsmodels.api as sm
from scipy.linalg import block_diag
from statsmodels.stats.meta_analysis import combine_effects

PROBE = os.path.join(os.environ.get("BOLDSUM_PROBE_DIR", "build/tests"), "combine_probe")

# Relative tolerance: the random covariances have condition numbers below ~1e3, and both
# sides solve q x q systems a few times: 1e3 * eps * a few ~ 1e-12.
TOL = 1e-12


def run_probe(q, runs):
    """runs: list of (dof, valid[V], effect[q, V], cov[q*q, V]) -> parsed output."""
    voxels = runs[0][1].size if runs else 0
    lines = [f"{q} {len(runs)} {voxels}"]
    for dof, valid, effect, cov in runs:
        lines.append(repr(float(dof)))
        lines.append(" ".join(str(int(v)) for v in valid))
        lines += [" ".join(repr(float(x)) for x in row) for row in effect]
        lines += [" ".join(repr(float(x)) for x in row) for row in cov]
    proc = subprocess.run([PROBE], input="\n".join(lines) + "\n", capture_output=True, text=True)
    if proc.returncode != 0:
        return None, proc.stderr.strip()
    out = proc.stdout.split("\n")
    dof = float(out[0])
    valid = np.array([int(v) for v in out[1].split()])
    effect = np.array([[float(x) for x in out[2 + i].split()] for i in range(q)])
    cov = np.array([[float(x) for x in out[2 + q + k].split()] for k in range(q * q)])
    return (dof, valid, effect, cov), ""


def random_case(rng, q, n_runs, voxels):
    runs = []
    scales = 10.0 ** rng.uniform(-3, 3, size=voxels)
    for r in range(n_runs):
        valid = np.ones(voxels, dtype=int)
        effect = rng.normal(0, 10, size=(q, voxels))
        cov = np.empty((q * q, voxels))
        for v in range(voxels):
            a = rng.normal(size=(q, q))
            c = (a @ a.T + 0.1 * np.eye(q)) * scales[v]
            cov[:, v] = c.reshape(-1, order="F")  # column-major per voxel
        runs.append([float(rng.integers(20, 400)), valid, effect, cov])
    runs[0][1][0] = 0  # voxel 0 invalid in run 1
    singular = np.ones((q, q)) if q > 1 else np.zeros((1, 1))  # rank one (or zero)
    runs[-1][3][:, 1] = singular.reshape(-1, order="F")  # voxel 1 singular in the last run
    return runs


def main():
    rng = np.random.default_rng(20240611)
    worst = {"GLS effect": 0.0, "GLS covariance": 0.0, "combine_effects mean (q = 1)": 0.0,
             "combine_effects variance (q = 1)": 0.0}
    counts = dict.fromkeys(worst, 0)
    ok = True
    for q in (1, 2, 3):
        for n_runs in (2, 3, 5):
            runs = random_case(rng, q, n_runs, voxels=30)
            result, err = run_probe(q, runs)
            if result is None:
                print(f"FAIL q={q} R={n_runs}: probe error {err}")
                ok = False
                continue
            dof, valid, effect, cov = result
            if dof != sum(r[0] for r in runs):
                print(f"FAIL q={q} R={n_runs}: dof {dof}")
                ok = False
            expected_valid = np.ones(30, dtype=int)
            expected_valid[:2] = 0
            if not np.array_equal(valid, expected_valid):
                print(f"FAIL q={q} R={n_runs}: valid {valid}")
                ok = False
            if not (np.isnan(effect[:, :2]).all() and np.isnan(cov[:, :2]).all()):
                print(f"FAIL q={q} R={n_runs}: invalid voxels are not NaN")
                ok = False
            for v in range(2, 30):
                es = [r[2][:, v] for r in runs]
                cs = [r[3][:, v].reshape(q, q, order="F") for r in runs]
                # statsmodels GLS: y = stacked run effects, X = stacked identities.
                fit = sm.GLS(np.concatenate(es), np.vstack([np.eye(q)] * n_runs),
                             sigma=block_diag(*cs)).fit()
                ref_cov = fit.normalized_cov_params
                got_cov = cov[:, v].reshape(q, q, order="F")
                diffs = {
                    "GLS effect": np.linalg.norm(effect[:, v] - fit.params) / np.linalg.norm(fit.params),
                    "GLS covariance": np.linalg.norm(got_cov - ref_cov) / np.linalg.norm(ref_cov)}
                if q == 1:
                    # statsmodels' inverse-variance fixed-effect meta-analysis.
                    meta = combine_effects(np.array([e[0] for e in es]),
                                           np.array([c[0, 0] for c in cs]))
                    diffs["combine_effects mean (q = 1)"] = abs(effect[0, v] / meta.mean_effect_fe - 1)
                    diffs["combine_effects variance (q = 1)"] = abs(cov[0, v] / meta.var_eff_w_fe - 1)
                for name, value in diffs.items():
                    worst[name] = max(worst[name], value)
                    counts[name] += 1
    for name, value in worst.items():
        status = "ok " if value <= TOL else "FAIL"
        ok = ok and value <= TOL
        print(f"{status} {name}: max rel diff {value:.3g} over {counts[name]} voxels (tolerance {TOL:g})")

    # No runs is an error, not a result.
    result, err = run_probe(1, [])
    if result is not None or "no runs given" not in err:
        print(f"FAIL empty input accepted or wrong message: {err!r}")
        ok = False
    else:
        print(f"ok  empty input rejected: {err}")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
