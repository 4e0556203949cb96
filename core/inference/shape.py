"""The shape of a variable's values: the one skewness the profiles, the advisor and the
checks view all report."""

from __future__ import annotations

import math

import numpy as np
from scipy import stats


def skewness(values: np.ndarray) -> float | None:
    """Sample skewness, adjusted Fisher-Pearson G1 (``scipy.stats.skew(bias=False)``, as
    spreadsheets' SKEW; Joanes & Gill 1998, The Statistician 47(1)); None when undefined.

    The values are scaled to at most 1 in size first (skewness is scale-free; this keeps the
    moments in range near the float limit), and a spread below the rounding noise of the values
    counts as none, so near-constant data give None rather than scipy's precision warning.
    """
    n = len(values)
    if n < 3 or not np.isfinite(values).all():
        return None
    scale = float(np.max(np.abs(values)))
    if scale == 0:
        return None
    with np.errstate(all="ignore"):
        scaled = values / scale
        spread = float(np.std(scaled))
        if not math.isfinite(spread) or spread <= 1e-12:
            return None
        value = float(stats.skew(scaled, bias=False))
    return value if math.isfinite(value) else None
