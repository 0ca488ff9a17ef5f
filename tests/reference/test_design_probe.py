"""Whole design matrices from boldsum's design module against design_reference.py.

design_reference.py rebuilds each design with numpy/scipy (Debian python3-numpy,
python3-scipy): scipy.stats.gamma for the kernels, numpy.convolve, scipy.fft.dct for the
cosine drift, numpy.polynomial.legendre for the polynomial drift. The diagnostics are
checked against numpy.linalg (matrix_rank, cond, pinv, corrcoef) and statsmodels'
variance_inflation_factor (Debian python3-statsmodels); the SVG is parsed with
xml.etree.ElementTree. Run by ctest with BOLDSUM_PROBE_DIR set.
"""
import os
import sys
import tempfile
import xml.etree.ElementTree as ET

import numpy as np
from statsmodels.stats.outliers_influence import variance_inflation_factor

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import design_reference as ref  # noqa: E402

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import check, finish, probe_stdout  # noqa: E402

PROBE = os.path.join(os.environ.get("BOLDSUM_PROBE_DIR", "."), "design_probe")
TMP = tempfile.mkdtemp(prefix="design_probe_")


def write_model(case):
    """The probe's line format (see tests/tools/design_probe.cc)."""
    lines = ["tr %r" % case["tr"], "slice_reference %r" % case["sref"],
             "volumes %d" % case["n"], "hrf " + case.get("hrf", "double_gamma"),
             "derivatives " + case.get("derivatives", "none"),
             "fir %r %d" % (case.get("fir_bin", 0.0), case.get("fir_bins", 0)),
             "drift " + " ".join(str(v) for v in case.get("drift", ("cosine", 128.0)))]
    for name, events in case["conditions"]:
        lines.append("condition " + name)
        lines += ["event %s %r %r %r" % ((name,) + tuple(e)) for e in events]
    if "confounds" in case:
        path = os.path.join(TMP, case["name"] + "_confounds.tsv")
        names = list(case["confounds"].keys())
        with open(path, "w") as f:
            f.write("\t".join(names) + "\n")
            for r in range(case["n"]):
                cells = [case["confounds"][k][r] for k in names]
                f.write("\t".join("n/a" if np.isnan(v) else repr(float(v)) for v in cells) + "\n")
        lines.append("confounds " + path)
        lines += ["confound " + name for name in case.get("use", [])]
    if "censor" in case:
        lines.append("censor %s %r" % case["censor"])
    for name, kind, rows in case.get("contrasts", []):
        lines.append("contrast %s %s %s" % (name, kind, " | ".join(
            " ".join("%s=%r" % kv for kv in row.items()) for row in rows)))
    path = os.path.join(TMP, case["name"] + ".model")
    with open(path, "w") as f:
        f.write("\n".join(lines) + "\n")
    return path


def run_probe(path, mode):
    return probe_stdout(PROBE, path, mode)


def reference(case, method):
    confounds = [(k, np.asarray(case["confounds"][k], float)) for k in case.get("use", [])]
    censor = None
    if "censor" in case:
        censor = (np.asarray(case["confounds"][case["censor"][0]], float), case["censor"][1])
    return ref.build_design(case["tr"], case["sref"], case["n"], case["conditions"],
                            hrf=case.get("hrf", "double_gamma"),
                            derivatives=case.get("derivatives", "none"),
                            fir_bin=case.get("fir_bin", 0.0), fir_bins=case.get("fir_bins", 0),
                            drift=case.get("drift", ("cosine", 128.0)), confounds=confounds,
                            censor=censor, method=method)


rng = np.random.default_rng(20240611)
melodies = [(12.0, 6.0, 1.0), (47.3, 6.0, 1.0), (90.15, 6.0, 0.8), (151.0, 6.0, 1.2)]
tones = [(4.2, 0.0, 1.0), (33.33, 0.0, 1.0), (70.0, 0.5, 2.0), (118.7, 0.0, -1.0),
         (-3.0, 2.0, 1.0)]
n5 = 110
motion = rng.normal(size=n5) * 0.2
motion[[3, 40]] = np.nan
pulse = np.sin(np.arange(n5) * 0.7)
framewise = np.abs(rng.normal(size=n5)) * 0.3
framewise[[7, 8, 60]] = [0.9, 0.7, 1.5]
framewise[20] = np.nan

cases = [
    dict(name="dg_derivs", tr=2.0, sref=0.5, n=100, derivatives="time_dispersion",
         conditions=[("melody", melodies), ("tone", tones), ("rest", [])],
         contrasts=[("m_gt_t", "t", [{"melody": 1, "tone": -1}]),
                    ("rest", "t", [{"rest": 1}]),
                    ("both", "f", [{"melody": 1}, {"tone": 1, "tone_dt": 0.5}])]),
    dict(name="glover_poly", tr=0.8, sref=0.0, n=260, hrf="glover", derivatives="time",
         drift=("polynomial", 3), conditions=[("melody", melodies), ("tone", tones)],
         contrasts=[("m", "t", [{"melody": 1, "drift_poly2": 0.0}])]),
    dict(name="fir_default", tr=2.5, sref=1.0, n=80, hrf="fir", drift=("none",),
         conditions=[("melody", melodies), ("tone", tones)],
         contrasts=[("m_gt_t", "t", [{"melody": 1, "tone": -1}])]),
    dict(name="fir_bins", tr=2.0, sref=0.5, n=95, hrf="fir", fir_bin=1.5, fir_bins=10,
         conditions=[("melody", melodies), ("tone", tones)], drift=("cosine", 100.0)),
    dict(name="confounds", tr=2.5, sref=1.0, n=n5, conditions=[("melody", melodies)],
         confounds={"motion": motion, "pulse": pulse, "framewise": framewise},
         use=["pulse", "motion"], censor=("framewise", 0.5), drift=("cosine", 100.0),
         contrasts=[("m", "t", [{"melody": 1}]), ("mot", "t", [{"motion": 1}])]),
    dict(name="sref0_tr08", tr=0.8, sref=0.0, n=150, derivatives="time_dispersion",
         conditions=[("melody", melodies), ("tone", tones)], drift=("cosine", 60.0)),
    dict(name="sref1_tr25", tr=2.5, sref=1.0, n=70, hrf="glover",
         derivatives="time_dispersion", conditions=[("melody", melodies), ("tone", tones)]),
    dict(name="duplicate", tr=2.0, sref=0.5, n=n5, conditions=[("melody", melodies)],
         confounds={"pulse": pulse, "pulse_copy": -3.0 * pulse, "motion": motion},
         use=["pulse", "motion", "pulse_copy"],
         contrasts=[("m", "t", [{"melody": 1}]), ("p", "t", [{"pulse": 1}])]),
]

worst_exact = {}
for case in cases:
    path = write_model(case)
    text = run_probe(path, "tsv").splitlines()
    names = text[0].split("\t")
    x = np.array([[float(v) for v in line.split("\t")] for line in text[1:]])
    want_names, want = reference(case, "grid")
    check(case["name"] + ": column names", names == want_names,
          "" if names == want_names else "%s vs %s" % (names, want_names))
    if names != want_names or x.shape != want.shape:
        continue
    # Same discretisation, built independently: rounding only (dispersion columns carry
    # a 1/0.01 finite difference, hence the 1e-11 relative allowance).
    scale = np.maximum(np.abs(want).max(axis=0), 1.0)
    err = (np.abs(x - want) / scale).max()
    check(case["name"] + ": values = independent grid build", err < 1e-11, "rel err %.1e" % err)
    if case.get("hrf") != "fir":
        _, exact = reference(case, "exact")
        # Grid approximation error, absolute, per unit of event amplitude (see test_hrf.py):
        # measured <= 5.4e-5 main, 2.9e-5 time derivative, 1.4e-4 dispersion derivative.
        for i, nm in enumerate(names):
            kind = next((k for c, _ in case["conditions"] for k, suffix in
                         (("main", ""), ("time", "_dt"), ("dispersion", "_disp"))
                         if nm == c + suffix), None)
            if kind is None:
                continue
            err = np.abs(x[:, i] - exact[:, i]).max()
            worst_exact[kind] = max(worst_exact.get(kind, 0.0), err)
            tol = {"main": 1e-4, "time": 1e-4, "dispersion": 3e-4}[kind]
            amplitude = max([abs(e[2]) for c, ev in case["conditions"] for e in ev
                             if nm.startswith(c)] + [0.0])
            check("%s: %s vs continuous model (gamma.cdf)" % (case["name"], nm),
                  err <= tol * max(amplitude, 1e-300) or err == 0.0, "abs err %.1e" % err)

    report = run_probe(path, "report").splitlines()
    info = {}
    for line in report:
        w = line.split()
        info.setdefault(w[0], []).append(w[1:])
    eps = np.finfo(float).eps
    s = np.linalg.svd(x, compute_uv=False)
    rank = np.linalg.matrix_rank(x)  # numpy's default tol: S.max() * max(N, p) * eps
    check(case["name"] + ": rank = numpy.linalg.matrix_rank", int(info["rank"][0][0]) == rank,
          "%s vs %d" % (info["rank"][0][0], rank))
    norms = np.linalg.norm(x, axis=0)
    cond = np.linalg.cond(x / np.where(norms > 0, norms, 1.0))
    got = float(info["condition_number"][0][0])
    ok = (np.isinf(got) and rank < x.shape[1]) or abs(got - cond) < 1e-8 * cond
    check(case["name"] + ": condition number = numpy.linalg.cond", ok, "%g vs %g" % (got, cond))
    if case["name"] == "duplicate":
        check("duplicate: dependent columns named", info["dependent"][0] == ["pulse", "pulse_copy"],
              str(info["dependent"][0]))
    for cond_name, mc, mw, vif in info.get("condition", []):
        cols = [i for i, nm in enumerate(names) if nm == cond_name or
                nm.startswith(cond_name + "_bin")]
        main = x[:, cols].sum(axis=1)
        others = [i for i in range(len(names)) if i not in cols]
        if np.ptp(main) == 0:
            check(case["name"] + ": " + cond_name + " empty -> VIF inf", vif == "inf")
            continue
        design = np.column_stack([main, x[:, others]])
        # statsmodels' VIF: OLS of column 0 on the rest (centred R^2, a constant is present).
        want_vif = variance_inflation_factor(design, 0)
        ok = abs(float(vif) - want_vif) < 1e-7 * want_vif or (rank < x.shape[1] and want_vif > 1e10)
        check(case["name"] + ": VIF %s = statsmodels" % cond_name, ok,
              "%s vs %.10g" % (vif, want_vif))
        corr = [(abs(np.corrcoef(main, x[:, i])[0, 1]), names[i]) for i in others
                if np.ptp(x[:, i]) > 1e-12 * np.abs(x[:, i]).max()]
        best = max(corr)
        check(case["name"] + ": max |corr| %s = numpy.corrcoef" % cond_name,
              abs(float(mc) - best[0]) < 1e-12 and mw == best[1], "%s %s vs %.15g %s" % (
                  mc, mw, best[0], best[1]))
    # ColumnCorrelations against numpy.corrcoef; constant columns (intercept, a condition
    # without events) have no correlation: nan. Tolerance 1e-12 (both centre, then divide).
    got = np.array([[float(v) for v in row[1:]] for row in info["correlations"]])
    constant = np.array([np.ptp(x[:, i]) <= 1e-12 * np.abs(x[:, i]).max() for i in range(len(names))])
    want = np.full((len(names), len(names)), np.nan)
    live = np.flatnonzero(~constant)
    if live.size:
        want[np.ix_(live, live)] = np.corrcoef(x[:, live], rowvar=False)
    same_nan = np.array_equal(np.isnan(got), np.isnan(want))
    worst = np.nanmax(np.abs(got - want)) if live.size else 0.0
    check(case["name"] + ": column correlations = numpy.corrcoef", same_nan and worst < 1e-12,
          "largest difference %.2e, nan pattern equal %s" % (worst, same_nan))
    weights = {}
    for w in info.get("weights", []):
        weights.setdefault(w[0], []).append([float(v) for v in w[2:]])
    pinv = np.linalg.pinv(x.T @ x, rcond=1e-10)
    _, sv, vt = np.linalg.svd(x)
    row_space = vt[:rank]
    for (cname, _kind, rows), entry in zip(case.get("contrasts", []), info.get("contrast", [])):
        c = np.zeros((len(rows), len(names)))
        for r, row in enumerate(rows):
            for key, wgt in row.items():
                if key in names:
                    c[r, names.index(key)] += wgt
                else:  # a FIR condition: spread evenly over its bins
                    bins = [i for i, nm in enumerate(names) if nm.startswith(key + "_bin")]
                    c[r, bins] += wgt / len(bins)
        check(case["name"] + ": weights " + cname, np.array_equal(np.array(weights[cname]), c))
        resid = c - c @ row_space.T @ row_space
        estimable = all(np.linalg.norm(resid[r]) <= 1e-8 * np.linalg.norm(c[r])
                        for r in range(len(rows)))
        eff = 1.0 / np.trace(c @ pinv @ c.T) if estimable else 0.0
        got_est, got_eff = entry[1] == "1", float(entry[2])
        check(case["name"] + ": contrast %s estimable=%s, efficiency = numpy pinv" % (
            cname, got_est), got_est == estimable and abs(got_eff - eff) <= 1e-8 * max(eff, 1e-300),
              "%g vs %g" % (got_eff, eff))

    svg = run_probe(path, "svg")
    try:
        root = ET.fromstring(svg)
        labels = [t.text for t in root.iter("{http://www.w3.org/2000/svg}text")]
        check(case["name"] + ": SVG parses and labels every column",
              all(nm in labels for nm in names))
    except ET.ParseError as error:
        check(case["name"] + ": SVG parses", False, str(error))

warn = run_probe(write_model(cases[0]), "warnings")
check("empty condition warned", "condition 'rest' has no events in this run" in warn, warn)
print("largest absolute deviation from the continuous model: " +
      ", ".join("%s %.1e" % kv for kv in sorted(worst_exact.items())))

finish()
