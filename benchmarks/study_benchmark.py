#!/usr/bin/python3
"""Study benchmark: the demo study scaled to many subjects, fitted, re-run and edited.
It prints figures; it is not a test and ctest does not run it. Run it by hand on a quiet
machine (it times things; check `uptime` first):

  scripts/build
  /usr/bin/python3 benchmarks/study_benchmark.py [--build build] [--subjects 40]
                                                 [--work /tmp/boldsum-study-bench]

The study: `boldsum demo` written with ceil(subjects / 8) different seeds (8 volunteers
each, 2 runs of 180 volumes on a 40 x 48 x 36 grid), listed in one config as `subjects`
distinct subjects. The folders stay in --work and are reused. Each step runs
`boldsum fit study.yaml --quiet` under /usr/bin/time -v (all cores, default threads):

  first fit          an empty output folder
  unchanged re-run   nothing changed (target: >= 20x faster than the first fit)
  contrast-only      one contrast added to the config (recomputed from the saved fit
                     parameters; target: >= 5x faster than the refit below)
  refit              the same config with --force (every subject fitted again)

and prints wall seconds, CPU seconds (user + sys), CPU utilisation = CPU / (wall x
cores), peak RSS, and the ratios beside their targets. PASS/MISS is information; it
exits 0 once the figures are printed.
"""
import argparse
import math
import os
import shutil
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from measure import boldsum_binary, load_average, run_timed  # noqa: E402

PER_DEMO = 8            # volunteers per demo folder
TARGET_UNCHANGED = 20.0  # first fit / unchanged re-run, at least
TARGET_CONTRAST = 5.0    # refit / contrast-only re-run, at least
ADDED_CONTRAST = "  known_only: {melody_known: 1}\n"


def write_demos(boldsum, work, count):
    folders = []
    for k in range(count):
        folder = os.path.join(work, "demo-%d" % k)
        if not os.path.exists(os.path.join(folder, "demo.yaml")):
            shutil.rmtree(folder, ignore_errors=True)
            subprocess.run([boldsum, "demo", folder, "--seed", str(20261202 + k)], check=True,
                           stdout=subprocess.DEVNULL)
        folders.append(folder)
    return folders


def study_config(folders, subjects, extra_contrast):
    """demo.yaml's model with `subjects` subjects drawn from the demo folders."""
    with open(os.path.join(folders[0], "demo.yaml")) as f:
        text = f.read()
    model = [line for line in text[:text.index("subjects:\n")].splitlines(keepends=True)
             if not line.startswith("#") and not line.startswith("mask:")]
    if extra_contrast:
        at = model.index("contrasts:\n") + 1
        model.insert(at, ADDED_CONTRAST)
    lines = model + ["mask: %s\n" % os.path.join(folders[0], "mask.nii.gz"), "subjects:\n"]
    for i in range(subjects):
        folder = folders[i // PER_DEMO]
        source = "s%02d" % (i % PER_DEMO + 1)
        lines.append("  - id: p%02d\n    runs:\n" % (i + 1))
        for run in (1, 2):
            stem = os.path.join(folder, source, "run-%d" % run)
            lines.append("      - {data: %s_bold.nii.gz, events: %s_events.tsv, "
                         "confounds: %s_confounds.tsv}\n" % (stem, stem, stem))
    lines.append("output: results\n")
    return "".join(lines)


def timed_fit(boldsum, config, extra):
    return run_timed([boldsum, "fit", config, "--quiet"] + extra)


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--build", default="build")
    parser.add_argument("--subjects", type=int, default=40)
    parser.add_argument("--work", default="/tmp/boldsum-study-bench")
    args = parser.parse_args()
    boldsum = boldsum_binary(args.build)
    os.makedirs(args.work, exist_ok=True)
    cores = os.cpu_count()

    print("[%s] writing %d demo folders (load %s)" % (
        time.strftime("%H:%M:%S"), math.ceil(args.subjects / PER_DEMO), load_average()),
        file=sys.stderr, flush=True)
    folders = write_demos(boldsum, args.work, math.ceil(args.subjects / PER_DEMO))
    config = os.path.join(args.work, "study.yaml")
    shutil.rmtree(os.path.join(args.work, "results"), ignore_errors=True)
    with open(config, "w") as f:
        f.write(study_config(folders, args.subjects, extra_contrast=False))

    steps = []
    print("[%s] first fit" % time.strftime("%H:%M:%S"), file=sys.stderr, flush=True)
    steps.append(("first fit", timed_fit(boldsum, config, [])))
    print("[%s] unchanged re-run" % time.strftime("%H:%M:%S"), file=sys.stderr, flush=True)
    steps.append(("unchanged re-run", timed_fit(boldsum, config, [])))
    with open(config, "w") as f:
        f.write(study_config(folders, args.subjects, extra_contrast=True))
    print("[%s] contrast-only re-run" % time.strftime("%H:%M:%S"), file=sys.stderr, flush=True)
    steps.append(("contrast-only re-run", timed_fit(boldsum, config, [])))
    print("[%s] refit (--force)" % time.strftime("%H:%M:%S"), file=sys.stderr, flush=True)
    steps.append(("refit (--force)", timed_fit(boldsum, config, ["--force"])))

    timing = dict(steps)
    print("boldsum study benchmark: %d subjects x 2 runs x 180 volumes, 40x48x36 grid, "
          "%d cores" % (args.subjects, cores))
    print("%-22s %9s %9s %11s %10s %6s" % ("step", "wall s", "CPU s", "CPU use", "peak RSS",
                                            "load"))
    for name, t in steps:
        print("%-22s %9.2f %9.2f %10.0f%% %7.0f MB %6s" % (
            name, t["wall"], t["cpu"], 100 * t["cpu"] / (t["wall"] * cores), t["rss"] / 1e6,
            t["load"]))
    unchanged = timing["first fit"]["wall"] / timing["unchanged re-run"]["wall"]
    contrast = timing["refit (--force)"]["wall"] / timing["contrast-only re-run"]["wall"]
    print("unchanged re-run: %.1fx faster than the first fit (target >= %.0fx: %s)" % (
        unchanged, TARGET_UNCHANGED, "PASS" if unchanged >= TARGET_UNCHANGED else "MISS"))
    print("contrast-only re-run: %.1fx faster than a refit (target >= %.0fx: %s)" % (
        contrast, TARGET_CONTRAST, "PASS" if contrast >= TARGET_CONTRAST else "MISS"))
    first = timing["first fit"]
    print("first fit: %.1f s wall, CPU utilisation %.0f%% of %d cores" % (
        first["wall"], 100 * first["cpu"] / (first["wall"] * cores), cores))


if __name__ == "__main__":
    main()
