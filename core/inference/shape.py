"""The shape of a variable's values: the one skewness the profiles, the advisor and the
checks view all report."""

from __future__ import annotations

import math

import numpy as np


def skewness(values: np.ndarray) -> float | None:
    """Sample skewness, adjusted Fisher-Pearson G1 (``scipy.stats.skew(bias=False)``, as
    spreadsheets' SKEW; Joanes & Gill 1998, The Statistician 47(1)); None when undefined.

    The values are scaled to at most 1 in size first (skewness is scale-free; this keeps the
    moments in range near the float limit), and a spread below the rounding noise of the values
    counts as none, so near-constant data give None rather than scipy's precision warning.
    """
    n = len(values)
    if n < 3:
        return None
    with np.errstate(all="ignore"):
        # The smallest and largest value answer both questions at once: numpy's min and max
        # propagate NaN and an infinity is an extreme, so finite ones mean finite values.
        low, high = float(np.min(values)), float(np.max(values))
        if not (math.isfinite(low) and math.isfinite(high)):
            return None
        scale = max(abs(low), abs(high))
        if scale == 0:
            return None
        centred = np.divide(values, scale)
        centred -= centred.mean()
        m2 = float(np.dot(centred, centred)) / n
        spread = math.sqrt(m2) if m2 >= 0 else math.nan
        if not math.isfinite(spread) or spread <= 1e-12:
            return None
        # scipy.stats.skew(bias=False)'s formula, the moments as dot products (a third of its
        # time on a million values; the test suite checks the two agree).
        m3 = float(np.dot(centred * centred, centred)) / n
        value = m3 / m2**1.5 * math.sqrt(n * (n - 1.0)) / (n - 2.0)
    return value if math.isfinite(value) else None
