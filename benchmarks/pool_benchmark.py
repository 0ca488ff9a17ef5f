#!/usr/bin/python3
"""Group-stage benchmark: `boldsum pool` with method mixed (REML between-subject
variance) on whole-brain stacks. It prints figures; it is not a test and ctest does not
run it. Run it by hand on a quiet machine (check `uptime` first):

  scripts/build
  /usr/bin/python3 benchmarks/pool_benchmark.py [--build build] [--subjects 40]
                                                [--work /tmp/boldsum-pool-bench]

The input: a pool-ready folder written once into --work with nibabel (Debian
python3-nibabel): a 91 x 109 x 91 grid with an ellipsoid mask of ~230k voxels, 4D
float32 estimate and variance stacks with one volume per subject, subjects.tsv and a
participants table with an age column. Per voxel the estimates are
b0 + u_i + e_i with u_i ~ N(0, tau2), e_i ~ N(0, v_i), v_i = s2 * chi2(dof)/dof; tau2
is 0 in a third of the voxels and spread over four decades elsewhere, so REML meets the
boundary as often as the interior. The group model: intercept + centred age, contrasts
on both, method mixed.

Printed: wall seconds and voxels per second of `boldsum pool` with 1 and with 2 threads
(whole command: reading the stacks, pooling, writing the maps), CPU seconds, and the REML
iterations per voxel (median, max) as boldsum reports them.
"""
import argparse
import os
import re
import shutil
import sys

import nibabel
import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from measure import boldsum_binary, run_timed  # noqa: E402

DIMS = (91, 109, 91)
SEMI_AXES = (36, 44, 35)


def write_input(folder, subjects, seed=11):
    ready = os.path.join(folder, "pool-ready")
    if os.path.exists(os.path.join(ready, "subjects.tsv")):
        return
    shutil.rmtree(ready, ignore_errors=True)
    os.makedirs(ready)
    rng = np.random.default_rng(seed)
    x, y, z = np.indices(DIMS)
    centre = [(d - 1) / 2 for d in DIMS]
    radius = sum(((c - m) / a) ** 2 for c, m, a in zip((x, y, z), centre, SEMI_AXES))
    mask = radius <= 1.0
    n = int(mask.sum())
    affine = np.diag([2.0, 2.0, 2.0, 1.0])
    affine[:3, 3] = [-90, -126, -72]
    tau2 = np.where(rng.random(n) < 1 / 3, 0.0, 10 ** rng.uniform(-2, 2, n))
    s2 = 10 ** rng.uniform(-1, 1, n)
    dof = 300
    v = s2[:, None] * rng.chisquare(dof, (n, subjects)) / dof
    estimate = 1.0 + rng.normal(size=(n, subjects)) * np.sqrt(tau2[:, None]) \
        + rng.normal(size=(n, subjects)) * np.sqrt(v)
    for name, values in (("estimate", estimate), ("variance", v)):
        volume = np.full(DIMS + (subjects,), np.nan, dtype=np.float32)
        volume[mask] = values.astype(np.float32)
        image = nibabel.Nifti1Image(volume, affine)
        image.header.set_xyzt_units("mm", "sec")
        image.set_sform(affine, code=1)
        image.set_qform(affine, code=1)
        nibabel.save(image, os.path.join(ready, "task.%s.nii.gz" % name))
    mask_image = nibabel.Nifti1Image(mask.astype(np.float32), affine)
    mask_image.set_sform(affine, code=1)
    mask_image.set_qform(affine, code=1)
    nibabel.save(mask_image, os.path.join(ready, "mask.nii.gz"))
    ids = ["sub-%02d" % (i + 1) for i in range(subjects)]
    with open(os.path.join(ready, "subjects.tsv"), "w") as f:
        f.write("subject\tdof_task\n" + "".join("%s\t%d\n" % (s, dof) for s in ids))
    ages = rng.integers(19, 60, subjects)
    with open(os.path.join(folder, "participants.tsv"), "w") as f:
        f.write("participant_id\tage\n" + "".join("%s\t%d\n" % (s, a) for s, a in zip(ids, ages)))
    print("input: %d voxels in the mask, %d subjects" % (n, subjects), file=sys.stderr)


def write_config(folder):
    path = os.path.join(folder, "group.yaml")
    with open(path, "w") as f:
        f.write("input: pool-ready\nfirst_level_contrasts: [task]\nparticipants: participants.tsv\n"
                "design: {intercept: true, covariates: [age]}\n"
                "contrasts:\n  mean: {intercept: 1}\n  age: {age: 1}\n"
                "method: mixed\noutput: group\n")
    return path


def timed_pool(boldsum, config, threads):
    t = run_timed([boldsum, "pool", config, "--threads", str(threads)])
    found = re.search(r"task: (\d+) of (\d+) pooled.*REML iterations median (\d+), max (\d+)",
                      t["stdout"])
    if not found:
        sys.exit("unexpected output of boldsum pool:\n" + t["stdout"])
    t.update(pooled=int(found.group(1)), median=int(found.group(3)), max=int(found.group(4)))
    return t


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--build", default="build")
    parser.add_argument("--subjects", type=int, default=40)
    parser.add_argument("--work", default="/tmp/boldsum-pool-bench")
    args = parser.parse_args()
    boldsum = boldsum_binary(args.build)
    folder = os.path.join(args.work, "s%d" % args.subjects)
    os.makedirs(folder, exist_ok=True)
    write_input(folder, args.subjects)
    config = write_config(folder)
    print("boldsum pool benchmark: method mixed, %d subjects, intercept + age, 2 contrasts"
          % args.subjects)
    print("%-8s %9s %9s %14s %10s %10s %12s %6s" % (
        "threads", "voxels", "wall s", "voxels/s", "CPU s", "peak RSS", "REML it.", "load"))
    for threads in (1, 2):
        t = timed_pool(boldsum, config, threads)
        print("%-8d %9d %9.2f %14.0f %10.2f %7.0f MB %7d/%-4d %6s" % (
            threads, t["pooled"], t["wall"], t["pooled"] / t["wall"], t["cpu"], t["rss"] / 1e6,
            t["median"], t["max"], t["load"]))
    print("REML iterations per voxel: median/max as printed by boldsum pool; voxels/s over the "
          "whole command (read, pool, write)")


if __name__ == "__main__":
    main()
