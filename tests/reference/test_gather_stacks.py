"""End-to-end check of `boldsum gather` on a small generated image study, read back with
nibabel (Debian python3-nibabel) and the json module: volume i of every stack is subject
i's own map (subjects.tsv order), the stacks keep the input's affine, the mask is the
intersection of the subjects' masks, the dof columns are those of each summary.json and
equal N - rank(X) of the subject's design (numpy.linalg.matrix_rank), the participants
columns are joined, and a refused gather leaves pool-ready/ byte for byte as it was.
"""
import hashlib
import json
import os
import shutil
import sys
import tempfile

import nibabel as nib
import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import boldsum, fail, finish  # noqa: E402

rng = np.random.default_rng(11)
TR = 2.0
N = 60
SHAPE = (5, 4, 3)
AFFINE = np.array([[-2.5, 0, 0, 40], [0, 2.5, 0, -30], [0, 0, 3, -20], [0, 0, 0, 1.0]])
ORDER = ["s03", "s01", "s04", "s02"]  # config order, not sorted
NO_TUNE_B = "s04"                      # cannot estimate a_vs_b
T_CONTRASTS = ["a_vs_b", "a_only"]


def read_tsv(path):
    with open(path) as f:
        header = f.readline().rstrip("\n").split("\t")
        rows = [line.rstrip("\n").split("\t") for line in f if line.strip()]
    return header, rows


def make_study(root):
    cfg = ["tr: 2.0", "conditions: [tune_a, tune_b]", "drift: {kind: cosine, cutoff_s: 100}",
           "contrasts:", "  a_vs_b: {tune_a: 1, tune_b: -1}", "  a_only: {tune_a: 1}",
           "  both: [{tune_a: 1}, {tune_b: 1}]", "participants: participants.tsv", "subjects:"]
    t = np.arange(N) * TR
    for k, subject in enumerate(ORDER):
        onsets = {"tune_a": range(6, 110, 24),
                  "tune_b": [] if subject == NO_TUNE_B else range(18, 110, 24)}
        with open(os.path.join(root, f"{subject}_events.tsv"), "w") as f:
            f.write("onset\tduration\ttrial_type\n")
            for onset, condition in sorted((o, c) for c, os_ in onsets.items() for o in os_):
                f.write(f"{onset}\t8\t{condition}\n")
        boxcar = np.zeros(N)
        for onset in onsets["tune_a"]:
            boxcar += (t >= onset) & (t < onset + 8)
        data = (500 + 20 * rng.standard_normal(SHAPE)[..., None] + (k + 1) * boxcar
                + 3 * rng.standard_normal(SHAPE + (N,))).astype(np.float32)
        data[k, 0, 0, :] = 0.0  # outside this subject's automatic mask only
        img = nib.Nifti1Image(data, AFFINE)
        img.header.set_xyzt_units("mm", "sec")
        img.header["pixdim"][4] = TR
        nib.save(img, os.path.join(root, f"{subject}.nii.gz"))
        cfg += [f"  - id: {subject}", "    runs:",
                f"      - {{data: {subject}.nii.gz, events: {subject}_events.tsv}}"]
    with open(os.path.join(root, "participants.tsv"), "w") as f:
        f.write("participant_id\tage\thand\nsub-s01\t34\tleft\ns02\t29\tright\nsub-s03\t41\tn/a\n")
    with open(os.path.join(root, "study.yaml"), "w") as f:
        f.write("\n".join(cfg) + "\n")


def run(*args):
    done = boldsum(*args)
    print(" ".join(args[:1]), "->", done.returncode, done.stdout, done.stderr)
    return done


def digests(folder):
    return {name: hashlib.sha256(open(os.path.join(folder, name), "rb").read()).hexdigest()
            for name in sorted(os.listdir(folder))}


with tempfile.TemporaryDirectory() as root:
    make_study(root)
    config = os.path.join(root, "study.yaml")
    if run("fit", config, "--threads", "2", "--quiet").returncode != 0:
        sys.exit("boldsum fit failed")
    if run("gather", config).returncode != 0:
        sys.exit("boldsum gather failed")
    out = os.path.join(root, "results")
    ready = os.path.join(out, "pool-ready")

    header, rows = read_tsv(os.path.join(ready, "subjects.tsv"))
    if header != ["subject", "dof_a_vs_b", "dof_a_only", "age", "hand"]:
        fail(f"subjects.tsv header {header}")
    if [row[0] for row in rows] != ORDER:
        fail(f"subjects.tsv rows {[row[0] for row in rows]}, expected config order {ORDER}")
    participants = {"s01": ["34", "left"], "s02": ["29", "right"], "s03": ["41", "n/a"],
                    "s04": ["n/a", "n/a"]}
    for row in rows:
        if row[3:] != participants[row[0]]:
            fail(f"subjects.tsv participants columns for {row[0]}: {row[3:]}")

    # dof: the summary.json value, and N - rank(X) of the subject's design computed by
    # numpy (DESIGN.md: dof = N - rank X); a subject's all-zero tune_b column drops out of
    # the rank.
    for i, subject in enumerate(ORDER):
        summary = json.load(open(os.path.join(out, subject, "summary.json")))
        names, x_rows = read_tsv(os.path.join(out, subject, "run-1", "design.tsv"))
        rank = np.linalg.matrix_rank(np.array(x_rows, float))
        for j, contrast in enumerate(T_CONTRASTS):
            record = next(c for c in summary["contrasts"] if c["name"] == contrast)
            cell = rows[i][1 + j]
            if not record["estimable"]:
                if cell != "n/a":
                    fail(f"{subject} dof_{contrast}: {cell}, expected n/a")
                continue
            if float(cell) != record["dof"] or float(cell) != N - rank:
                fail(f"{subject} dof_{contrast}: {cell}; summary.json {record['dof']}; "
                     f"N - rank {N - rank}")
        print(f"{subject}: dof columns {rows[i][1:3]}, N - rank(X) = {N - rank}")
    if rows[ORDER.index(NO_TUNE_B)][1] != "n/a":
        fail("the subject without tune_b events should have dof_a_vs_b n/a")

    masks = [nib.load(os.path.join(out, s, "mask.nii.gz")).get_fdata() > 0 for s in ORDER]
    common = nib.load(os.path.join(ready, "mask.nii.gz"))
    if not np.array_equal(common.get_fdata() > 0, np.logical_and.reduce(masks)):
        fail("mask.nii.gz is not the intersection of the subjects' masks")
    if np.count_nonzero(common.get_fdata()) != np.prod(SHAPE) - len(ORDER):
        fail("mask.nii.gz: expected every voxel but the four left out one per subject")
    compared = 0
    for contrast in T_CONTRASTS:
        for kind in ("estimate", "variance"):
            stack_img = nib.load(os.path.join(ready, f"{contrast}.{kind}.nii.gz"))
            stack = stack_img.get_fdata(dtype=np.float32)
            if stack.shape != SHAPE + (len(ORDER),) or stack_img.get_data_dtype() != np.float32:
                fail(f"{contrast}.{kind}: shape {stack.shape}, dtype {stack_img.get_data_dtype()}")
                continue
            if not np.allclose(stack_img.affine, AFFINE, atol=1e-5):
                fail(f"{contrast}.{kind}: affine {stack_img.affine} differs from the input's")
            for i, subject in enumerate(ORDER):
                own_path = os.path.join(out, subject, f"{contrast}.{kind}.nii.gz")
                if contrast == "a_vs_b" and subject == NO_TUNE_B:
                    if os.path.exists(own_path) or not np.all(np.isnan(stack[..., i])):
                        fail(f"{contrast}.{kind} volume {i}: expected all NaN")
                    continue
                own = nib.load(own_path).get_fdata(dtype=np.float32)
                if not np.array_equal(stack[..., i], own, equal_nan=True):
                    fail(f"{contrast}.{kind} volume {i} differs from {own_path}")
                if not np.array_equal(np.isnan(own), ~masks[i]):
                    fail(f"{own_path}: NaN not exactly outside the subject's mask")
                compared += 1
    print(f"{compared} stacked volumes equal to the subjects' own maps (bitwise, NaN = NaN)")
    if any(name.startswith("both.") for name in os.listdir(ready)):
        fail("the F contrast 'both' was stacked")

    # Refusal: a subject without results is named and pool-ready/ stays as it was.
    before = digests(ready)
    shutil.rmtree(os.path.join(out, "s04"))
    refused = run("gather", config)
    if refused.returncode != 1 or "no fitted results for s04" not in refused.stderr:
        fail(f"gather without s04: exit {refused.returncode}, {refused.stderr!r}")
    if digests(ready) != before or any(".pool-ready" in name for name in os.listdir(out)):
        fail("a refused gather changed pool-ready/ or left a staging folder")

finish("all gather checks passed")
