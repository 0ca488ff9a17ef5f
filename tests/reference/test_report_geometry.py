"""Where the report places things, and how it encodes pictures:

- world coordinates of voxels (report/world_space.h over ImageGeometry::WorldPosition)
  against nibabel's image affine (Nifti1Image.affine: the sform when its code is set,
  else the qform) for an oblique
  sform, a qform-only image with a rotation and qfac = -1, and an axis-flipping sform;
  tolerance 1e-4 mm (the header stores float32);
- peaks (report/peaks.h): local maxima and minima over 26 neighbours against
  scipy.ndimage.maximum_filter / minimum_filter (3x3x3, NaN as never largest);
- the PNG data URIs: decoded with Python's base64 and png_reader.py (zlib and the PNG
  filter rules of ISO/IEC 15948), every pixel equal to the pattern that was drawn.
"""
import base64
import os
import sys
import tempfile

import nibabel as nib
import numpy as np
from scipy import ndimage

from png_reader import read_png

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import check, finish, probe_stdout  # noqa: E402

PROBE = os.path.join(os.environ["BOLDSUM_PROBE_DIR"], "report_probe")


def probe(*args):
    return probe_stdout(PROBE, *args)


with tempfile.TemporaryDirectory() as root:
    rng = np.random.default_rng(11)
    voxels = [(0, 0, 0), (5, 3, 2), (9, 7, 5), (2.5, 1.0, 4.0)]
    flat = [v for ijk in voxels for v in ijk]
    angle = 0.3
    rotation = np.array([[np.cos(angle), -np.sin(angle), 0], [np.sin(angle), np.cos(angle), 0],
                         [0, 0, 1]])
    oblique = np.eye(4)
    oblique[:3, :3] = rotation @ np.diag([2.0, 2.5, 3.0])
    oblique[:3, 3] = [-20.0, 15.5, -7.25]
    flipped = np.diag([-3.0, 3.0, 3.0, 1.0])
    flipped[:3, 3] = [60, -70, -40]
    qform = np.eye(4)
    qform[:3, :3] = rotation.T @ np.diag([2.0, 2.0, -4.0])  # determinant < 0: qfac = -1
    qform[:3, 3] = [10.0, -5.0, 3.0]
    data = rng.standard_normal((10, 8, 6)).astype(np.float32)
    for name, affine, use_sform in (("oblique sform", oblique, True),
                                    ("axis-flipping sform", flipped, True),
                                    ("qform only, qfac -1", qform, False)):
        image = nib.Nifti1Image(data, None)
        if use_sform:
            image.set_sform(affine, code=1)
            image.set_qform(np.eye(4), code=0)
        else:
            image.set_qform(affine, code=1)
            image.set_sform(np.eye(4), code=0)
        path = os.path.join(root, name.replace(" ", "_").replace(",", "") + ".nii.gz")
        nib.save(image, path)
        want = nib.load(path).affine  # what nibabel reads back (float32 header fields)
        got = np.array([[float(v) for v in l.split()] for l in probe("world", path, *flat).splitlines()])
        expected = np.array([want[:3, :3] @ np.array(ijk) + want[:3, 3] for ijk in voxels])
        err = np.abs(got - expected).max()
        check("world coordinates, %s = nibabel affine (1e-4 mm)" % name, err < 1e-4, "%.1e mm" % err)

    # Peaks of a smooth field with NaN outside a ball.
    field = ndimage.gaussian_filter(rng.standard_normal((14, 12, 10)), 1.5).astype(np.float32)
    field *= 1.0 / np.abs(field).max() * 5
    i, j, k = np.indices(field.shape)
    field[(i - 6.5) ** 2 + (j - 5.5) ** 2 + (k - 4.5) ** 2 > 30] = np.nan
    path = os.path.join(root, "field.nii.gz")
    nib.save(nib.Nifti1Image(field, oblique), path)
    count = 6
    rows = [l.split() for l in probe("peaks", path, count).splitlines()]
    got = [(float(r[0]), (int(r[1]), int(r[2]), int(r[3])), np.array([float(v) for v in r[4:]]))
           for r in rows]
    for sign, label in ((1, "maxima"), (-1, "minima")):
        x = np.where(np.isnan(field), -np.inf, sign * field)
        top = ndimage.maximum_filter(x, size=3, mode="constant", cval=-np.inf)
        extrema = np.argwhere((x == top) & (x > 0))
        ordered = sorted(extrema, key=lambda v: -x[tuple(v)])[:count]
        want = [(float(field[tuple(v)]), tuple(int(a) for a in v)) for v in ordered]
        mine = [(v, ijk) for v, ijk, _ in got if np.sign(v) == sign]
        check("peaks: %s = scipy.ndimage maximum filter (3x3x3)" % label,
              [ijk for _, ijk in mine] == [ijk for _, ijk in want] and
              all(abs(a - b) < 1e-6 for (a, _), (b, _) in zip(mine, want)),
              "%s vs %s" % (mine, want))
    world_err = max(np.abs(w - (oblique[:3, :3] @ np.array(ijk) + oblique[:3, 3])).max()
                    for _, ijk, w in got)
    check("peaks carry nibabel's world coordinates (1e-4 mm)", world_err < 1e-4, "%.1e" % world_err)

for width, height in ((1, 1), (37, 5), (300, 260)):
    uri = probe("png", width, height).strip()
    prefix = "data:image/png;base64,"
    ok = uri.startswith(prefix)
    w, h, _, rows = read_png(base64.b64decode(uri[len(prefix):], validate=True))
    expected = [bytes(v for x in range(width) for v in (x % 256, y % 256, (x + y) % 256))
                for y in range(height)]
    check("PNG %dx%d: base64 and zlib decode to the drawn pixels" % (width, height),
          ok and (w, h) == (width, height) and rows == expected)

finish()
