"""Modified z-scores for the report's outlier flag (stats/robust_scores.h) against scipy:
M_i = (x_i - median) / median_abs_deviation(x, scale='normal') (Iglewicz & Hoaglin 1993;
scipy.stats.median_abs_deviation with the normal scale divides the MAD by
Phi^-1(0.75) = 0.6744897501960817), and numpy.median for the median. Tolerance 1e-13
relative: both sort and take the same middle values."""
import os
import subprocess
import sys

import numpy as np
from scipy.stats import median_abs_deviation

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import check, finish  # noqa: E402

PROBE = os.path.join(os.environ["BOLDSUM_PROBE_DIR"], "stats_robust_probe")


rng = np.random.default_rng(3)
samples = {
    "eight distances, one far": np.r_[rng.normal(1.0, 0.1, 7), 2.5],
    "odd count": rng.normal(0, 1, 9),
    "even count": rng.standard_t(3, 12),
    "large": rng.lognormal(0, 1, 500),
    "with nan": np.r_[rng.normal(5, 2, 6), np.nan, rng.normal(5, 2, 3)],
}
lines = "".join(" ".join(repr(float(v)) for v in x) + "\n" for x in samples.values())
lines += "1 2 3 3 3 3 9\n"   # MAD 0: no scores
lines += "4 7\n"             # fewer than three values: no scores
out = subprocess.run([PROBE], input=lines, capture_output=True, text=True)
check("probe runs", out.returncode == 0, out.stderr)
rows = out.stdout.splitlines()
worst = 0.0
for k, (name, x) in enumerate(samples.items()):
    median = float(rows[2 * k].split()[1])
    scores = np.array([float(v) for v in rows[2 * k + 1].split()[1:]])
    finite = x[np.isfinite(x)]
    want_median = np.median(finite)
    want = (x - want_median) / median_abs_deviation(finite, scale="normal")
    err = np.nanmax(np.abs(scores - want) / np.maximum(np.abs(want), 1.0))
    worst = max(worst, err)
    check(name + ": median = numpy.median", abs(median - want_median) <= 1e-15 * abs(want_median),
          "%r vs %r" % (median, want_median))
    check(name + ": scores = scipy median_abs_deviation(scale='normal') (1e-13)",
          err < 1e-13 and np.array_equal(np.isnan(scores), np.isnan(want)), "%.1e" % err)
    if name == "eight distances, one far":
        check("the far value scores above 3.5 and no other does",
              scores[-1] > 3.5 and np.all(np.abs(scores[:-1]) <= 3.5), str(scores))
check("MAD 0 gives no scores", all(v == "nan" for v in rows[-3].split()[1:]), rows[-3])
check("two values give no scores", all(v == "nan" for v in rows[-1].split()[1:]), rows[-1])
print("largest difference from scipy: %.1e" % worst)
finish()
