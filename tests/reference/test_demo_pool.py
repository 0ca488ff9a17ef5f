"""Voxelwise group pooling of the demo study: `boldsum pool group.yaml` on the fitted demo
recovers the planted group effect in the demo's auditory regions and stays null
elsewhere.

References, all outside boldsum's code:
- the planted truth: truth.tsv (true_beta per volunteer, region and condition), and the
  regions as the demo's README.txt describes them (spheres of lattice points with
  d^2 <= 6 around the listed centre voxels), rebuilt here in numpy;
- our maps are read with nibabel (Debian python3-nibabel);
- the pooled estimate at sampled voxels is recomputed by weighted least squares in numpy
  from the pool-ready stacks and the written tau2 map: beta = (Z'WZ)^-1 Z'Wy with
  w_i = 1 / (tau2 + v_i) (the mixed-effects meta-regression estimator; e.g. Viechtbauer
  2010, J Stat Softw 36(3), eq. 11), tolerance 1e-4 relative (the stacks and tau2 are
  stored as float32).
The false-positive fractions outside the planted regions are printed; the bounds are
generous multiples of the nominal rates (0.1% for z > 3.09, 5% for |z| > 1.96).
"""
import csv
import os
import sys
import tempfile

import nibabel
import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import boldsum_stdout as run, check, finish  # noqa: E402

CENTRES = {"left_auditory": (7, 22, 17), "right_auditory": (32, 22, 17),
           "motor": (13, 27, 27), "control_region": (20, 8, 14)}
PLANTED = ("left_auditory", "right_auditory")
THRESHOLD = 3.09  # one-sided p < 0.001 uncorrected (common practice)


def region_masks(shape):
    x, y, z = np.indices(shape)
    return {name: (x - cx) ** 2 + (y - cy) ** 2 + (z - cz) ** 2 <= 6
            for name, (cx, cy, cz) in CENTRES.items()}


def true_group_means(path):
    beta = {}
    with open(path) as f:
        for row in csv.DictReader(f, delimiter="\t"):
            beta[(row["subject"], row["region"], row["condition"])] = float(row["true_beta"])
    subjects = sorted({key[0] for key in beta})
    means = {}
    for region in CENTRES:
        known = np.array([beta[(s, region, "melody_known")] for s in subjects])
        new = np.array([beta[(s, region, "melody_new")] for s in subjects])
        means[("melodies_vs_rest", region)] = np.mean(0.5 * known + 0.5 * new)
        means[("known_vs_new", region)] = np.mean(known - new)
    return means


def check_wls(study, contrast, rng):
    """The pooled group mean at sampled voxels against numpy WLS with the written tau2."""
    ready = os.path.join(study, "results", "pool-ready")
    folder = os.path.join(study, "results", "group", contrast)
    y = np.asarray(nibabel.load(os.path.join(ready, contrast + ".estimate.nii.gz")).dataobj,
                   dtype=np.float64)
    v = np.asarray(nibabel.load(os.path.join(ready, contrast + ".variance.nii.gz")).dataobj,
                   dtype=np.float64)
    tau2 = np.asarray(nibabel.load(os.path.join(folder, "tau2.nii.gz")).dataobj, dtype=np.float64)
    estimate = np.asarray(nibabel.load(os.path.join(folder, "group_mean.estimate.nii.gz")).dataobj,
                          dtype=np.float64)
    with open(os.path.join(ready, "subjects.tsv")) as f:
        subjects = [row["subject"] for row in csv.DictReader(f, delimiter="\t")]
    ages = {}
    with open(os.path.join(study, "participants.tsv")) as f:
        for row in csv.DictReader(f, delimiter="\t"):
            ages[row["participant_id"]] = float(row["age"])
    age = np.array([ages[s] for s in subjects])
    design = np.column_stack([np.ones(len(subjects)), age - age.mean()])  # centred covariate
    inside = np.argwhere(np.isfinite(estimate))
    worst = 0.0
    for index in inside[rng.choice(len(inside), size=400, replace=False)]:
        i, j, k = index
        w = 1.0 / (tau2[i, j, k] + v[i, j, k, :])
        zw = design * w[:, None]
        beta = np.linalg.solve(design.T @ zw, zw.T @ y[i, j, k, :])
        worst = max(worst, abs(beta[0] - estimate[i, j, k]) / max(abs(beta[0]), 1e-3))
    check(f"{contrast}: pooled group mean = numpy WLS at 400 voxels (<= 1e-4 relative)",
          worst <= 1e-4, f"largest relative difference {worst:.2e}")


def main():
    with tempfile.TemporaryDirectory() as scratch:
        study = os.path.join(scratch, "demo")
        run("demo", study)
        run("fit", os.path.join(study, "demo.yaml"), "--quiet")
        print(run("pool", os.path.join(study, "group.yaml")), end="")
        truth = true_group_means(os.path.join(study, "truth.tsv"))
        mask = np.asarray(nibabel.load(os.path.join(study, "results", "pool-ready",
                                                    "mask.nii.gz")).dataobj) > 0
        regions = region_masks(mask.shape)
        elsewhere = mask & ~np.any(np.stack(list(regions.values())), axis=0)
        rng = np.random.default_rng(7)
        for contrast in ("melodies_vs_rest", "known_vs_new"):
            folder = os.path.join(study, "results", "group", contrast)
            z = np.asarray(nibabel.load(os.path.join(folder, "group_mean.z.nii.gz")).dataobj,
                           dtype=np.float64)
            estimate = np.asarray(nibabel.load(os.path.join(folder, "group_mean.estimate.nii.gz"))
                                  .dataobj, dtype=np.float64)
            variance = np.asarray(nibabel.load(os.path.join(folder, "group_mean.variance.nii.gz"))
                                  .dataobj, dtype=np.float64)
            check(f"{contrast}: maps are finite inside the mask and NaN outside",
                  np.all(np.isfinite(z[mask])) and np.all(np.isnan(z[~mask])))
            for name, region in regions.items():
                above = np.mean(z[region] > THRESHOLD)
                mean_estimate = estimate[region].mean()
                se = np.sqrt(variance[region].mean())
                target = truth[(contrast, name)]
                print(f"     {contrast:17s} {name:15s} true {target:6.2f}  pooled {mean_estimate:6.2f}"
                      f"  se {se:5.2f}  share z>{THRESHOLD}: {above:.2f}")
                # The region's mean pooled estimate carries the between-subject sampling
                # error of 8 volunteers: within 2.5 of its voxels' standard error.
                check(f"{contrast} {name}: region mean estimate near the planted group mean",
                      abs(mean_estimate - target) <= 2.5 * se)
                if name in PLANTED and contrast == "melodies_vs_rest":
                    check(f"{contrast} {name}: effect found (>= 90% of voxels z > {THRESHOLD})",
                          above >= 0.9)
                if name in PLANTED and contrast == "known_vs_new":
                    # A weaker effect (two of eight volunteers show none): positive throughout.
                    check(f"{contrast} {name}: positive z in >= 90% of voxels",
                          np.mean(z[region] > 0) >= 0.9)
                if name not in PLANTED:
                    check(f"{contrast} {name}: null region stays below {THRESHOLD}", above == 0)
            high = np.mean(z[elsewhere] > THRESHOLD)
            either = np.mean(np.abs(z[elsewhere]) > 1.96)
            print(f"     {contrast}: false-positive fraction outside the regions "
                  f"({elsewhere.sum()} voxels): z > {THRESHOLD}: {100 * high:.3f}% (nominal 0.1%), "
                  f"|z| > 1.96: {100 * either:.2f}% (nominal 5%)")
            check(f"{contrast}: false positives elsewhere: z > {THRESHOLD} in <= 0.5%", high <= 0.005)
            check(f"{contrast}: false positives elsewhere: |z| > 1.96 in <= 7.5%", either <= 0.075)
            check_wls(study, contrast, rng)
    finish()


if __name__ == "__main__":
    main()
