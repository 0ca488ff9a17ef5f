"""`boldsum report` and the report written by `fit`, on the committed region-table demo
(examples/melodies-roi): what is written and when, the residual-diagnostics cache (reused
while the fit stands, measured again after a refit on changed data), subject folders never
touched, leftovers of removed subjects cleared, missing subjects listed, the group results
shown with --group, and errors: a bad group config writes nothing; a report that cannot
be written after a fit is a warning and the fit keeps its results (exit 0)."""
import hashlib
import os
import re
import shutil
import sys
import tempfile

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import boldsum as run, check, finish  # noqa: E402

SOURCE = os.environ["BOLDSUM_SOURCE_DIR"]


def tree_hashes(folder):
    hashes = {}
    for base, _, files in os.walk(folder):
        for name in files:
            path = os.path.join(base, name)
            with open(path, "rb") as f:
                hashes[os.path.relpath(path, folder)] = hashlib.sha256(f.read()).hexdigest()
    return hashes


with tempfile.TemporaryDirectory() as root:
    study = os.path.join(root, "roi")
    shutil.copytree(os.path.join(SOURCE, "examples", "melodies-roi"), study,
                    ignore=shutil.ignore_patterns("results*"))
    cfg = os.path.join(study, "demo_roi.yaml")
    out = os.path.join(study, "results-roi")
    report_dir = os.path.join(out, "report")
    index = os.path.join(report_dir, "index.html")

    result = run("fit", cfg, "--no-report", "--threads", "2")
    check("fit --no-report: exit 0", result.returncode == 0, result.stderr)
    check("fit --no-report writes no report", not os.path.exists(report_dir))
    subjects_before = {s: tree_hashes(os.path.join(out, s)) for s in os.listdir(out)
                       if s.startswith("s0")}

    result = run("report", cfg, "--threads", "2")
    check("report: exit 0 and the index path printed",
          result.returncode == 0 and "report written: " + index in result.stdout, result.stdout)
    pages = sorted(p for p in os.listdir(report_dir) if p.endswith(".html"))
    check("report: index and one page per subject",
          pages == ["index.html"] + ["subject-s0%d.html" % s for s in range(1, 9)], str(pages))
    check("report: residual diagnostics measured for every subject",
          result.stdout.count("residual diagnostics measured") == 8, result.stdout)
    check("report leaves every subject folder byte for byte as the fit wrote it",
          {s: tree_hashes(os.path.join(out, s)) for s in subjects_before} == subjects_before)
    text = open(os.path.join(report_dir, "subject-s01.html")).read()
    share = re.search(r"<strong>([0-9.]+)%</strong> of region series", text)
    check("subject page: whiteness share stated", share is not None)

    result = run("report", cfg)
    check("second report reuses every cached diagnostic",
          result.stdout.count("residual diagnostics reused") == 8, result.stdout)

    # New data for s01: the refit changes its fingerprint, so its diagnostics are measured
    # again; the others are reused.
    table = os.path.join(study, "s01", "run-1_regions.tsv")
    lines = open(table).read().splitlines()
    cells = lines[5].split("\t")
    cells[0] = repr(float(cells[0]) + 3.0)
    lines[5] = "\t".join(cells)
    with open(table, "w") as f:
        f.write("\n".join(lines) + "\n")
    result = run("fit", cfg, "--threads", "2")
    check("refit after a data change writes the report", result.returncode == 0 and
          "report written: " in result.stdout, result.stdout + result.stderr)
    check("the changed subject is measured again, the others reused",
          "s01: page written, residual diagnostics measured" in result.stdout and
          result.stdout.count("residual diagnostics reused") == 7, result.stdout)

    # A fit of selected subjects does not write the study report.
    before = os.stat(index).st_mtime_ns
    result = run("fit", cfg, "--subject", "s02", "--force")
    check("fit --subject leaves the report alone",
          result.returncode == 0 and os.stat(index).st_mtime_ns == before and
          "report" not in result.stdout, result.stdout)

    # Group results with --group (ROI input): a table and bars per contrast.
    group = os.path.join(study, "group_test.yaml")
    with open(group, "w") as f:
        f.write("input: results-roi/pool-ready/summaries.tsv\nmethod: mixed\n"
                "output: results-roi/group\n")
    check("pool the regions", run("pool", group).returncode == 0)
    result = run("report", cfg, "--group", group)
    text = open(index).read()
    check("report --group shows the pooled regions",
          result.returncode == 0 and "known_vs_new: intercept" in text and
          "Group z per region" in text, result.stderr)

    # A bad group config: error, exit 1, the report as it was.
    before = tree_hashes(report_dir)
    result = run("report", cfg, "--group", os.path.join(study, "absent.yaml"))
    check("bad group config: exit 1 with the file named",
          result.returncode == 1 and "absent.yaml" in result.stderr, result.stderr)
    check("bad group config: report unchanged", tree_hashes(report_dir) == before)

    # A subject without results is listed as missing; a subject removed from the config
    # loses its page and cache.
    config = open(cfg).read()
    s08 = config[config.index("  - id: s08"):config.index("output:")]
    s09 = s08.replace("id: s08", "id: s09")  # s08's data under a new, unfitted id
    trimmed = os.path.join(study, "trimmed.yaml")
    with open(trimmed, "w") as f:
        f.write(config.replace(s08, s09))
    result = run("report", trimmed)
    text = open(index).read()
    check("a subject without results is listed as missing, without a page",
          result.returncode == 0 and "missing" in text and "subject-s09.html" not in text and
          not os.path.exists(os.path.join(report_dir, "subject-s09.html")), result.stderr)
    check("a subject no longer in the config loses its page and cache",
          not os.path.exists(os.path.join(report_dir, "subject-s08.html")) and
          not os.path.exists(os.path.join(report_dir, "cache", "s08.bin")))

    # A report that cannot be written after a fit: warning, exit 0, fit results kept.
    shutil.rmtree(report_dir)
    with open(report_dir, "w") as f:
        f.write("in the way\n")
    result = run("fit", cfg, "--force", "--threads", "2")
    check("report failure after fit: exit 0 with a warning naming the cause",
          result.returncode == 0 and "warning: the fit is complete but the report was not written"
          in result.stderr and "report" in result.stderr, result.stderr)
    check("report failure after fit: fit results in place",
          all(os.path.exists(os.path.join(out, "s0%d" % s, "summary.json")) for s in range(1, 9)))
    result = run("report", cfg)
    check("report command with the folder blocked: exit 1", result.returncode == 1, result.stderr)

finish()
