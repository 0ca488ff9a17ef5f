"""Incremental regeneration and parallel fitting of a study: after any sequence of
edits, the outputs equal a clean fit of the final config byte for byte, and the log
says what was skipped, recomputed and refitted. Also: a parallel study fit equals
subject-by-subject fits, bitwise."""
import filecmp
import os
import re
import shutil
import sys
import tempfile

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import boldsum, boldsum_stdout as run, expect, finish  # noqa: E402


def differing_files(a, b):
    """Relative paths that differ between two output trees (subject folders only)."""
    differ = []
    for top in (a, b):
        for folder, _, files in os.walk(top):
            for name in files:
                rel = os.path.relpath(os.path.join(folder, name), top)
                if rel.startswith(".") or rel.startswith("pool-ready") or rel.startswith("report"):
                    continue  # the checksum cache is not an output; stacks and the report
                    # describe the whole study
                other = os.path.join(b if top == a else a, rel)
                if not os.path.exists(other) or not filecmp.cmp(os.path.join(folder, name), other, shallow=False):
                    differ.append(rel)
    return sorted(set(differ))


def differing_stacks(a, b):
    """Files of pool-ready/ (stacks, subjects.tsv, .sources) that differ between two trees."""
    names = set()
    for top in (a, b):
        folder = os.path.join(top, "pool-ready")
        names |= set(os.listdir(folder)) if os.path.isdir(folder) else set()
    return sorted(n for n in names
                  if not all(os.path.exists(os.path.join(t, "pool-ready", n)) for t in (a, b))
                  or not filecmp.cmp(os.path.join(a, "pool-ready", n),
                                     os.path.join(b, "pool-ready", n), shallow=False))


def keep_subjects(config, count):
    """The demo config cut down to its first `count` subjects, to keep the test fast."""
    text = open(config).read()
    head, subjects = text.split("subjects:\n", 1)
    blocks = re.split(r"(?m)^(?=  - id: )", subjects)
    kept = [b for b in blocks if b.startswith("  - id: ")][:count]
    tail = subjects[subjects.index("\noutput:") + 1:] if "\noutput:" in subjects else ""
    with open(config, "w") as f:
        f.write(head + "subjects:\n" + "".join(b if b.endswith("\n") else b + "\n" for b in kept) + tail)


with tempfile.TemporaryDirectory() as root:
    study = os.path.join(root, "study")
    run("demo", study)
    config = os.path.join(study, "demo.yaml")
    keep_subjects(config, 3)
    out = os.path.join(study, "results")

    def clean_fit(tag):
        target = os.path.join(root, "clean-" + tag)
        shutil.rmtree(target, ignore_errors=True)
        run("fit", config, "--out", target, "--quiet")
        return target

    # Parallel study fit (2 subjects at a time) against one subject at a time, 1 thread.
    log = run("fit", config, "--threads", "2")
    expect("first fit fits every subject", log.count(", fitting") == 3, log)
    single = os.path.join(root, "single")
    for subject in ("s01", "s02", "s03"):
        run("fit", config, "--subject", subject, "--threads", "1", "--out", single, "--quiet")
    expect("parallel study fit equals subject-by-subject fits, bitwise",
           differing_files(out, single) == [], differing_files(out, single))

    # Unchanged re-run: everything skipped, nothing rewritten.
    before = {p: os.stat(os.path.join(out, p)).st_mtime_ns
              for p in ("s01/summary.json", "s02/mask.nii.gz", "pool-ready/subjects.tsv")}
    log = run("fit", config)
    expect("unchanged re-run skips every subject", log.count("up to date, skipped") == 3, log)
    expect("unchanged re-run does not gather again", "pool-ready: up to date, not gathered again" in log, log)
    expect("unchanged re-run keeps the report", "report: no subject changed" in log, log)
    expect("unchanged re-run rewrites nothing",
           all(os.stat(os.path.join(out, p)).st_mtime_ns == t for p, t in before.items()))

    # Contrast-only edit: contrasts recomputed from the saved fit, no data read.
    text = open(config).read()
    text = text.replace("contrasts:\n", "contrasts:\n  press_only: {press: 1}\n", 1)
    text = re.sub(r"(?m)^  melodies_vs_rest:.*\n", "", text)
    # Same name, other weights: its files must be recomputed, not kept.
    text = text.replace("known_vs_new: {melody_known: 1, melody_new: -1}",
                        "known_vs_new: {melody_known: 1, melody_new: -0.5}")
    open(config, "w").write(text)
    log = run("fit", config)
    expect("contrast edit recomputes contrasts", log.count("stale: contrasts changed, recomputing contrasts") == 3, log)
    expect("contrast edit gathers the stacks again", "gathered 3 subject(s)" in log, log)
    expect("contrast edit keeps the unchanged contrast's files (any_melody) and recomputes the rest",
           log.count("contrasts recomputed (1 of 3 unchanged, files kept)") == 3, log)
    expect("contrast edit equals a clean fit, bitwise", differing_files(out, clean_fit("contrast")) == [],
           differing_files(out, os.path.join(root, "clean-contrast")))
    expect("removed contrast's files are gone", not os.path.exists(os.path.join(out, "s01", "melodies_vs_rest.z.nii.gz")))

    # A contrast added, the others as they were: the unchanged contrasts' stacks are kept
    # (hard links to the earlier files) and pool-ready equals a clean gather, bitwise.
    text = open(config).read().replace("contrasts:\n", "contrasts:\n  press_half: {press: 0.5}\n", 1)
    open(config, "w").write(text)
    log = run("fit", config)
    kept = [line for line in log.splitlines() if "unchanged since the last gather, kept" in line]
    expect("added contrast: the other t contrasts' stacks are kept",
           len(kept) == 1 and "press_only" in kept[0] and "known_vs_new" in kept[0]
           and "press_half" not in kept[0], log)
    clean = clean_fit("added")
    expect("added contrast: pool-ready equals a clean gather, bitwise",
           differing_stacks(out, clean) == [], differing_stacks(out, clean))
    expect("added contrast: subject folders equal a clean fit, bitwise",
           differing_files(out, clean) == [], differing_files(out, clean))

    # Confound edit: a model change, so every subject is refitted.
    text = open(config).read().replace("confounds: [shift_x, shift_y, shift_z]", "confounds: [shift_x, shift_y]")
    open(config, "w").write(text)
    log = run("fit", config)
    expect("confound edit refits", log.count("stale: model settings changed, fitting") == 3, log)
    clean = clean_fit("confound")
    expect("confound edit equals a clean fit, bitwise", differing_files(out, clean) == [], differing_files(out, clean))
    expect("confound edit: no stack kept, pool-ready equals a clean gather",
           "unchanged since the last gather" not in log and differing_stacks(out, clean) == [],
           log + str(differing_stacks(out, clean)))

    # Input touched (same bytes): up to date.
    bold = os.path.join(study, "s02", "run-1_bold.nii.gz")
    os.utime(bold, None)
    log = run("fit", config)
    expect("touched input: subjects up to date", log.count("up to date, skipped") == 3, log)
    expect("touched input equals a clean fit, bitwise", differing_files(out, clean) == [], differing_files(out, clean))

    # Input changed: only that subject is refitted, and the log names the file.
    events = os.path.join(study, "s02", "run-2_events.tsv")
    lines = open(events).read().splitlines()
    fields = lines[1].split("\t")
    fields[0] = str(float(fields[0]) + 1.0)
    lines[1] = "\t".join(fields)
    open(events, "w").write("\n".join(lines) + "\n")
    log = run("fit", config)
    expect("changed events: only s02 refitted, file named",
           "s02: stale: inputs changed (run-2_events.tsv), fitting" in log and log.count("up to date, skipped") == 2, log)
    status = boldsum("status", config)
    expect("status: all up to date after the fit, exit 0", status.returncode == 0 and status.stdout.count("up to date") == 3,
           status.stdout)
    clean = clean_fit("events")
    expect("changed events equals a clean fit, bitwise", differing_files(out, clean) == [], differing_files(out, clean))

    # status names what is stale or missing.
    shutil.rmtree(os.path.join(out, "s03"))
    status = boldsum("status", config)
    expect("status: missing subject reported, exit 3",
           status.returncode == 3 and "s03\tmissing" in status.stdout, status.stdout)

finish()
