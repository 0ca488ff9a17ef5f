"""Workflow test (not statistical) of `boldsum export slurm`.

- Every generated script passes `bash -n` (GNU bash, an outside parser).
- Array task k runs `boldsum fit CONFIG --subject=<id on line k>`, with the ids read from
  the config by PyYAML (Debian python3-yaml), also when the study is queued as several
  arrays with an index offset; an index past the list fails clearly.
- submit.sh hands every array's job id to the gather job as afterok:<id>[:<id>...].
- A simulated cluster (a stand-in `sbatch` on PATH that runs each job at once, task by
  task, honouring --array, --export and afterok) fits the demo ROI study; the outputs
  equal a direct `boldsum fit` byte for byte.

Why no real SLURM here: slurmd runs as root to start jobs as their owners, and both
daemons authenticate through munged with a key file; that means the slurmctld, slurmd
and munge packages, root-owned daemons and a cluster config, which this test suite does
not set up on a developer's machine. The stand-in checks what the scripts rely on.
"""
import filecmp
import os
import shutil
import sys
import tempfile

import yaml

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import copy_demo_roi_study, expect, file_tree, finish  # noqa: E402
from checks import run_merged as run  # noqa: E402

BIN = os.environ["BOLDSUM_BIN"]

# A stand-in for sbatch: records its arguments, replies like `sbatch --parsable` with
# "<id>;<cluster>". With SIMULATE=1 it also runs the job at once: every array task in
# turn (SLURM_ARRAY_TASK_ID, SLURM_CPUS_PER_TASK from the script's #SBATCH line, the
# --export variables), and refuses a job whose afterok dependency did not succeed.
FAKE_SBATCH = r'''#!/usr/bin/python3
import os, re, subprocess, sys
state = os.environ["FAKE_SBATCH_STATE"]
with open(os.path.join(state, "calls.txt"), "a") as f:
    f.write("\0".join(sys.argv[1:]) + "\n")
jobs = sorted(int(n) for n in os.listdir(state) if n.isdigit())
job = (jobs[-1] + 1) if jobs else 4100
array, export, dependency, output = None, {}, None, "slurm-%j.out"
for arg in sys.argv[1:-1]:
    if arg.startswith("--array="):
        array = re.fullmatch(r"--array=1-(\d+)(%\d+)?", arg).group(1)
    elif arg.startswith("--export="):
        for item in arg[len("--export="):].split(",")[1:]:
            key, value = item.split("=", 1)
            export[key] = value
    elif arg.startswith("--dependency="):
        dependency = arg[len("--dependency="):]
    elif arg.startswith("--output="):
        output = arg[len("--output="):]
script = sys.argv[-1]
status = 0
if os.environ.get("SIMULATE") == "1":
    if dependency:
        kind, *ids = dependency.split(":")
        for other in ids:
            with open(os.path.join(state, other)) as f:
                if kind != "afterok" or f.read() != "0":
                    sys.exit(f"sbatch: job {other} did not succeed; dependency never met")
    cpus = re.search(r"^#SBATCH --cpus-per-task=(\d+)$", open(script).read(), re.M).group(1)
    env = dict(os.environ, SLURM_JOB_ID=str(job), SLURM_CPUS_PER_TASK=cpus, **export)
    for task in range(1, int(array) + 1) if array else [None]:
        if task is not None:
            env.update(SLURM_ARRAY_TASK_ID=str(task), SLURM_ARRAY_JOB_ID=str(job))
        log = output.replace("%A", str(job)).replace("%a", str(task)).replace("%j", str(job))
        with open(log, "w") as out:
            status |= subprocess.run(["bash", script], env=env, stdout=out,
                                     stderr=subprocess.STDOUT).returncode
with open(os.path.join(state, str(job)), "w") as f:
    f.write(str(status))
print(f"{job};testcluster")
'''

# A stand-in for boldsum: appends its arguments, separated by \x01, as one line.
FAKE_BOLDSUM = '#!/bin/bash\n(IFS=$\'\\x01\'; printf "%s\\n" "$*") >> "$FAKE_BOLDSUM_LOG"\n'


def write_executable(path, text):
    with open(path, "w") as f:
        f.write(text)
    os.chmod(path, 0o755)


def check_array_mapping(folder, config, out, ids, offset, tasks, fake_log):
    """Runs fit_array.sbatch as array tasks 1..tasks with the given offset."""
    if os.path.exists(fake_log):
        os.remove(fake_log)
    for task in range(1, tasks + 1):
        env = dict(os.environ, SLURM_ARRAY_TASK_ID=str(task), SLURM_CPUS_PER_TASK="3",
                   BOLDSUM_ARRAY_OFFSET=str(offset), FAKE_BOLDSUM_LOG=fake_log,
                   BOLDSUM=os.path.join(os.path.dirname(fake_log), "fake boldsum"))
        run(["bash", os.path.join(folder, "fit_array.sbatch")], env=env)
    with open(fake_log) as f:
        calls = [line.rstrip("\n").split("\x01") for line in f]
    expected = [["fit", config, f"--subject={ids[offset + k]}", "--threads", "3", "--out", out,
                 "--quiet"] for k in range(tasks)]
    expect(f"array tasks 1-{tasks} at offset {offset} map to config subjects "
           f"{offset + 1}-{offset + tasks}", calls == expected, f"{calls} != {expected}")


def main():
    top = tempfile.mkdtemp(prefix="boldsum export slurm ")
    try:
        study = os.path.join(top, "melody's study")
        copy_demo_roi_study(study)
        config = os.path.join(study, "demo_roi.yaml")
        with open(config) as f:
            ids = [s["id"] for s in yaml.safe_load(f)["subjects"]]
        out = os.path.join(top, "results via slurm")
        folder = os.path.join(top, "slurm jobs")
        run([BIN, "export", "slurm", config, "-o", folder, "--out", out, "--threads", "2",
             "--mem-mb", "3000", "--time", "20", "--partition", "short"])

        scripts = ["fit_array.sbatch", "gather.sbatch", "submit.sh"]
        for name in scripts:
            path = os.path.join(folder, name)
            expect(f"bash -n {name}", run(["bash", "-n", path], expect_code=None).returncode == 0)
            expect(f"{name} is executable", os.access(path, os.X_OK))
        with open(os.path.join(folder, "subjects.txt")) as f:
            expect("subjects.txt lists the config's ids in order", f.read().split("\n") ==
                   ids + [""])
        with open(os.path.join(folder, "fit_array.sbatch")) as f:
            fit_text = f.read()
        for line in (f"#SBATCH --array=1-{len(ids)}", "#SBATCH --cpus-per-task=2",
                     "#SBATCH --mem=3000M", "#SBATCH --time=20", "#SBATCH --partition=short"):
            expect(f"fit_array.sbatch has '{line}'", line + "\n" in fit_text)

        fakes = os.path.join(top, "fakes")
        os.makedirs(fakes)
        fake_log = os.path.join(fakes, "boldsum calls.txt")
        write_executable(os.path.join(fakes, "fake boldsum"), FAKE_BOLDSUM)
        check_array_mapping(folder, config, out, ids, 0, len(ids), fake_log)
        env = dict(os.environ, SLURM_ARRAY_TASK_ID=str(len(ids) + 1),
                   BOLDSUM=os.path.join(fakes, "fake boldsum"), FAKE_BOLDSUM_LOG=fake_log)
        past = run(["bash", os.path.join(folder, "fit_array.sbatch")], env=env, expect_code=None)
        expect("an index past the list fails and says so", past.returncode != 0 and
               f"no subject on line {len(ids) + 1}" in past.stdout, past.stdout)

        # The study queued as arrays of 3: 8 subjects -> offsets 0, 3, 6.
        chunked = os.path.join(top, "slurm chunked")
        run([BIN, "export", "slurm", config, "-o", chunked, "--out", out, "--array-size", "3",
             "--max-running", "2"])
        check_array_mapping(chunked, config, out, ids, 3, 3, fake_log)
        check_array_mapping(chunked, config, out, ids, 6, 2, fake_log)
        bin_dir = os.path.join(fakes, "bin")
        os.makedirs(bin_dir)
        write_executable(os.path.join(bin_dir, "sbatch"), FAKE_SBATCH)
        state = os.path.join(fakes, "queue")
        os.makedirs(state)
        env = dict(os.environ, PATH=bin_dir + os.pathsep + os.environ["PATH"],
                   FAKE_SBATCH_STATE=state, SIMULATE="0")
        reply = run(["bash", os.path.join(chunked, "submit.sh"), "--qos=short"], env=env)
        with open(os.path.join(state, "calls.txt")) as f:
            calls = [line.rstrip("\n").split("\0") for line in f]
        arrays = [c for c in calls if c[-1].endswith("fit_array.sbatch")]
        expect("three arrays of at most 3 tasks, 2 running at once",
               [next(a for a in c if a.startswith("--array=")) for c in arrays] ==
               ["--array=1-3%2", "--array=1-3%2", "--array=1-2%2"], arrays)
        expect("array offsets 3 and 6 exported",
               [next((a for a in c if a.startswith("--export=")), None) for c in arrays] ==
               [None, "--export=ALL,BOLDSUM_ARRAY_OFFSET=3", "--export=ALL,BOLDSUM_ARRAY_OFFSET=6"])
        gather = [c for c in calls if c[-1].endswith("gather.sbatch")]
        expect("gather waits for all three arrays (afterok) and is submitted last",
               len(gather) == 1 and calls[-1] == gather[0] and
               "--dependency=afterok:4100:4101:4102" in gather[0] and
               "--kill-on-invalid-dep=yes" in gather[0], calls)
        expect("extra arguments reach every sbatch call", all("--qos=short" in c for c in calls))
        expect("submit.sh reports the job ids", "4100:4101:4102" in reply.stdout and
               "4103" in reply.stdout, reply.stdout)

        # The simulated cluster runs the first folder's jobs with the real binary.
        shutil.rmtree(state)
        os.makedirs(state)
        env["SIMULATE"] = "1"
        env.pop("BOLDSUM", None)
        run(["bash", os.path.join(folder, "submit.sh")], env=env)
        logs = sorted(os.listdir(os.path.join(folder, "logs")))
        expect("one log per array task and one for gather", len(logs) == len(ids) + 1, logs)
        direct = os.path.join(top, "results direct")
        # The workflow writes no HTML report (a view of the whole study, not a result).
        run([BIN, "fit", config, "--out", direct, "--quiet", "--no-report"])
        skip = {".checksums.tsv"}  # input-checksum cache, not a result
        ours, reference = file_tree(out, skip), file_tree(direct, skip)
        expect("simulated cluster wrote the same files as a direct fit", ours == reference,
               sorted(ours ^ reference))
        expect("pool-ready written by the gather job",
               os.path.join("pool-ready", "subjects.tsv") in ours)
        differing = [p for p in sorted(ours & reference) if not filecmp.cmp(
            os.path.join(out, p), os.path.join(direct, p), shallow=False)]
        expect(f"{len(ours & reference)} files byte-identical to a direct fit", not differing,
               differing)
    finally:
        shutil.rmtree(top, ignore_errors=True)
    finish("all SLURM workflow checks passed")


if __name__ == "__main__":
    main()
