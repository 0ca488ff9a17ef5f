#!/usr/bin/python3
"""First-level fit benchmark: prints figures, side by side for a short and a long run.
It is a measurement, not a test: it always exits 0 once the figures are printed, and it
is not run by ctest (the full size is too big for CI). Run it by hand on a quiet machine:

  scripts/build -DBOLDSUM_BENCHMARKS=ON
  /usr/bin/python3 benchmarks/fit_benchmark.py [--build build] [--work /tmp/boldsum-bench]
                                               [--scale full|small] [--repeat R]

--scale full (default): a 91 x 109 x 91 grid, an ellipsoid mask of ~232k voxels, runs of
  N = 300 (TR 2 s) and N = 1200 (TR 0.8 s, so both have ~20-30 design columns with
  cosine drift at 128 s); uncompressed 1.08 GB and 4.33 GB. Generating both the first
  time takes a few minutes; the files stay in --work and are reused.
--scale small: a 45 x 54 x 45 grid (~29k voxels), N = 100 and 400, for trying it out.

Figures (targets beside them; PASS/MISS is information only):
(a) voxels/s of boldsum's compute (FitRun + EstimateContrasts + TestContrast, data in
    memory, benchmarks/fit_throughput) against the numpy GLS in benchmarks/numpy_gls.py
    (run on every k-th voxel, ~20k, and scaled), with their agreement. numpy uses
    Debian's OpenBLAS when libopenblas0-pthread is installed (or the folder given by
    --numpy-blas), else the system's libblas.so.3 (the reference BLAS is ~20x slower at
    GEMM); it runs with OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE unset (they slow a current
    OpenBLAS) and with 1 and 2 BLAS threads, the faster kept.
(b) wall time of `boldsum fit CONFIG --threads 2 --no-report` end to end (planning,
    checksums, reading, fitting, every output file, pool-ready stacks) against
    `gzip -dc FILE`. The HTML report, which `boldsum fit` writes by default after a fit
    of the whole study, reads the 4D data a second time; `boldsum fit` with it is timed
    once more and printed for information.
(c) peak resident memory of that `boldsum fit --no-report` (/usr/bin/time -v) as a
    fraction of the uncompressed 4D data.
"""
import argparse
import json
import os
import re
import shutil
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import synthetic_run  # noqa: E402
from measure import load_average  # noqa: E402

SCALES = {
    "full": {"dims": (91, 109, 91), "semi_axes": (36, 44, 35), "runs": ((300, 2.0), (1200, 0.8))},
    "small": {"dims": (45, 54, 45), "semi_axes": (18, 22, 17.5), "runs": ((100, 2.0), (400, 0.8))},
}
TARGET_SPEEDUP = 20.0   # (a) ours / numpy, at least
TARGET_GZIP = 1.0       # (b) boldsum fit / gzip -dc, at most
TARGET_MEMORY = 0.35    # (c) peak RSS / uncompressed 4D size at the long run, at most
# numpy's BLAS: Debian's OpenBLAS (package libopenblas0-pthread) when it is installed;
# a system whose libblas.so.3 is the reference BLAS makes numpy ~20x slower at GEMM.
DEFAULT_BLAS = "/usr/lib/x86_64-linux-gnu/openblas-pthread"
AGREEMENT = 1e-6        # (a) relative agreement asked of beta and variances


def timed(command, **kwargs):
    start = time.perf_counter()
    done = subprocess.run(command, check=True, **kwargs)
    return time.perf_counter() - start, done


def gzip_seconds(path, repeat):
    best = float("inf")
    for _ in range(repeat):
        seconds, _ = timed(["sh", "-c", 'gzip -dc "$0" > /dev/null', path])
        best = min(best, seconds)
    return best


def fit_seconds_and_rss(boldsum, folder, repeat, report=False):
    """Best wall time and largest peak RSS (bytes) of `boldsum fit --threads 2`, without
    the HTML report unless `report`."""
    best, rss = float("inf"), 0
    out = os.path.join(folder, "out")
    for _ in range(repeat):
        shutil.rmtree(out, ignore_errors=True)
        command = ["/usr/bin/time", "-v", boldsum, "fit", os.path.join(folder, "config.yaml"),
                   "--threads", "2", "--force", "--quiet"] + ([] if report else ["--no-report"])
        seconds, done = timed(command, stderr=subprocess.PIPE, text=True)
        best = min(best, seconds)
        found = re.search(r"Maximum resident set size \(kbytes\): (\d+)", done.stderr)
        rss = max(rss, int(found.group(1)) * 1024)
    return best, rss


def write_contrasts(design_path, path):
    """contrasts.tsv for fit_throughput and numpy_gls, the same two as config.yaml."""
    with open(design_path) as f:
        names = f.readline().rstrip("\n").split("\t")

    def row(weights):
        return [str(weights.get(name, 0)) for name in names]
    lines = ["known_vs_new\tt\t1\t" + "\t".join(row({"melody_known": 1, "melody_new": -1})),
             "any_melody\tF\t2\t" + "\t".join(row({"melody_known": 1}) + row({"melody_new": 1}))]
    with open(path, "w") as f:
        f.write("\n".join(lines) + "\n")
    return len(names)


def measure_run(args, scale, n, tr):
    folder = os.path.join(args.work, "%s-n%d" % (args.scale, n))
    print("[%s] N=%d: data in %s (load %s)" % (time.strftime("%H:%M:%S"), n, folder,
                                               load_average()), file=sys.stderr, flush=True)
    synthetic_run.generate(folder, scale["dims"], scale["semi_axes"], n, tr)
    bold = os.path.join(folder, "bold.nii.gz")
    nx, ny, nz = scale["dims"]
    row = {"n": n, "tr": tr, "raw_bytes": 352 + nx * ny * nz * n * 4,
           "gz_bytes": os.path.getsize(bold), "load_before": load_average()}

    print("  (b, c) gzip -dc and boldsum fit", file=sys.stderr, flush=True)
    row["gzip_s"] = gzip_seconds(bold, args.repeat)  # also warms the page cache
    row["fit_cli_s"], row["rss"] = fit_seconds_and_rss(args.boldsum, folder, args.repeat)
    row["fit_report_s"], _ = fit_seconds_and_rss(args.boldsum, folder, 1, report=True)

    print("  (a) fit_throughput and numpy", file=sys.stderr, flush=True)
    design = os.path.join(folder, "out", "v01", "run-1", "design.tsv")
    contrasts = os.path.join(folder, "contrasts.tsv")
    row["p"] = write_contrasts(design, contrasts)
    dump = os.path.join(folder, "dump")
    os.makedirs(dump, exist_ok=True)
    n_vox = int(synthetic_run.ellipsoid(scale["dims"], scale["semi_axes"])[0].sum())
    every = max(1, n_vox // args.numpy_voxels)
    done = subprocess.run(
        [args.throughput, "--data", bold, "--mask", os.path.join(folder, "mask.nii.gz"),
         "--design", design, "--contrasts", contrasts, "--threads", "1,2",
         "--repeat", str(args.repeat), "--dump-every", str(every), "--dump", dump],
        check=True, stdout=subprocess.PIPE, text=True)
    row["ours"] = json.loads(done.stdout)
    # OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE go (see the header); the thread count is set.
    env = {k: v for k, v in os.environ.items() if not k.startswith("OPENBLAS_")}
    if args.numpy_blas:
        env["LD_LIBRARY_PATH"] = ":".join(
            [args.numpy_blas] + [p for p in [os.environ.get("LD_LIBRARY_PATH")] if p])
    row["numpy"] = {}
    for method in ("whiten", "precision"):
        for threads in (1, 2):  # small batched products can run faster on one BLAS thread
            env["OPENBLAS_NUM_THREADS"] = str(threads)
            done = subprocess.run(
                ["/usr/bin/python3", os.path.join(HERE, "numpy_gls.py"), "--design", design,
                 "--contrasts", contrasts, "--dump", dump, "--method", method,
                 "--repeat", str(args.repeat)],
                check=True, stdout=subprocess.PIPE, text=True, env=env)
            result = json.loads(done.stdout)
            if method not in row["numpy"] or result["fit_s"] < row["numpy"][method]["fit_s"]:
                row["numpy"][method] = result
    row["load_after"] = load_average()
    return row


def mark(ok):
    return "PASS" if ok else "MISS"


def print_table(args, scale, rows):
    width, column = 50, 26
    numpy_info = rows[0]["numpy"]["whiten"]
    print()
    print("boldsum first-level fit benchmark (scale %s: grid %s, %d in-mask voxels, float32 "
          ".nii.gz, gzip -6)" % (args.scale, "x".join(map(str, scale["dims"])),
                                rows[0]["ours"]["n_voxels"]))
    print("numpy %s; %s (the faster of 1 and 2 BLAS threads is kept)"
          % (numpy_info["numpy"], numpy_info["blas"]))

    def line(label, cells, target=""):
        print("%-*s" % (width, label) + "".join("%-*s" % (column, c) for c in cells) + target)

    def ours_timing(r, threads):
        return next(t for t in r["ours"]["timings"] if t["threads"] == threads)

    def ours_vps(r, threads):
        t = ours_timing(r, threads)
        return r["ours"]["n_voxels"] / (t["fit_s"] + t["contrast_s"])

    def numpy_vps(r, method):
        """Projected to all voxels: the per-design setup once, the per-voxel time scaled."""
        m = r["numpy"][method]
        v = r["ours"]["n_voxels"]
        return v / (m["setup_s"] + m["fit_s"] / m["n_voxels"] * v)

    def worst(r, key):
        return max(m["agreement"][key] for m in r["numpy"].values())

    line("", ["N=%d (TR %.1f s, p=%d)" % (r["n"], r["tr"], r["p"]) for r in rows], "target")
    line("(a) ours, voxels/s, 1 thread", ["%.0f" % ours_vps(r, 1) for r in rows])
    line("    ours, voxels/s, 2 threads", ["%.0f" % ours_vps(r, 2) for r in rows])
    line("    ours, 2 thr: FitRun + Estimate + Test, s",
         ["%.2f + %.2f + %.2f" % (t["fit_s"], t["contrast_s"] - t["test_s"], t["test_s"])
          for t in (ours_timing(r, 2) for r in rows)])
    for method, label in (("whiten", "Prais-Winsten whitening"),
                          ("precision", "tridiagonal precision")):
        line("    numpy %s, voxels/s" % label,
             ["%.0f (%d vox, %s thr)" % (numpy_vps(r, method), r["numpy"][method]["n_voxels"],
                                         r["numpy"][method]["blas_threads"] or "?")
              for r in rows])
        ratios = [ours_vps(r, 2) / numpy_vps(r, method) for r in rows]
        line("    speed-up ours (2 thr) / numpy %s" % method,
             ["%.1fx %s" % (x, mark(x >= TARGET_SPEEDUP)) for x in ratios],
             ">= %gx" % TARGET_SPEEDUP)
    line("    agreement with numpy (worst of both):", [])
    for key, label in (("beta", "beta, rel. (or to its SE)"), ("sigma2", "sigma2, rel."),
                       ("known_vs_new.variance", "t contrast variance, rel."),
                       ("any_melody.variance", "F contrast covariance, rel.")):
        line("      " + label,
             ["%.1e %s" % (worst(r, key), "ok" if worst(r, key) <= AGREEMENT else "DIFFERS")
              for r in rows], "<= %g" % AGREEMENT)
    for key, label in (("known_vs_new.t", "t, rel. (abs. below 1)"),
                       ("any_melody.F", "F, rel. (abs. below 1)"), ("rho_abs", "rho, abs.")):
        line("      " + label, ["%.1e" % worst(r, key) for r in rows])
    line("(b) boldsum fit --threads 2 --no-report, wall s", ["%.2f" % r["fit_cli_s"] for r in rows])
    line("    gzip -dc FILE > /dev/null, wall s", ["%.2f" % r["gzip_s"] for r in rows])
    ratios = [r["fit_cli_s"] / r["gzip_s"] for r in rows]
    line("    ratio fit / gzip", ["%.2fx %s" % (x, mark(x <= TARGET_GZIP)) for x in ratios],
         "<= %gx" % TARGET_GZIP)
    line("    (fit_throughput: read+gather alone, s)", ["%.2f" % r["ours"]["load_s"] for r in rows])
    line("    (boldsum fit with its HTML report, wall s)", ["%.2f" % r["fit_report_s"] for r in rows])
    line("    (ratio fit with report / gzip)",
         ["%.2fx" % (r["fit_report_s"] / r["gzip_s"]) for r in rows])
    line("(c) boldsum fit peak RSS, MB", ["%.0f" % (r["rss"] / 1e6) for r in rows])
    line("    uncompressed 4D, MB (.nii.gz MB)",
         ["%.0f (%.0f)" % (r["raw_bytes"] / 1e6, r["gz_bytes"] / 1e6) for r in rows])
    fractions = [r["rss"] / r["raw_bytes"] for r in rows]
    line("    fraction", ["%.3f" % x for x in fractions[:-1]] +
         ["%.3f %s" % (fractions[-1], mark(fractions[-1] <= TARGET_MEMORY))],
         "<= %g at N=%d" % (TARGET_MEMORY, rows[-1]["n"]))
    line("load average before / after",
         ["%s / %s" % (r["load_before"], r["load_after"]) for r in rows])


def main():
    parser = argparse.ArgumentParser(
        description="First-level fit benchmark (prints figures; always exits 0).")
    parser.add_argument("--build", default=os.path.join(HERE, "..", "build"),
                        help="build folder with boldsum and benchmarks/fit_throughput")
    parser.add_argument("--work", default="/tmp/boldsum-bench",
                        help="scratch folder for the generated runs (reused)")
    parser.add_argument("--scale", choices=sorted(SCALES), default="full")
    parser.add_argument("--only", type=int, default=0,
                        help="measure only the run with this N")
    parser.add_argument("--repeat", type=int, default=1,
                        help="repeats of each timing (the best is kept)")
    parser.add_argument("--numpy-blas", default=DEFAULT_BLAS if os.path.isdir(DEFAULT_BLAS)
                        else "", help="folder with libblas.so.3 and liblapack.so.3 for "
                        "numpy (default: OpenBLAS's, if installed; else the system BLAS)")
    parser.add_argument("--numpy-voxels", type=int, default=20000,
                        help="about this many voxels are fitted by numpy")
    args = parser.parse_args()
    args.boldsum = os.path.join(args.build, "boldsum")
    args.throughput = os.path.join(args.build, "benchmarks", "fit_throughput")
    for path in (args.boldsum, args.throughput):
        if not os.access(path, os.X_OK):
            sys.exit("%s: not found; build with -DBOLDSUM_BENCHMARKS=ON (see the header of "
                     "this file)" % path)
    scale = SCALES[args.scale]
    runs = [r for r in scale["runs"] if args.only in (0, r[0])]
    rows = [measure_run(args, scale, n, tr) for n, tr in runs]
    with open(os.path.join(args.work, "last-%s.json" % args.scale), "w") as f:
        json.dump(rows, f, indent=1)
    print_table(args, scale, rows)


if __name__ == "__main__":
    main()
