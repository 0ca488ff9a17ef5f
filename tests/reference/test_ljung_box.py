"""Residual whiteness (the report's Ljung-Box check) against statsmodels.

1. The statistic: tests/tools/stats_ljungbox_probe (SampleAutocorrelations, the streamed
   AutocorrelationAccumulator, LjungBox) against statsmodels.tsa.stattools.acf and
   statsmodels.stats.diagnostic.acorr_ljungbox (Ljung & Box 1978, Biometrika 65:297) on the
   same series: white noise, AR(1), a series far from zero mean, short and long series.
2. End to end: a synthetic image study and a region-table study are fitted with boldsum;
   tests/tools/report_probe measures every voxel's prewhitened residuals. The reference
   refits each voxel by GLS at boldsum's AR(1) coefficient (statsmodels GLS with the AR(1)
   correlation matrix), whitens the residuals with the Prais-Winsten transform (Prais &
   Winsten 1954) and applies acorr_ljungbox with model_df=1.
3. Calibration: with pure AR(1) noise the share of voxels failing at p < 0.05 stays near
   the nominal 5% (a little above it: see below).
"""
import os
import subprocess
import sys
import tempfile

import nibabel as nib
import numpy as np
import statsmodels.api as sm
from scipy.linalg import toeplitz
from statsmodels.stats.diagnostic import acorr_ljungbox
from statsmodels.tsa.stattools import acf

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import check, finish  # noqa: E402

PROBES = os.environ["BOLDSUM_PROBE_DIR"]
BIN = os.environ["BOLDSUM_BIN"]


def rel(a, b):
    return abs(a - b) / max(abs(b), 1e-300)


# ---- 1. the statistic on given series ---------------------------------------------------
rng = np.random.default_rng(20261202)


def ar1(n, rho):
    e = rng.standard_normal(n)
    x = np.empty(n)
    x[0] = e[0] / np.sqrt(1 - rho * rho)
    for t in range(1, n):
        x[t] = rho * x[t - 1] + e[t]
    return x


cases = [("white n=180", rng.standard_normal(180), 5, 1, 16),
         ("AR(1) 0.4 n=180", ar1(180, 0.4), 5, 1, 7),
         ("AR(1) -0.3 n=1200", ar1(1200, -0.3), 5, 0, 32),
         ("mean 1000, sd 1, n=300", 1000 + rng.standard_normal(300), 5, 1, 13),
         ("short n=7", rng.standard_normal(7), 5, 1, 3),
         ("one block, lags 10", ar1(400, 0.2), 10, 1, 400)]
lines = "".join("%d %d %d %s\n" % (lags, df, block, " ".join(repr(float(v)) for v in x))
                for _, x, lags, df, block in cases)
out = subprocess.run([os.path.join(PROBES, "stats_ljungbox_probe")], input=lines,
                     capture_output=True, text=True)
check("probe runs", out.returncode == 0, out.stdout + out.stderr)
rows = out.stdout.splitlines()
worst = {"acf": 0.0, "stream": 0.0, "q": 0.0, "p": 0.0}
for k, (name, x, lags, df, block) in enumerate(cases):
    got_acf = np.array([float(v) for v in rows[3 * k].split()[1:]])
    got_stream = np.array([float(v) for v in rows[3 * k + 1].split()[1:]])
    q, dof, p = rows[3 * k + 2].split()[1:]
    want_acf = acf(x, nlags=lags, fft=False)[1:]  # statsmodels acf, demeaned
    lb = acorr_ljungbox(x, lags=[lags], model_df=df, return_df=True)
    want_q, want_p = float(lb["lb_stat"].iloc[0]), float(lb["lb_pvalue"].iloc[0])
    e_acf = np.abs(got_acf - want_acf).max()
    # The streamed sums are centred at the end: exact in arithmetic, rounding grows with
    # (mean / spread)^2, so the series at mean 1000 gets 1e-6 (about 1e6 * eps * n).
    e_stream = np.abs(got_stream - want_acf).max()
    stream_tol = 1e-6 if "mean 1000" in name else 1e-12
    check(name + ": acf = statsmodels acf (1e-13)", e_acf < 1e-13, "%.1e" % e_acf)
    check(name + ": streamed acf = statsmodels acf (%.0e)" % stream_tol, e_stream < stream_tol,
          "%.1e" % e_stream)
    check(name + ": Q = acorr_ljungbox lb_stat (1e-12 relative)", rel(float(q), want_q) < 1e-12,
          "%s vs %.17g" % (q, want_q))
    check(name + ": dof = lags - model_df", int(dof) == lags - df)
    # p: Boost's chi-square upper tail against scipy's (through statsmodels), 1e-12 relative.
    check(name + ": p = acorr_ljungbox lb_pvalue (1e-12 relative)", rel(float(p), want_p) < 1e-12,
          "%s vs %.17g" % (p, want_p))
    worst["acf"] = max(worst["acf"], e_acf)
    worst["stream"] = max(worst["stream"], e_stream if "mean 1000" not in name else 0)
    worst["q"] = max(worst["q"], rel(float(q), want_q))
    worst["p"] = max(worst["p"], rel(float(p), want_p))
print("largest differences: acf %.1e, streamed acf %.1e, Q %.1e (relative), p %.1e (relative)" % (
    worst["acf"], worst["stream"], worst["q"], worst["p"]))

bad = subprocess.run([os.path.join(PROBES, "stats_ljungbox_probe")], input="5 1 4 1 2 3 4\n",
                     capture_output=True, text=True)
check("too short a series is refused", bad.returncode == 1 and "error:" in bad.stdout, bad.stdout)


# ---- 2. and 3. the residual pass of a fitted study --------------------------------------
def events(n_vol, tr, seed):
    r = np.random.default_rng(seed)
    rows, t = [], 6.0
    while t < n_vol * tr - 30:
        rows.append((round(t, 1), 6.0, "tune" if r.random() < 0.5 else "chord"))
        t += 14 + 6 * r.random()
    return "onset\tduration\ttrial_type\n" + "".join("%s\t%s\t%s\n" % row for row in rows)


def ar1_noise(n_vol, rho, r):
    e = r.standard_normal((n_vol, rho.size))
    x = np.empty_like(e)
    x[0] = e[0] / np.sqrt(1 - rho ** 2)
    for t in range(1, n_vol):
        x[t] = rho * x[t - 1] + e[t]
    return x


def reference_q(y, x, rho):
    """Q of the Prais-Winsten-whitened GLS residuals at this rho (statsmodels)."""
    n = len(y)
    sigma = toeplitz(rho ** np.arange(n))
    beta = sm.GLS(y, x, sigma=sigma).fit().params
    e = y - x @ beta
    w = np.empty(n)
    w[0] = np.sqrt(1 - rho * rho) * e[0]
    w[1:] = e[1:] - rho * e[:-1]
    lb = acorr_ljungbox(w, lags=[5], model_df=1, return_df=True)
    return float(lb["lb_stat"].iloc[0]), float(lb["lb_pvalue"].iloc[0])


N_VOL, TR = 150, 2.0
with tempfile.TemporaryDirectory() as root:
    r = np.random.default_rng(7)
    shape = (20, 20, 10)
    n_vox = int(np.prod(shape))
    rho_true = np.linspace(0.0, 0.5, n_vox)
    affine = np.diag([3.0, 3.0, 3.0, 1.0])
    config = "tr: 2\nconditions: [tune, chord]\ndrift: {kind: cosine, cutoff_s: 128}\n" \
             "contrasts: {tune_vs_chord: {tune: 1, chord: -1}}\nsubjects:\n"
    for s in ("s1",):
        config += "  - id: %s\n    runs:\n" % s
        for run in (1, 2):
            data = 100.0 + ar1_noise(N_VOL, rho_true, r)
            img = nib.Nifti1Image(data.T.reshape(shape + (N_VOL,), order="F").astype(np.float32),
                                  affine)
            img.header.set_xyzt_units("mm", "sec")
            img.header["pixdim"][4] = TR
            nib.save(img, os.path.join(root, "%s_r%d.nii.gz" % (s, run)))
            with open(os.path.join(root, "%s_r%d_events.tsv" % (s, run)), "w") as f:
                f.write(events(N_VOL, TR, 100 * run))
            config += "      - {data: %s_r%d.nii.gz, events: %s_r%d_events.tsv}\n" % (s, run, s, run)
    # A region-table subject: four regions of AR(1) noise.
    roi = 50.0 + ar1_noise(N_VOL, np.array([0.1, 0.3, 0.5, 0.7]), r)
    with open(os.path.join(root, "roi.tsv"), "w") as f:
        f.write("left\tright\tfront\tback\n" +
                "".join("\t".join(repr(float(v)) for v in row) + "\n" for row in roi))
    with open(os.path.join(root, "roi_events.tsv"), "w") as f:
        f.write(events(N_VOL, TR, 300))
    config += "  - id: r1\n    runs:\n      - {data: roi.tsv, events: roi_events.tsv}\n"
    config += "output: out\n"
    cfg = os.path.join(root, "study.yaml")
    with open(cfg, "w") as f:
        f.write(config)
    fit = subprocess.run([BIN, "fit", cfg, "--no-report", "--quiet", "--subject", "s1",
                          "--subject", "r1"], capture_output=True, text=True)
    check("fit the synthetic study", fit.returncode == 0, fit.stdout + fit.stderr)

    probe = subprocess.run([os.path.join(PROBES, "report_probe"), "whiteness", cfg, "s1"],
                           capture_output=True, text=True)
    check("whiteness probe runs (images)", probe.returncode == 0, probe.stderr)
    got = {}
    share = None
    for line in probe.stdout.splitlines():
        w = line.split()
        if w[0] == "run":
            got[(int(w[1]), int(w[2]))] = (float(w[3]), float(w[4]))
        elif w[0] == "share":
            share = float(w[1])
    out = os.path.join(root, "out", "s1")
    mask = np.flatnonzero(np.asarray(nib.load(os.path.join(out, "mask.nii.gz")).dataobj).ravel(order="F"))
    worst_q, worst_p, compared = 0.0, 0.0, 0
    for run in (1, 2):
        x = np.loadtxt(os.path.join(out, "run-%d" % run, "design.tsv"), skiprows=1)
        data = np.asarray(nib.load(os.path.join(root, "s1_r%d.nii.gz" % run)).dataobj,
                          dtype=np.float64).reshape(n_vox, N_VOL, order="F")
        # boldsum's rho, as written to ar1.nii.gz (float32: its rounding moves Q by ~1e-7).
        rho_map = np.asarray(nib.load(os.path.join(out, "run-%d" % run, "ar1.nii.gz")).dataobj,
                             dtype=np.float64).ravel(order="F")
        for unit in range(0, mask.size, 10):  # every tenth voxel
            voxel = mask[unit]
            want_q, want_p = reference_q(data[voxel], x, rho_map[voxel])
            q, p = got[(run, unit)]
            worst_q = max(worst_q, rel(q, want_q))
            worst_p = max(worst_p, abs(p - want_p))
            compared += 1
    # Tolerance 1e-5 relative on Q and 1e-6 absolute on p: the reference's rho is rounded
    # to float32 and boldsum stores Q and p as float32.
    check("images: Q = statsmodels GLS + Prais-Winsten + acorr_ljungbox (%d voxel-runs, 1e-5)"
          % compared, worst_q < 1e-5, "largest relative difference %.1e" % worst_q)
    check("images: p = acorr_ljungbox (1e-6 absolute)", worst_p < 1e-6, "%.1e" % worst_p)
    print("end to end, images: largest relative difference in Q %.1e, absolute in p %.1e over "
          "%d voxel-runs" % (worst_q, worst_p, compared))

    # Calibration: pure AR(1) noise, 8000 voxel-runs (binomial sd 0.25%). Ljung & Box's
    # chi-square holds for the residuals of a fitted ARMA model; residuals of a fitted
    # regression, whose drift columns remove low frequencies, carry small extra
    # autocorrelation, so the share runs somewhat above 5% (measured 7.9% with this
    # design). 3% to 10% is accepted; far more would mean a wrong statistic or whitening.
    check("calibration: share failing under AR(1) noise in [3%, 10%]",
          share is not None and 0.03 <= share <= 0.10, "share %.4f" % (share or -1))
    print("calibration: %.2f%% of %d voxel-runs fail at p < 0.05" % (100 * share, 2 * mask.size))

    probe = subprocess.run([os.path.join(PROBES, "report_probe"), "whiteness", cfg, "r1"],
                           capture_output=True, text=True)
    check("whiteness probe runs (regions)", probe.returncode == 0, probe.stderr)
    x = np.loadtxt(os.path.join(root, "out", "r1", "run-1", "design.tsv"), skiprows=1)
    table = [l.split("\t") for l in open(os.path.join(root, "out", "r1", "run-1",
                                                       "summary.tsv")).read().splitlines()]
    ar1_column = table[0].index("ar1")
    rho_by_region = {row[1]: float(row[ar1_column]) for row in table[1:]}  # exact decimals
    worst = 0.0
    for line in probe.stdout.splitlines():
        w = line.split()
        if w[0] != "run":
            continue
        region = int(w[2])
        name = ["left", "right", "front", "back"][region]
        want_q, _ = reference_q(roi[:, region], x, rho_by_region[name])
        worst = max(worst, rel(float(w[3]), want_q))
    # float32 storage of Q: 1e-6 relative.
    check("regions: Q = statsmodels GLS + Prais-Winsten + acorr_ljungbox (1e-6)", worst < 1e-6,
          "%.1e" % worst)

finish()
