"""The report's diverging colour scale (report/colour_scale.h), read from
tests/tools/report_probe colours (the 8-bit sRGB entries the pictures use):

- lightness: CIE 1976 L* of every entry, computed here from the published formulas (the
  sRGB transfer curve and sRGB -> XYZ matrix of IEC 61966-2-1, D65 white; CIE 1976
  L* = 116 f(Y/Yn) - 16) and, independently, by colorspacious (cspace_convert to "CIELab");
  L* must rise strictly from the negative end to the middle and fall strictly from the
  middle to the positive end;
- colour-blind safety: the entries seen through colorspacious' simulation of protanomaly,
  deuteranomaly and tritanomaly at severity 100 (Machado, Oliveira & Fernandes 2009, IEEE
  TVCG 15:1291); an entry and its mirror (same |value|, other sign) must stay at least
  10 CIELAB units apart (Delta E 1976) from an eighth of the range outwards, so that the
  sign of a value stays readable; lightness stays monotone for protan and deutan viewers.
"""
import os
import subprocess
import sys

import numpy as np
from colorspacious import cspace_convert

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import check, finish  # noqa: E402

PROBE = os.path.join(os.environ["BOLDSUM_PROBE_DIR"], "report_probe")


def lightness(rgb255):
    """L* by IEC 61966-2-1 (sRGB decoding, matrix row for Y) and CIE 1976."""
    c = rgb255 / 255.0
    linear = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    y = linear @ np.array([0.2126, 0.7152, 0.0722])  # Y row of the sRGB -> XYZ matrix; Yn = 1
    f = np.where(y > (6 / 29) ** 3, np.cbrt(y), y / (3 * (6 / 29) ** 2) + 4 / 29)
    return 116 * f - 16


out = subprocess.run([PROBE, "colours"], capture_output=True, text=True)
check("probe runs", out.returncode == 0, out.stderr)
rgb = np.array([[int(v) for v in line.split()] for line in out.stdout.splitlines()], float)
size = len(rgb)
middle = size // 2
check("odd number of entries with a middle", size % 2 == 1 and size >= 65, str(size))

for name, L in (("IEC 61966-2-1 + CIE 1976 formulas", lightness(rgb)),
                ("colorspacious CIELab", cspace_convert(rgb, "sRGB255", "CIELab")[:, 0])):
    rising = np.diff(L[:middle + 1])
    falling = np.diff(L[middle:])
    check("L* (%s) rises strictly from the negative end to the middle" % name,
          np.all(rising > 0), "smallest step %.3f" % rising.min())
    check("L* (%s) falls strictly from the middle to the positive end" % name,
          np.all(falling < 0), "largest step %.3f" % falling.max())
    print("L* (%s): negative end %.1f, middle %.1f, positive end %.1f; smallest step %.3f" % (
        name, L[0], L[middle], L[-1], min(rising.min(), -falling.max())))
both = np.abs(lightness(rgb) - cspace_convert(rgb, "sRGB255", "CIELab")[:, 0]).max()
check("the two L* computations agree (0.05)", both < 0.05, "%.3f" % both)

for kind in ("protanomaly", "deuteranomaly", "tritanomaly"):
    seen = np.clip(cspace_convert(rgb / 255.0, {"name": "sRGB1+CVD", "cvd_type": kind,
                                                "severity": 100}, "sRGB1"), 0, 1)
    lab = cspace_convert(seen, "sRGB1", "CIELab")
    start = middle // 8
    gaps = [np.linalg.norm(lab[middle - k] - lab[middle + k]) for k in range(start, middle + 1)]
    check("%s: mirrored entries stay >= 10 Delta E apart beyond 1/8 of the range" % kind,
          min(gaps) >= 10, "smallest %.1f" % min(gaps))
    if kind != "tritanomaly":
        L = lab[:, 0]
        check("%s: lightness still monotone on each side" % kind,
              np.all(np.diff(L[:middle + 1]) > 0) and np.all(np.diff(L[middle:]) < 0))

finish()
