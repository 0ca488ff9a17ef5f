"""Helpers shared by the Python test scripts of tests/cli and tests/reference: a recorder
of named checks, the final summary and exit status, and the ways the scripts run boldsum,
the probes and other programs.

A script finds this folder from its own location and imports what it uses:

    sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..",
                                    "support"))
    from checks import check, finish  # noqa: E402

The environment comes from tests/CMakeLists.txt (ref_env): BOLDSUM_BIN is the boldsum
binary, BOLDSUM_SOURCE_DIR the source tree. Both are read when a helper needs them, so a
script that does not use a helper does not need its variable.
"""
import os
import shutil
import subprocess
import sys

failures = []  # names (or messages) of the checks that failed, in order


def check(name, ok, detail=""):
    """Record the check `name`: print "ok   NAME" or "FAIL NAME", followed on the same
    line by two spaces and `detail` when one is given, whether the check passed or not (a
    measured figure worth reading either way). A failed check is added to `failures`."""
    print(("ok   " if ok else "FAIL ") + name + ("  " + detail if detail else ""))
    if not ok:
        failures.append(name)


def expect(name, ok, detail=""):
    """Record the check `name` like check(), but print `detail` (a log, a listing, any
    printable value) only when the check fails, on a line of its own after "FAIL NAME"."""
    print(("ok   " if ok else "FAIL ") + name)
    if not ok:
        print(detail)
        failures.append(name)


def fail(message):
    """Record a failed check named `message` (for scripts that test a condition
    themselves and record only what went wrong)."""
    check(message, False)


def finish(passed="all checks passed"):
    """End the script: when any check failed, exit with status 1 and the message
    "N check(s) failed: [names]" on stderr; otherwise print `passed`."""
    if failures:
        sys.exit(f"{len(failures)} check(s) failed: {failures}")
    print(passed)


def boldsum(*args, cwd=None):
    """Run the boldsum binary (BOLDSUM_BIN) with `args` in `cwd`, whatever its exit code.
    Returns the subprocess.CompletedProcess, with stdout and stderr apart, as text."""
    return subprocess.run([os.environ["BOLDSUM_BIN"], *args], capture_output=True,
                          text=True, cwd=cwd)


def boldsum_stdout(*args):
    """Run boldsum with `args`; when it exits non-zero, end the script with the command,
    its stdout and its stderr. Returns its stdout."""
    result = boldsum(*args)
    if result.returncode != 0:
        sys.exit(f"boldsum {' '.join(args)} failed:\n{result.stdout}\n{result.stderr}")
    return result.stdout


def run_merged(args, cwd=None, env=None, expect_code=0):
    """Run the command `args` (a list) in `cwd` with environment `env` (None: this one),
    stderr merged into stdout, as text. When `expect_code` is not None and the command
    exits with another code, print its output and end the script saying so. Returns the
    subprocess.CompletedProcess (its output in .stdout)."""
    result = subprocess.run(args, cwd=cwd, env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.STDOUT, text=True)
    if expect_code is not None and result.returncode != expect_code:
        print(result.stdout)
        sys.exit(f"command exited {result.returncode}, expected {expect_code}: "
                 f"{' '.join(args)}")
    return result


def probe_stdout(program, *args):
    """Run the probe `program` (a path) with `args` (each passed through str()); when it
    exits non-zero, end the script with "<probe name> failed: <its stderr>". Returns its
    stdout, as text."""
    out = subprocess.run([program, *map(str, args)], capture_output=True, text=True)
    if out.returncode != 0:
        sys.exit(os.path.basename(program) + " failed: " + out.stderr)
    return out.stdout


def file_tree(root, skip=()):
    """Relative paths of every file under `root` whose name is not in `skip`, as a set."""
    files = set()
    for folder, _, names in os.walk(root):
        for name in names:
            if name not in skip:
                files.add(os.path.relpath(os.path.join(folder, name), root))
    return files


def copy_demo_roi_study(study):
    """Make `study` the ROI part of `boldsum demo` (8 subjects, 2 runs each), as committed
    in examples/melodies-roi (tests/study/demo_study_test.cc checks it equals the demo's);
    copying it spares writing the demo's 100 MB of images. Without the committed copy,
    runs `boldsum demo` (ending the script if that fails)."""
    source = os.path.join(os.environ["BOLDSUM_SOURCE_DIR"], "examples", "melodies-roi")
    if os.path.exists(os.path.join(source, "demo_roi.yaml")):
        shutil.copytree(source, study)
    else:
        run_merged([os.environ["BOLDSUM_BIN"], "demo", study])
