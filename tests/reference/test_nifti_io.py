#!/usr/bin/python3
"""boldsum's NIfTI reading and writing, SHA-256 and JSON text (boldsum_io, through
tests/tools/io_probe) against outside references:

* nibabel (Debian python3-nibabel) with numpy (python3-numpy) writes NIfTI-1 and NIfTI-2
  files, .nii and .nii.gz, of every datatype boldsum reads, with scl_slope/scl_inter, an
  oblique affine (qform and sform) and TR in ms. boldsum must report nibabel's header
  fields exactly and the values raw * slope + inter (computed here in float64 from
  nibabel's unscaled data, then rounded to float32) exactly; nibabel's own get_fdata()
  must agree to float32 rounding.
* nibabel reads boldsum's output (io_probe copy: VolumeStream then WriteImage): a NIfTI-1
  float32 header, the values bit for bit (NaN where the source had NaN), the source's
  affines, voxel sizes and TR.
* hashlib (Python standard library) for SHA-256 of files and byte strings of many lengths.
* json (Python standard library) parses JsonQuote's output back to the input text (with
  ill-formed UTF-8 replaced as bytes.decode("utf-8", "replace") does) and JsonNumber's
  output back to the same double, and that output equals Python's repr (the shortest
  round-trip form) without the ".0" repr puts after integers (kept for -0.0).
"""
import gzip
import hashlib
import json
import math
import os
import struct
import subprocess
import sys
import tempfile

import nibabel as nib
import numpy as np

PROBE = os.path.join(os.environ.get("BOLDSUM_PROBE_DIR", "build/tests"), "io_probe")
RNG = np.random.default_rng(20240611)
FAILURES = []


def check(condition, message):
    if not condition:
        FAILURES.append(message)


def probe(*args, stdin=None):
    return subprocess.run([PROBE, *args], input=stdin, capture_output=True, text=True)


def parse_probe(text):
    """Geometry fields as float lists, and the value rows as float32 arrays."""
    fields, rows = {}, []
    for line in text.strip().split("\n"):
        name, *values = line.split()
        if name == "values":
            rows.append(np.array([float(v) for v in values], dtype=np.float32))
        else:
            fields[name] = [float(v) for v in values]
    return fields, rows


def oblique_affine():
    # A rotation about an oblique axis, voxel sizes 2 x 2.5 x 3 mm, an offset.
    angle, axis = 0.3, np.array([0.3, -0.5, 0.8])
    axis = axis / np.linalg.norm(axis)
    k = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
    rotation = np.eye(3) + math.sin(angle) * k + (1 - math.cos(angle)) * k @ k
    affine = np.eye(4)
    affine[:3, :3] = rotation @ np.diag([2.0, 2.5, 3.0])
    affine[:3, 3] = [-90.5, 126.25, -72.0]
    return affine


def random_data(dtype, shape):
    if np.issubdtype(dtype, np.integer):
        info = np.iinfo(dtype)
        data = RNG.integers(info.min, info.max, size=shape, endpoint=True).astype(dtype)
        data.flat[0], data.flat[1] = info.min, info.max
        return data
    data = (1000 + 50 * RNG.standard_normal(shape)).astype(dtype)
    data.flat[3] = np.nan
    data.flat[4] = -0.0
    return data


def make_image(version, dtype, shape, scaled):
    klass = nib.Nifti1Image if version == 1 else nib.Nifti2Image
    image = klass(random_data(dtype, shape), oblique_affine())
    image.set_data_dtype(dtype)
    header = image.header
    image.set_qform(oblique_affine(), code=1)
    sform = oblique_affine()
    sform[:3, :] += 0.001  # differs from the qform, so that each is checked on its own
    image.set_sform(sform, code=2)
    header.set_xyzt_units("mm", "msec")
    zooms = list(header.get_zooms())
    if len(shape) == 4:
        zooms[3] = 2000.0  # TR 2 s, stored in ms
    header.set_zooms(zooms)
    if scaled:
        header.set_slope_inter(0.37, -12.5)
    return image


def check_header(name, fields, header, version, n_volumes):
    check(fields["version"] == [version], f"{name}: version {fields['version']}")
    check(fields["dims"] == [float(d) for d in header["dim"][1:4]], f"{name}: dims")
    check(fields["n_volumes"] == [n_volumes], f"{name}: n_volumes")
    check(fields["voxel_mm"] == [float(z) for z in header["pixdim"][1:4]], f"{name}: voxel_mm")
    tr = float(header["pixdim"][4]) / 1000 if n_volumes > 1 or header["dim"][0] >= 4 else 0.0
    check(math.isclose(fields["tr_s"][0], tr, rel_tol=1e-15), f"{name}: tr {fields['tr_s']} {tr}")
    check(fields["qform_code"] == [int(header["qform_code"])], f"{name}: qform_code")
    check(fields["sform_code"] == [int(header["sform_code"])], f"{name}: sform_code")
    quatern = [float(header[k]) for k in ("quatern_b", "quatern_c", "quatern_d")]
    offset = [float(header[k]) for k in ("qoffset_x", "qoffset_y", "qoffset_z")]
    check(int(header["qform_code"]) > 0, f"{name}: nibabel wrote no qform")
    check(fields["quatern"] == quatern, f"{name}: quatern {fields['quatern']} {quatern}")
    check(fields["qoffset"] == offset, f"{name}: qoffset")
    qfac = -1.0 if header["pixdim"][0] < 0 else 1.0
    check(fields["qfac"] == [qfac], f"{name}: qfac")
    for r, key in enumerate(("srow_x", "srow_y", "srow_z")):
        check(fields[f"srow{r}"] == [float(v) for v in header[key]], f"{name}: {key}")


def expected_values(image):
    """raw * slope + inter in float64, rounded once to float32 (NIfTI-1 standard)."""
    proxy = image.dataobj
    raw = np.asarray(proxy.get_unscaled()).astype(np.float64)
    slope, inter = float(proxy.slope), float(proxy.inter)
    if slope == 0 or not math.isfinite(slope) or (slope == 1 and inter == 0):
        return raw.astype(np.float32)  # no scaling (keeps -0.0)
    return (raw * slope + inter).astype(np.float32)


def same_floats(a, b):
    a, b = np.asarray(a, np.float32), np.asarray(b, np.float32)
    return a.shape == b.shape and a.tobytes() == b.tobytes()


def test_reading(folder):
    shape = (5, 4, 3, 6)
    count = 0
    max_rel_nibabel = 0.0
    for version in (1, 2):
        for dtype in (np.uint8, np.int16, np.int32, np.float32, np.float64):
            for ext in (".nii", ".nii.gz"):
                for scaled in (False, True):
                    name = os.path.join(
                        folder, f"in_v{version}_{np.dtype(dtype).name}_{int(scaled)}{ext}")
                    nib.save(make_image(version, dtype, shape, scaled), name)
                    image = nib.load(name)
                    header = image.header
                    check(int(header["sizeof_hdr"]) == (348 if version == 1 else 540),
                          f"{name}: nibabel wrote the wrong version")
                    result = probe("read", name, "4", "1")
                    if result.returncode != 0:
                        check(False, f"{name}: {result.stderr}")
                        continue
                    fields, rows = parse_probe(result.stdout)
                    check_header(name, fields, header, version, shape[3])
                    expected = expected_values(image)
                    # Volume t, voxels in NIfTI order x fastest (Fortran order).
                    got = np.stack(rows)
                    want = np.stack([expected[..., t].ravel(order="F") for t in range(shape[3])])
                    check(same_floats(got, want), f"{name}: values differ from raw*slope+inter")
                    fdata = image.get_fdata()
                    fwant = np.stack([fdata[..., t].ravel(order="F") for t in range(shape[3])])
                    finite = np.isfinite(fwant)
                    check(np.array_equal(np.isnan(got), np.isnan(fwant)), f"{name}: NaN places")
                    rel = np.abs(got[finite] - fwant[finite]) / np.maximum(np.abs(fwant[finite]),
                                                                           1e-30)
                    max_rel_nibabel = max(max_rel_nibabel, float(rel.max()))
                    # float32 rounding of the value: half an ulp, 2^-24 relative.
                    check(rel.max() <= 2.0 ** -24 * (1 + 1e-9), f"{name}: {rel.max()} vs nibabel")
                    count += 1
    print(f"reading: {count} nibabel files exactly equal to raw*slope+inter; "
          f"largest relative difference from nibabel's get_fdata() {max_rel_nibabel:.3g}")


def test_three_d_and_errors(folder):
    name = os.path.join(folder, "three_d.nii.gz")
    image = make_image(2, np.int16, (6, 5, 4), True)
    nib.save(image, name)
    result = probe("volume", name)
    check(result.returncode == 0, f"{name}: {result.stderr}")
    fields, rows = parse_probe(result.stdout)
    check(fields["n_volumes"] == [1] and fields["tr_s"] == [0.0], f"{name}: 3D geometry")
    check(same_floats(rows[0], expected_values(nib.load(name)).ravel(order="F")),
          f"{name}: 3D values")

    for dtype, label in ((np.int8, "int8"), (np.uint16, "uint16"), (np.complex64, "complex64")):
        name = os.path.join(folder, f"refused_{label}.nii")
        data = np.zeros((2, 2, 2), dtype=dtype)
        refused = nib.Nifti1Image(data, np.eye(4))
        refused.set_data_dtype(dtype)
        nib.save(refused, name)
        result = probe("geometry", name)
        want = (f"error: {name}: datatype {label} is not supported "
                "(expected uint8, int16, int32, float32 or float64)\n")
        check(result.returncode == 1 and result.stderr == want, f"{name}: {result.stderr!r}")
    print("3D image and refused datatypes: ok")


def test_writing(folder):
    count = 0
    for version in (1, 2):
        for dtype in (np.int16, np.float32, np.float64):
            for shape in ((7, 6, 5), (7, 6, 5, 4)):
                for out_ext in (".nii", ".nii.gz"):
                    source = os.path.join(folder, f"src_v{version}_{np.dtype(dtype).name}.nii.gz")
                    nib.save(make_image(version, dtype, shape, dtype == np.int16), source)
                    target = os.path.join(folder, f"out_v{version}_{len(shape)}d{out_ext}")
                    result = probe("copy", source, target)
                    if result.returncode != 0:
                        check(False, f"{target}: {result.stderr}")
                        continue
                    src, out = nib.load(source), nib.load(target)
                    h, sh = out.header, src.header
                    check(int(h["sizeof_hdr"]) == 348 and h["magic"].item() == b"n+1",
                          f"{target}: not NIfTI-1")
                    check(out.get_data_dtype() == np.float32, f"{target}: not float32")
                    check(out.shape == src.shape, f"{target}: shape {out.shape}")
                    check(same_floats(np.asarray(out.dataobj), expected_values(src)),
                          f"{target}: values differ from the source's")
                    # Affines: NIfTI-1 stores float32, so the source's (float32 for a
                    # NIfTI-1 source, float64 for NIfTI-2) rounded to float32.
                    src_sform = sh.get_sform().astype(np.float32)
                    check(np.array_equal(h.get_sform(), src_sform), f"{target}: sform")
                    check(int(h["sform_code"]) == int(sh["sform_code"]), f"{target}: sform_code")
                    check(int(h["qform_code"]) == int(sh["qform_code"]), f"{target}: qform_code")
                    for key in ("quatern_b", "quatern_c", "quatern_d", "qoffset_x", "qoffset_y",
                                "qoffset_z"):
                        check(h[key] == np.float32(sh[key]), f"{target}: {key}")
                    qform_err = np.abs(h.get_qform() - sh.get_qform()).max()
                    check(qform_err < 1e-4, f"{target}: qform differs by {qform_err}")
                    check(np.array_equal(h["pixdim"][:4], sh["pixdim"][:4].astype(np.float32)),
                          f"{target}: pixdim {h['pixdim'][:4]}")
                    check(h.get_xyzt_units() == ("mm", "sec"), f"{target}: units")
                    if len(shape) == 4:
                        check(float(h["pixdim"][4]) == 2.0, f"{target}: TR {h['pixdim'][4]}")
                    check(not [f for f in os.listdir(folder) if ".tmp-" in f],
                          f"{target}: temporary file left")
                    count += 1
    print(f"writing: {count} outputs read by nibabel: NIfTI-1 float32, values bit for bit, "
          "affines equal")


def test_sha256(folder):
    lengths = list(range(0, 200)) + [1000, 4095, 4096, 65536, 1048575, 1048576, 3 * 1048576 + 17]
    names, digests = [], []
    for n in lengths:
        name = os.path.join(folder, f"sha_{n}.bin")
        data = RNG.integers(0, 256, size=n, dtype=np.uint8).tobytes()
        with open(name, "wb") as f:
            f.write(data)
        names.append(name)
        digests.append(hashlib.sha256(data).hexdigest())
    result = probe("sha256", *names)
    check(result.returncode == 0, result.stderr)
    got = result.stdout.split()
    check(got == digests, "FileSha256 differs from hashlib")
    texts = [RNG.integers(0, 256, size=int(n), dtype=np.uint8).tobytes()
             for n in RNG.integers(0, 300, size=500)]
    result = probe("sha256-text", stdin="".join(t.hex() + "\n" for t in texts))
    check(result.stdout.split() == [hashlib.sha256(t).hexdigest() for t in texts],
          "Sha256 differs from hashlib")
    print(f"sha256: {len(lengths)} files and {len(texts)} byte strings equal to hashlib")


def sig_digits(text):
    mantissa = text.lower().split("e")[0].lstrip("-").replace(".", "")
    return mantissa.strip("0") or "0"


def test_json():
    alphabet = [chr(c) for c in range(0, 0x80)] + ["é", "€", "\u2028", "\U0001F3B5", "中"]
    strings = ["".join(RNG.choice(alphabet, size=int(n))) for n in RNG.integers(0, 40, 400)]
    raw = [s.encode("utf-8") for s in strings]
    raw += [RNG.integers(0, 256, size=int(n), dtype=np.uint8).tobytes()
            for n in RNG.integers(0, 40, 400)]
    result = probe("json-quote", stdin="".join(b.hex() + "\n" for b in raw))
    lines = result.stdout.split("\n")[:-1]
    check(len(lines) == len(raw), "json-quote line count")
    bad = 0
    for b, line in zip(raw, lines):
        try:
            ok = json.loads(line) == b.decode("utf-8", "replace")  # strict: no raw controls
        except ValueError:
            ok = False
        bad += not ok
    check(bad == 0, f"JsonQuote: {bad} outputs do not parse back")

    bits = list(RNG.integers(0, 2**64, size=3000, dtype=np.uint64))
    values = [0.0, -0.0, 0.1, 1e21, 1e22, 5e-324, 2.2250738585072014e-308, 1.7976931348623157e308,
              123456789012345680.0, 1 / 3, math.nan, math.inf, -math.inf]
    values += [struct.unpack("<d", struct.pack("<Q", int(b)))[0] for b in bits]
    values += list(RNG.standard_normal(1000) * 10.0 ** RNG.integers(-30, 30, 1000))
    stdin = "".join(struct.pack("<d", v)[::-1].hex() + "\n" for v in values)
    result = probe("json-number", stdin=stdin)
    lines = result.stdout.split()
    check(len(lines) == len(values), "json-number line count")
    bad = 0
    for v, line in zip(values, lines):
        if not math.isfinite(v):
            bad += line != "null"
            continue
        back = json.loads(line)
        same = struct.pack("<d", float(back)) == struct.pack("<d", v)
        python = repr(v)[:-2] if repr(v).endswith(".0") and v != 0 else repr(v)
        if v == 0 and math.copysign(1, v) > 0:
            python = "0"
        ok = same and sig_digits(line) == sig_digits(repr(v)) and line == python
        if not ok:
            print("JsonNumber differs:", repr(v), line)
        bad += not ok
    check(bad == 0, f"JsonNumber: {bad} outputs differ from Python's repr (shortest form)")
    print(f"json: {len(raw)} strings and {len(values)} numbers parse back exactly")


def main():
    with tempfile.TemporaryDirectory(prefix="boldsum_nifti_io_") as folder:
        test_reading(folder)
        test_three_d_and_errors(folder)
        test_writing(folder)
        test_sha256(folder)
        test_json()
    for failure in FAILURES[:40]:
        print("FAIL:", failure)
    if FAILURES:
        print(f"{len(FAILURES)} failures")
        sys.exit(1)
    print("all checks passed")


if __name__ == "__main__":
    main()
