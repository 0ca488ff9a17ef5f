"""Workflow test (not statistical): the Snakefile from `boldsum export snakemake`, run by
Debian's Snakemake (/usr/bin/snakemake, an outside workflow engine), gives byte for byte
the outputs of a direct `boldsum fit`, and a second run does nothing.

Also checked: the study lives under a folder whose name has a space and a quote (the
generated shell commands must quote); after an edit of the config that changes nothing
in the model, Snakemake reruns every subject job but boldsum skips them and leaves their
files untouched (the reason the jobs' output is a stamp, see the Snakefile); a subject
folder removed by hand is fitted again, by the binary named in BOLDSUM.

Uses the demo study's ROI config (demo_roi.yaml: 8 subjects, 2 runs each) to stay fast.
"""
import filecmp
import os
import shutil
import sys
import tempfile

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import copy_demo_roi_study, expect, file_tree, finish, run_merged  # noqa: E402

BIN = os.environ["BOLDSUM_BIN"]
SNAKEMAKE = "/usr/bin/snakemake"


def run(args, cwd=None, env=None):
    """The output (stdout and stderr together) of a command that must succeed."""
    return run_merged(args, cwd=cwd, env=env).stdout


def compare_trees(name, ours, reference, skip):
    ours_files, ref_files = file_tree(ours, skip), file_tree(reference, skip)
    expect(f"{name}: same files", ours_files == ref_files,
           f"only in Snakemake run: {sorted(ours_files - ref_files)}; "
           f"only in direct fit: {sorted(ref_files - ours_files)}")
    differing = [f for f in sorted(ours_files & ref_files)
                 if not filecmp.cmp(os.path.join(ours, f), os.path.join(reference, f),
                                    shallow=False)]
    expect(f"{name}: {len(ours_files & ref_files)} files byte-identical", not differing,
           f"differ: {differing}")


def jobs_run(log, rule):
    return log.count(f"rule {rule}:") + log.count(f"localrule {rule}:")


def main():
    if not os.access(SNAKEMAKE, os.X_OK):
        sys.exit(f"{SNAKEMAKE} is missing: install Debian's package with "
                 "`apt-get install snakemake` (scripts/install-deps test does)")
    top = tempfile.mkdtemp(prefix="boldsum export snake ")
    try:
        study = os.path.join(top, "melody's study")
        copy_demo_roi_study(study)
        config = os.path.join(study, "demo_roi.yaml")
        out = os.path.join(top, "results via snakemake")
        workdir = os.path.join(top, "workflow")
        os.makedirs(workdir)
        snakefile = os.path.join(workdir, "Snakefile")
        run([BIN, "export", "snakemake", config, "-o", snakefile, "--out", out, "--threads", "2"])

        log = run([SNAKEMAKE, "-j", "2", "-s", snakefile], cwd=workdir)
        expect("first run: one fit job per subject", jobs_run(log, "fit_subject") == 8,
               f"{jobs_run(log, 'fit_subject')} jobs")
        expect("first run: one gather job", jobs_run(log, "gather") == 1)

        direct = os.path.join(top, "results direct")
        # The workflow writes no HTML report (a view of the whole study, not a result).
        run([BIN, "fit", config, "--out", direct, "--quiet", "--no-report"])
        expect("direct fit gathered", os.path.exists(os.path.join(direct, "pool-ready",
                                                                  "subjects.tsv")))
        # .workflow-stamp exists only in the Snakemake run; .checksums.tsv is boldsum's
        # cache of input checksums keyed by modification time, not a result.
        skip = {".workflow-stamp", ".checksums.tsv"}
        compare_trees("Snakemake vs direct fit", out, direct, skip)

        log = run([SNAKEMAKE, "-j", "2", "-s", snakefile], cwd=workdir)
        expect("second run: nothing to be done",
               "Nothing to be done" in log and jobs_run(log, "fit_subject") == 0, log)

        # A comment added to the config: every subject job reruns (the config is newer
        # than the stamps) but boldsum finds each subject up to date and skips it.
        summary = os.path.join(out, "s01", "summary.json")
        before = os.stat(summary).st_mtime_ns
        with open(config, "a") as f:
            f.write("# edited after the first run\n")
        # At least 1 s newer than every stamp, whatever the file system's time resolution.
        newest = max(os.stat(os.path.join(out, f"s{k:02d}", ".workflow-stamp")).st_mtime_ns
                     for k in range(1, 9))
        os.utime(config, ns=(newest + 10**9, newest + 10**9))
        log = run([SNAKEMAKE, "-j", "2", "-s", snakefile], cwd=workdir)
        expect("after a config comment: subject jobs rerun", jobs_run(log, "fit_subject") == 8)
        expect("after a config comment: boldsum skipped s01 (summary.json untouched)",
               os.stat(summary).st_mtime_ns == before)
        log = run([SNAKEMAKE, "-j", "2", "-s", snakefile], cwd=workdir)
        expect("after the rerun: nothing to be done", "Nothing to be done" in log, log)

        # A subject folder removed by hand takes its stamp along: only it is refitted,
        # by the binary BOLDSUM names (a wrapper that records its calls).
        shutil.rmtree(os.path.join(out, "s03"))
        calls = os.path.join(top, "calls.txt")
        wrapper = os.path.join(top, "boldsum wrapper.sh")
        with open(wrapper, "w") as f:
            f.write(f'#!/bin/bash\nprintf "%s\\n" "$*" >> "{calls}"\nexec "{BIN}" "$@"\n')
        os.chmod(wrapper, 0o755)
        env = dict(os.environ, BOLDSUM=wrapper)
        log = run([SNAKEMAKE, "-j", "2", "-s", snakefile], cwd=workdir, env=env)
        with open(calls) as f:
            recorded = f.read().splitlines()
        expect("removed subject refitted alone, then gathered, through BOLDSUM",
               len(recorded) == 2 and "--subject=s03" in recorded[0]
               and recorded[1].startswith("gather "), str(recorded))
        compare_trees("after refitting s03", out, direct, skip)
    finally:
        shutil.rmtree(top, ignore_errors=True)
    finish("all Snakemake workflow checks passed")


if __name__ == "__main__":
    main()
