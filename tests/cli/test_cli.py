"""Command-line behaviour of boldsum: exit codes, complete error reports with file,
line and column, and no output written for bad input."""
import os
import sys
import tempfile

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import boldsum as run, expect, finish  # noqa: E402

ROI = "".join(f"{200 + (k % 7)}\t{100 + (k % 5)}\n" for k in range(60))
EVENTS = "onset\tduration\ttrial_type\n10\t6\tsong\n50\t6\thum\n70\t6\tsong\n"

with tempfile.TemporaryDirectory() as root:
    with open(os.path.join(root, "r1.tsv"), "w") as f:
        f.write("left\tright\n" + ROI)
    with open(os.path.join(root, "e1.tsv"), "w") as f:
        f.write(EVENTS)
    with open(os.path.join(root, "c1.tsv"), "w") as f:
        f.write("sway\tsway_copy\n" + "".join(f"{k * 0.01}\t{k * 0.01}\n" for k in range(60)))

    # Five different mistakes, each on its own line; all must be reported.
    bad = os.path.join(root, "bad.yaml")
    with open(bad, "w") as f:
        f.write("tr: two\n"                                   # 1: wrong type
                "drfit: {kind: cosine}\n"                     # 2: unknown key
                "conditions: [song, hum]\n"
                "contrasts:\n"
                "  song_vs_hum: {song: 1, humm: -1}\n"        # 5: unknown condition
                "  bad/name: {song: 1}\n"                     # 6: bad contrast name
                "subjects:\n"
                "  - id: s1\n"
                "    runs:\n"
                "      - {data: missing.tsv, events: e1.tsv}\n"  # 10: missing file
                "output: out\n")
    result = run("check", bad)
    lines = [l for l in result.stderr.splitlines() if ": error: " in l]
    expect("five mistakes: exit code 1", result.returncode == 1, result.stderr)
    expect("five mistakes: five errors reported", len(lines) == 5, result.stderr)
    for line_number in (1, 2, 5, 6, 10):
        expect(f"five mistakes: error at line {line_number}",
               any(l.startswith(f"{bad}:{line_number}:") for l in lines), result.stderr)
    expect("five mistakes: suggestion for drfit", "did you mean 'drift'" in result.stderr,
           result.stderr)
    expect("five mistakes: nothing written", not os.path.exists(os.path.join(root, "out")))

    # A rank-deficient model (a confound duplicated) is unusable: exit 3, columns named.
    dup = os.path.join(root, "dup.yaml")
    with open(dup, "w") as f:
        f.write("tr: 2\nconditions: [song, hum]\nconfounds: [sway, sway_copy]\n"
                "contrasts: {song_vs_hum: {song: 1, hum: -1}}\n"
                "subjects:\n  - id: s1\n    runs:\n"
                "      - {data: r1.tsv, events: e1.tsv, confounds: c1.tsv}\noutput: out2\n")
    result = run("check", dup)
    expect("rank deficient: exit code 3", result.returncode == 3, result.stdout + result.stderr)
    expect("rank deficient: columns named",
           "sway" in result.stdout and "sway_copy" in result.stdout, result.stdout)
    expect("check writes design.tsv and design.svg",
           os.path.exists(os.path.join(root, "out2", "s1", "run-1", "design.tsv")) and
           os.path.exists(os.path.join(root, "out2", "s1", "run-1", "design.svg")))

    # Unknown subject on the command line.
    good = os.path.join(root, "good.yaml")
    with open(good, "w") as f:
        f.write("tr: 2\nconditions: [song, hum]\n"
                "contrasts: {song_vs_hum: {song: 1, hum: -1}}\n"
                "subjects:\n  - id: s1\n    runs:\n      - {data: r1.tsv, events: e1.tsv}\n"
                "output: out3\n")
    result = run("fit", good, "--subject", "s2")
    expect("unknown subject: exit 1 and a suggestion",
           result.returncode == 1 and "did you mean 's1'" in result.stderr, result.stderr)
    result = run("fit", good)
    expect("fit of a valid ROI study succeeds", result.returncode == 0, result.stderr)
    expect("no staging folders left",
           not [n for n in os.listdir(os.path.join(root, "out3")) if ".staging" in n])

    # Usage errors.
    expect("no command: exit 2", run().returncode == 2)
    expect("unknown option: exit 2", run("fit", good, "--thraeds", "2").returncode == 2)

    # The demo refuses a non-empty folder.
    result = run("demo", root)
    expect("demo into a non-empty folder: exit 1", result.returncode == 1, result.stderr)

finish()
