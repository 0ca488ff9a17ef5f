#!/usr/bin/python3
"""A synthetic whole-brain run for fit_benchmark.py: one volunteer listening to melodies.

Writes into a folder: bold.nii.gz (float32 NIfTI-1, gzip level 6, one gzip member,
streamed volume by volume so that memory stays near a few volumes), mask.nii.gz (an
ellipsoid), events.tsv, confounds.tsv, config.yaml and params.json (the parameters; a
folder whose params.json matches is reused as it is).

Model of the data, per in-mask voxel v and volume k (TR seconds, t_k = (k + 0.5) TR):
  y_k = baseline_v + sum_j X_kj B_jv + e_k,   e_k = rho_v e_{k-1} + u_k,
  u_k ~ N(0, sd_v^2 (1 - rho_v^2)) (stationary AR(1), marginal SD sd_v),
X: 4 conditions (boxcars on a 0.05 s grid convolved with a unit-area difference of two
gammas, shapes 6 and 16, the second weighted 1/6 -- common practice), 6 motion-like
confounds, and 2 slow cosines. rho_v varies smoothly from 0.1 to 0.6 over the brain,
baseline_v from about 850 to 1150, sd_v from 8 to 12; the conditions respond (1-2% of
baseline) in Gaussian blobs.
"""
import gzip
import json
import os
import queue
import threading

import nibabel
import numpy as np
import scipy.stats

CONDITIONS = ["melody_known", "melody_new", "press", "tone_cue"]
DURATIONS = {"melody_known": 6.0, "melody_new": 6.0, "press": 0.0, "tone_cue": 0.0}
CONFOUNDS = ["shift_x", "shift_y", "shift_z", "turn_x", "turn_y", "turn_z"]
# Blob centres (in units of the ellipsoid's semi-axes) and peak amplitudes.
BLOBS = {"melody_known": ((0.5, 0.1, 0.0), 20.0), "melody_new": ((0.5, 0.1, 0.0), 12.0),
         "press": ((-0.4, 0.3, 0.5), 15.0), "tone_cue": ((0.0, -0.5, 0.0), 10.0)}

CONFIG = """\
# Synthetic benchmark run (written by benchmarks/synthetic_run.py).
tr: {tr}
slice_reference: 0.5
hrf: {{shape: double-gamma, derivatives: time}}
drift: {{kind: cosine, cutoff_s: 128}}
autocorrelation: ar1
conditions: [{conditions}]
confounds: [{confounds}]
contrasts:
  known_vs_new: {{melody_known: 1, melody_new: -1}}
  any_melody: [{{melody_known: 1}}, {{melody_new: 1}}]
mask: mask.nii.gz
subjects:
  - id: v01
    runs:
      - {{data: bold.nii.gz, events: events.tsv, confounds: confounds.tsv}}
output: out
"""


def ellipsoid(dims, semi_axes):
    """Boolean mask in (z, y, x) array order and the normalised coordinates of its voxels."""
    nx, ny, nz = dims
    z, y, x = np.meshgrid(np.arange(nz), np.arange(ny), np.arange(nx), indexing="ij")
    u = (x - (nx - 1) / 2) / semi_axes[0]
    v = (y - (ny - 1) / 2) / semi_axes[1]
    w = (z - (nz - 1) / 2) / semi_axes[2]
    inside = u * u + v * v + w * w <= 1.0
    return inside, (u[inside], v[inside], w[inside])


def hrf(dt):
    t = np.arange(0.0, 32.0, dt)
    h = scipy.stats.gamma.pdf(t, 6) - scipy.stats.gamma.pdf(t, 16) / 6.0
    return h / (h.sum() * dt)


def make_events(rng, duration_s):
    rows, t = [], 8.0
    while t < duration_s - 20.0:
        condition = CONDITIONS[rng.integers(len(CONDITIONS))]
        rows.append((round(t, 2), DURATIONS[condition], condition))
        t += rng.uniform(6.0, 12.0)
    return rows


def condition_regressors(events, n, tr, dt=0.05):
    """N x 4: each condition's events convolved with the HRF, sampled at (k + 0.5) TR."""
    grid = np.zeros((int(np.ceil((n * tr + 32.0) / dt)), len(CONDITIONS)))
    for onset, duration, condition in events:
        j = CONDITIONS.index(condition)
        i0 = int(round(onset / dt))
        if duration > 0:
            grid[i0:i0 + max(1, int(round(duration / dt))), j] += 1.0
        else:
            grid[i0, j] += 1.0 / dt  # an impulse of unit area
    h = hrf(dt)
    out = np.empty((n, len(CONDITIONS)))
    sample = np.round((np.arange(n) + 0.5) * tr / dt).astype(int)
    for j in range(len(CONDITIONS)):
        out[:, j] = np.convolve(grid[:, j], h)[:grid.shape[0]][sample] * dt
    return out


def motion(rng, n):
    walk = np.cumsum(rng.normal(0.0, 0.03, (n, len(CONFOUNDS))), axis=0)
    return walk - walk.mean(axis=0)


def header_bytes(dims, n, tr):
    affine = np.diag([2.0, 2.0, 2.0, 1.0])
    affine[:3, 3] = [-(d - 1) for d in dims]  # centred, 2 mm voxels
    header = nibabel.Nifti1Header()
    header.set_data_shape(tuple(dims) + (n,))
    header.set_data_dtype(np.float32)
    header.set_zooms((2.0, 2.0, 2.0, tr))
    header.set_xyzt_units("mm", "sec")
    header.set_qform(affine, code=1)
    header.set_sform(affine, code=1)
    header["vox_offset"] = 352
    return header.binaryblock + b"\0\0\0\0", affine


def write_bold(path, params, inside, coords, design, rng):
    """Streams the 4D image: volumes are made here and compressed on a second thread
    (zlib releases the GIL), with at most a few volumes queued."""
    dims, n, tr = params["dims"], params["n"], params["tr"]
    u, v, w = coords
    n_vox = u.size
    shape = 0.5 + 0.5 * np.sin(2.1 * u + 1.3 * v) * np.cos(1.7 * w)  # in [0, 1]
    rho = 0.1 + 0.5 * shape
    baseline = 1000.0 + 150.0 * np.cos(1.5 * u) * np.sin(1.2 * w + 0.4)
    sd = 8.0 + 4.0 * (1.0 - (u * u + v * v + w * w))
    innovation_sd = sd * np.sqrt(1.0 - rho * rho)
    weights = np.empty((design.shape[1], n_vox))
    for j, condition in enumerate(CONDITIONS):
        (cu, cv, cw), peak = BLOBS[condition]
        weights[j] = peak * np.exp(-((u - cu) ** 2 + (v - cv) ** 2 + (w - cw) ** 2) / 0.05)
    weights[len(CONDITIONS):] = rng.normal(0.0, 2.0, (design.shape[1] - len(CONDITIONS), n_vox))
    flat_index = np.flatnonzero(inside.ravel())  # x fastest, as NIfTI stores voxels

    header, _ = header_bytes(dims, n, tr)
    pending = queue.Queue(maxsize=4)
    failure = []

    def compress():
        try:
            with open(path + ".part", "wb") as raw, \
                    gzip.GzipFile(fileobj=raw, mode="wb", compresslevel=6, mtime=0) as out:
                out.write(header)
                while True:
                    chunk = pending.get()
                    if chunk is None:
                        return
                    out.write(chunk)
        except Exception as error:  # reported by the main thread
            failure.append(error)

    worker = threading.Thread(target=compress)
    worker.start()
    volume = np.zeros(inside.size, dtype=np.float32)
    noise = sd * rng.standard_normal(n_vox)
    try:
        for k in range(n):
            if k > 0:
                noise = rho * noise + innovation_sd * rng.standard_normal(n_vox)
            volume[flat_index] = baseline + design[k] @ weights + noise
            while worker.is_alive():
                try:
                    pending.put(volume.tobytes(), timeout=1.0)
                    break
                except queue.Full:
                    continue
            if failure:
                break
    finally:
        if worker.is_alive():
            pending.put(None)
        worker.join()
    if failure:
        raise failure[0]
    os.replace(path + ".part", path)


def generate(folder, dims, semi_axes, n, tr, seed=20240501):
    """Makes (or reuses) the run in `folder`; returns its params dict."""
    params = {"dims": list(dims), "semi_axes": list(semi_axes), "n": n, "tr": tr,
              "seed": seed, "version": 1}
    stamp = os.path.join(folder, "params.json")
    if os.path.exists(stamp):
        with open(stamp) as f:
            if json.load(f) == params and os.path.exists(os.path.join(folder, "bold.nii.gz")):
                return params
    os.makedirs(folder, exist_ok=True)
    if os.path.exists(stamp):
        os.remove(stamp)
    rng = np.random.default_rng(seed)
    inside, coords = ellipsoid(dims, semi_axes)
    _, affine = header_bytes(dims, n, tr)
    mask = np.transpose(inside, (2, 1, 0)).astype(np.uint8)  # to (x, y, z)
    image = nibabel.Nifti1Image(mask, affine)
    image.set_qform(affine, code=1)  # the same orientation codes as bold.nii.gz
    image.set_sform(affine, code=1)
    nibabel.save(image, os.path.join(folder, "mask.nii.gz"))

    events = make_events(rng, n * tr)
    with open(os.path.join(folder, "events.tsv"), "w") as f:
        f.write("onset\tduration\ttrial_type\n")
        for onset, duration, condition in events:
            f.write("%g\t%g\t%s\n" % (onset, duration, condition))
    moves = motion(rng, n)
    with open(os.path.join(folder, "confounds.tsv"), "w") as f:
        f.write("\t".join(CONFOUNDS) + "\n")
        for row in moves:
            f.write("\t".join("%.6f" % value for value in row) + "\n")
    with open(os.path.join(folder, "config.yaml"), "w") as f:
        f.write(CONFIG.format(tr=tr, conditions=", ".join(CONDITIONS),
                              confounds=", ".join(CONFOUNDS)))
    k = np.arange(n)
    drift = np.column_stack([np.cos(np.pi * j * (k + 0.5) / n) for j in (1, 2)])
    design = np.column_stack([condition_regressors(events, n, tr), moves, drift])
    write_bold(os.path.join(folder, "bold.nii.gz"), params, inside, coords, design, rng)
    with open(stamp, "w") as f:
        json.dump(params, f)
    return params
