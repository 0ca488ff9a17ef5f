"""End-to-end check of `boldsum fit` on a small generated study, against outside
references: statsmodels GLS with the AR(1) correlation matrix (Debian
python3-statsmodels), scipy.stats for z, nibabel (Debian python3-nibabel) for reading our
images, and the inverse-variance fixed-effects formula (e.g. Hedges & Olkin 1985,
Statistical Methods for Meta-Analysis, ch. 6) for combining runs.

The bias-corrected rho itself is checked against an independent numpy solution of the
Worsley et al. (2002, NeuroImage 15:1-15) 2x2 system in test_fit_gls.py; here the GLS
is recomputed at the rho we report (17 significant digits in the ROI tables).
"""
import json
import os
import sys
import tempfile

import nibabel as nib
import numpy as np
import scipy.linalg
import scipy.stats
import statsmodels.api as sm

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import boldsum, failures, finish  # noqa: E402

rng = np.random.default_rng(7)
TR = 2.0
N = 120


def check(name, ours, ref, rtol, atol=0.0):
    ours = np.asarray(ours, float)
    ref = np.asarray(ref, float)
    err = np.max(np.abs(ours - ref) / (np.abs(ref) * rtol + atol)) if ours.size else 0.0
    worst = np.max(np.abs(ours - ref) / np.maximum(np.abs(ref), 1e-300)) if ours.size else 0.0
    print(f"{name}: max relative difference {worst:.2e} (tolerance {rtol:g})")
    if not np.all(np.isfinite(ours) == np.isfinite(ref)) or err > 1.0:
        failures.append(name)


def ar1_noise(n, rho, size):
    e = rng.standard_normal((n, size))
    out = np.empty_like(e)
    out[0] = e[0] / np.sqrt(1 - rho**2)
    for t in range(1, n):
        out[t] = rho * out[t - 1] + e[t]
    return out


def write_events(path, onsets_by_condition):
    with open(path, "w") as f:
        f.write("onset\tduration\ttrial_type\n")
        rows = sorted((o, c) for c, os_ in onsets_by_condition.items() for o in os_)
        for onset, condition in rows:
            f.write(f"{onset}\t10\t{condition}\n")


def write_confounds(path, drift):
    with open(path, "w") as f:
        f.write("wobble\n")
        for k, value in enumerate(drift):
            f.write("n/a\n" if k == 0 else f"{value:.6f}\n")


def make_study(root):
    cfg = ["tr: 2.0", "conditions: [tune_a, tune_b]", "confounds: [wobble]",
           "drift: {kind: cosine, cutoff_s: 100}",
           "contrasts:", "  a_vs_b: {tune_a: 1, tune_b: -1}", "  tune_a_only: {tune_a: 1}",
           "  both: [{tune_a: 1}, {tune_b: 1}]", "mask: mask.nii.gz", "subjects:"]
    affine = np.array([[-3, 0, 0, 30], [0, 3, 0, -40], [0, 0, 3.5, -12], [0, 0, 0, 1.0]])
    shape = (6, 5, 4)
    mask = np.ones(shape, np.float32)
    mask[0, 0, :] = 0
    nib.save(nib.Nifti1Image(mask, affine), os.path.join(root, "mask.nii.gz"))
    for subject, kind in (("img", "image"), ("roi", "regions")):
        cfg.append(f"  - id: {subject}")
        cfg.append("    runs:")
        for run in (1, 2):
            onsets = {"tune_a": list(range(10, 230, 40)), "tune_b": list(range(30, 230, 40))}
            if run == 2:
                onsets = {c: [o + 4 for o in v] for c, v in onsets.items()}
            write_events(os.path.join(root, f"{subject}{run}_events.tsv"), onsets)
            wobble = np.cumsum(rng.standard_normal(N)) * 0.1
            write_confounds(os.path.join(root, f"{subject}{run}_conf.tsv"), wobble)
            t = np.arange(N) * TR
            signal = np.zeros(N)
            for onset in onsets["tune_a"]:
                signal += 2.0 * ((t >= onset) & (t < onset + 10))
            if kind == "image":
                data = np.empty(shape + (N,), np.float32)
                rhos = rng.uniform(0.1, 0.6, size=shape)
                for idx in np.ndindex(shape):
                    noise = ar1_noise(N, rhos[idx], 1)[:, 0] * 5
                    data[idx] = 1000 + 10 * idx[0] + signal + noise + 0.002 * t
                data[1, 1, 1, :] = 700.0          # zero variance: excluded
                data[2, 2, 2, 5] = np.nan          # non-finite: excluded
                img = nib.Nifti1Image(data, affine)
                img.header.set_xyzt_units("mm", "sec")
                img.header["pixdim"][4] = TR
                name = f"{subject}{run}.nii.gz"
                nib.save(img, os.path.join(root, name))
            else:
                regions = ["left", "right", "middle"]
                table = np.column_stack([200 + signal * (r + 1) + ar1_noise(N, 0.2 + 0.2 * r, 1)[:, 0]
                                         for r in range(3)])
                name = f"{subject}{run}.tsv"
                np.savetxt(os.path.join(root, name), table, delimiter="\t",
                           header="\t".join(regions), comments="", fmt="%.9g")
            cfg.append(f"      - {{data: {name}, events: {subject}{run}_events.tsv, "
                       f"confounds: {subject}{run}_conf.tsv}}")
    with open(os.path.join(root, "study.yaml"), "w") as f:
        f.write("\n".join(cfg) + "\n")


def read_tsv(path):
    with open(path) as f:
        header = f.readline().rstrip("\n").split("\t")
        rows = [line.rstrip("\n").split("\t") for line in f if line.strip()]
    return header, rows


def gls(y, X, rho):
    sigma = scipy.linalg.toeplitz(rho ** np.arange(len(y)))
    return sm.GLS(y, X, sigma=sigma).fit()


def z_from_t(t, dof):
    return -scipy.stats.norm.ppf(scipy.stats.t.sf(t, dof)) if t < 0 else scipy.stats.norm.isf(scipy.stats.t.sf(t, dof))


def weights_for(names, spec):
    c = np.zeros(len(names))
    for key, w in spec.items():
        c[names.index(key)] = w
    return c


with tempfile.TemporaryDirectory() as root:
    make_study(root)
    run = boldsum("fit", os.path.join(root, "study.yaml"), "--threads", "2")
    print(run.stdout, run.stderr)
    if run.returncode != 0:
        sys.exit("boldsum fit failed")
    out = os.path.join(root, "results")
    t_contrasts = {"a_vs_b": {"tune_a": 1, "tune_b": -1}, "tune_a_only": {"tune_a": 1}}

    # ROI subject: per run against statsmodels GLS at our rho; combined by fixed effects.
    per_run = {}
    for r in (1, 2):
        header, X_rows = read_tsv(os.path.join(out, "roi", f"run-{r}", "design.tsv"))
        X = np.array(X_rows, float)
        Y = np.loadtxt(os.path.join(root, f"roi{r}.tsv"), skiprows=1)
        h, rows = read_tsv(os.path.join(out, "roi", f"run-{r}", "summary.tsv"))
        ours = {(row[0], row[1]): dict(zip(h, row)) for row in rows}
        for name, spec in t_contrasts.items():
            c = weights_for(header, spec)
            for j, region in enumerate(["left", "right", "middle"]):
                row = ours[(name, region)]
                rho = float(row["ar1"])
                res = gls(Y[:, j], X, rho)
                est = c @ res.params
                var = c @ res.cov_params() @ c
                dof = N - np.linalg.matrix_rank(X)
                check(f"roi run {r} {name} {region} estimate", float(row["estimate"]), est, 1e-6)
                check(f"roi run {r} {name} {region} variance", float(row["variance"]), var, 1e-6)
                check(f"roi run {r} {name} {region} t", float(row["t"]), est / np.sqrt(var), 1e-6)
                check(f"roi run {r} {name} {region} z", float(row["z"]), z_from_t(est / np.sqrt(var), dof), 1e-6)
                per_run[(r, name, region)] = (est, var, dof)
    h, rows = read_tsv(os.path.join(out, "roi", "summary.tsv"))
    for row in rows:
        row = dict(zip(h, row))
        (e1, v1, d1), (e2, v2, d2) = per_run[(1, row["contrast"], row["region"])], per_run[(2, row["contrast"], row["region"])]
        w1, w2 = 1 / v1, 1 / v2
        est, var, dof = (w1 * e1 + w2 * e2) / (w1 + w2), 1 / (w1 + w2), d1 + d2
        check(f"roi combined {row['contrast']} {row['region']} estimate", float(row["estimate"]), est, 1e-6)
        check(f"roi combined {row['contrast']} {row['region']} variance", float(row["variance"]), var, 1e-6)
        check(f"roi combined {row['contrast']} {row['region']} dof", float(row["dof"]), dof, 0, 1e-9)
        check(f"roi combined {row['contrast']} {row['region']} z", float(row["z"]), z_from_t(est / np.sqrt(var), dof), 1e-6)

    # Image subject: maps read by nibabel; values against statsmodels at the float32
    # rho we wrote (so tolerance 1e-4: float32 outputs and a float32-rounded rho).
    src = nib.load(os.path.join(root, "img1.nii.gz"))
    mask = nib.load(os.path.join(out, "img", "mask.nii.gz"))
    est_img = nib.load(os.path.join(out, "img", "a_vs_b.estimate.nii.gz"))
    for img in (mask, est_img):
        if not np.allclose(img.affine, src.affine, atol=1e-5):
            failures.append("affine differs from the input's")
        if img.get_data_dtype() != np.float32:
            failures.append("output is not float32")
    m = mask.get_fdata() > 0
    expected_mask = nib.load(os.path.join(root, "mask.nii.gz")).get_fdata() > 0
    expected_mask[1, 1, 1] = expected_mask[2, 2, 2] = False
    if not np.array_equal(m, expected_mask):
        failures.append("mask.nii.gz: excluded voxels not as expected")
    est = est_img.get_fdata()
    var = nib.load(os.path.join(out, "img", "a_vs_b.variance.nii.gz")).get_fdata()
    if not (np.all(np.isnan(est[~m])) and np.all(np.isfinite(est[m]))):
        failures.append("estimate map: NaN must be exactly outside the mask")
    rho_maps = [nib.load(os.path.join(out, "img", f"run-{r}", "ar1.nii.gz")).get_fdata() for r in (1, 2)]
    data = [nib.load(os.path.join(root, f"img{r}.nii.gz")).get_fdata() for r in (1, 2)]
    Xs = [np.array(read_tsv(os.path.join(out, "img", f"run-{r}", "design.tsv"))[1], float) for r in (1, 2)]
    names = read_tsv(os.path.join(out, "img", "run-1", "design.tsv"))[0]
    c = weights_for(names, t_contrasts["a_vs_b"])
    ours_e, ref_e, ours_v, ref_v = [], [], [], []
    for idx in zip(*np.nonzero(m)):
        ests, vars_ = [], []
        for r in range(2):
            res = gls(data[r][idx], Xs[r], rho_maps[r][idx])
            ests.append(c @ res.params)
            vars_.append(c @ res.cov_params() @ c)
        w = 1 / np.array(vars_)
        ref_e.append(np.sum(w * ests) / np.sum(w))
        ref_v.append(1 / np.sum(w))
        ours_e.append(est[idx])
        ours_v.append(var[idx])
    check("image combined a_vs_b estimate", ours_e, ref_e, 1e-4, 1e-4 * np.std(ref_e))
    check("image combined a_vs_b variance", ours_v, ref_v, 1e-4)
    summary = json.load(open(os.path.join(out, "img", "summary.json")))
    if summary["runs"][0]["excluded_zero_variance"] != 1 or summary["runs"][0]["excluded_nonfinite"] != 1:
        failures.append("summary.json: excluded voxel counts")

finish()
