"""The demo study's planted truth means what a fit estimates.

Fits the committed ROI part of the demo (examples/melodies-roi) with a design built here,
independently of boldsum, from the contract in DESIGN.md (volume k at (k + 0.5) * TR;
events as boxcars, zero-duration events as unit-area impulses; a double-gamma HRF of unit
area on 0..32 s; cosine drift; confounds; one indicator per censored volume), and with
AR(1) GLS from statsmodels (GLSAR, iterated). The estimates of every subject, region and
condition must agree with truth.tsv within their standard errors.

Outside sources: scipy.stats.gamma (the HRF, integrated exactly through the gamma CDF)
and statsmodels.regression.linear_model.GLSAR (the AR(1) fit).
"""
import csv
import math
import os
import sys

import numpy as np
import scipy.stats
import statsmodels.api as sm
import yaml

SOURCE = os.environ.get("BOLDSUM_SOURCE_DIR",
                        os.path.join(os.path.dirname(__file__), "..", ".."))
STUDY = os.path.join(SOURCE, "examples", "melodies-roi")


def read_tsv(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f, delimiter="\t"))


# The canonical HRF's cumulative area: gamma(6, 1 s) minus gamma(16, 1 s) / 6, cut at 32 s
# (the common-practice double gamma that DESIGN.md specifies).
def hrf_cdf(u):
    u = np.clip(u, 0.0, 32.0)
    return scipy.stats.gamma.cdf(u, 6) - scipy.stats.gamma.cdf(u, 16) / 6


HRF_AREA = float(hrf_cdf(np.array([32.0]))[0])


def hrf_density(u):
    inside = (u >= 0) & (u <= 32)
    value = scipy.stats.gamma.pdf(u, 6) - scipy.stats.gamma.pdf(u, 16) / 6
    return np.where(inside, value, 0.0) / HRF_AREA


def task_regressor(events, times):
    column = np.zeros_like(times)
    for onset, duration in events:
        if duration == 0:
            column += hrf_density(times - onset)  # unit-area impulse
        else:  # boxcar of height 1: exact integral of the HRF over the event
            column += (hrf_cdf(times - onset) - hrf_cdf(times - onset - duration)) / HRF_AREA
    return column


def run_design(config, events_path, confounds_path, n):
    tr = float(config["tr"])
    times = (np.arange(n) + float(config["slice_reference"])) * tr
    events = read_tsv(events_path)
    columns, names = [], []
    for condition in config["conditions"]:
        chosen = [(float(e["onset"]), float(e["duration"])) for e in events
                  if e["trial_type"] == condition]
        columns.append(task_regressor(chosen, times))
        names.append(condition)
    confounds = read_tsv(confounds_path)
    for name in config["confounds"]:
        columns.append(np.array([float(row[name]) for row in confounds]))
        names.append(name)
    censor = config["censor"]
    signal = [0.0 if row[censor["column"]] == "n/a" else float(row[censor["column"]])
              for row in confounds]
    for k, value in enumerate(signal):
        if value > float(censor["above"]):
            indicator = np.zeros(n)
            indicator[k] = 1.0
            columns.append(indicator)
            names.append("censor_%d" % k)
    cutoff = float(config["drift"]["cutoff_s"])
    for j in range(1, int(math.floor(2 * n * tr / cutoff)) + 1):
        columns.append(np.cos(math.pi * j * (np.arange(n) + 0.5) / n))
        names.append("drift_cos%d" % j)
    columns.append(np.ones(n))
    names.append("intercept")
    return np.column_stack(columns), names


def main():
    with open(os.path.join(STUDY, "demo_roi.yaml")) as f:
        config = yaml.safe_load(f)
    conditions = config["conditions"]
    truth = {(r["subject"], r["region"], r["condition"]): float(r["true_beta"])
             for r in read_tsv(os.path.join(STUDY, "truth.tsv"))}

    z_scores, failures, censored = [], [], 0
    for subject in config["subjects"]:
        # Per run GLSAR, then inverse-variance fixed effects over runs.
        sums = {}
        for run in subject["runs"]:
            table = read_tsv(os.path.join(STUDY, run["data"]))
            regions = list(table[0].keys())
            y_all = np.array([[float(row[r]) for r in regions] for row in table])
            x, names = run_design(config, os.path.join(STUDY, run["events"]),
                                  os.path.join(STUDY, run["confounds"]), len(table))
            censored += sum(name.startswith("censor_") for name in names)
            for j, region in enumerate(regions):
                fit = sm.GLSAR(y_all[:, j], x, rho=1).iterative_fit(maxiter=20)
                for c, condition in enumerate(conditions):
                    weight = 1.0 / fit.bse[c] ** 2
                    total = sums.setdefault((region, condition), [0.0, 0.0])
                    total[0] += weight * fit.params[c]
                    total[1] += weight
        for (region, condition), (weighted, weight) in sums.items():
            estimate, se = weighted / weight, weight ** -0.5
            z = (estimate - truth[(subject["id"], region, condition)]) / se
            z_scores.append(z)
            if abs(z) > 4.5:
                failures.append("%s %s %s: estimate %.3f, truth %.3f, se %.3f" % (
                    subject["id"], region, condition, estimate,
                    truth[(subject["id"], region, condition)], se))

    z_scores = np.array(z_scores)
    print("demo truth vs statsmodels GLSAR: %d effects, %d censored volumes, "
          "mean z %.3f, rms z %.3f, max |z| %.3f"
          % (len(z_scores), censored, z_scores.mean(), math.sqrt((z_scores ** 2).mean()),
             abs(z_scores).max()))
    ok = True
    if censored == 0:
        print("FAIL: no volume is censored; the demo should exercise censoring")
        ok = False
    if failures:
        print("FAIL: estimates further than 4.5 standard errors from the truth:")
        print("\n".join(failures))
        ok = False
    # 96 z-scores of a calibrated fit have an rms close to 1 and a mean near 0. They are
    # correlated (the regions of a run share a global fluctuation; the conditions of a
    # region share its noise), so the mean spreads far more than 1/sqrt(96): the bounds
    # (|mean| < 1, rms 0.7..1.5) allow for that and for the noise not being exactly AR(1)
    # while catching a truth in the wrong units or a misplaced regressor.
    if abs(z_scores.mean()) > 1.0 or not 0.7 < math.sqrt((z_scores ** 2).mean()) < 1.5:
        print("FAIL: z-scores are not centred on the truth with unit spread")
        ok = False
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
