"""Shared by the benchmark scripts: the boldsum binary of a build folder, the load
average and one command timed under /usr/bin/time -v (wall seconds, CPU seconds, peak
resident memory)."""
import os
import re
import subprocess
import sys
import time


def boldsum_binary(build):
    """The absolute path of `build`/boldsum; exits with a hint when it is not built."""
    boldsum = os.path.abspath(os.path.join(build, "boldsum"))
    if not os.access(boldsum, os.X_OK):
        sys.exit("no %s: build first (scripts/build)" % boldsum)
    return boldsum


def load_average():
    with open("/proc/loadavg") as f:
        return f.read().split()[0]


def run_timed(command):
    """Runs `command`; exits with its output when it fails. Returns wall and CPU seconds
    (user + sys), peak RSS in bytes, the load average before it started and its stdout."""
    load = load_average()
    start = time.perf_counter()
    done = subprocess.run(["/usr/bin/time", "-v"] + command, capture_output=True, text=True)
    wall = time.perf_counter() - start
    if done.returncode != 0:
        sys.exit("%s failed:\n%s%s" % (" ".join(command), done.stdout, done.stderr))

    def field(name):
        return float(re.search(re.escape(name) + r": ([\d.]+)", done.stderr).group(1))
    return {"wall": wall, "cpu": field("User time (seconds)") + field("System time (seconds)"),
            "rss": field("Maximum resident set size (kbytes)") * 1024, "load": load,
            "stdout": done.stdout}
