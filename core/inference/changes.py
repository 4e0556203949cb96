"""The default change of a regressor: one rule, read by the advisor and by the effect engine.

Rules of thumb (common practice, no source), in this order:
- a 0/1 dummy: the switch 0->1;
- a duration in years: +1 (one more year);
- a money amount on a relative scale (log, IHS, ...): +10 %;
- whole numbers (counts, integer scales, square feet): +1, or a round step near the typical
  spread when that is larger (10, 100, ...), never a fraction of a whole unit; on a relative
  scale the step is at most about a tenth of the median, so it reads like a 10 % change;
- other values on a relative scale: +10 %;
- other values in levels: a round step near the typical spread (a power of ten at or below
  it: 0.1 for shares, 1, 10, ...).

The typical spread is the interquartile range over 1.349 (the standard deviation of normal
data, but not inflated by a long tail: a lot size step stays near a typical lot's difference),
or the standard deviation where the quartiles coincide (a column that is mostly zeros).

Kept apart from the advisor so that the effect engine can read it without importing the
advisor (which fits models through ``core.analysis``).
"""

from __future__ import annotations

import math

import numpy as np

# Above this, a whole-number step is written in exponent form (it is no longer exact as a float).
_EXACT_INTEGER = 1e15
# The typical spread and the median are read off at most this many evenly spaced rows: the step is
# a power of ten, which a sample this size fixes as well as every row (and a million-row
# percentile would be most of a refit's time).
_SPREAD_ROWS = 20_000


def default_change_text(
    values: np.ndarray, relative: bool, kind: str | None = None, binary: bool | None = None, finite: bool = False
) -> str:
    """The change as spec text ('0->1', '+1', '+100', '+0.1', '+10%') for a numeric regressor.

    ``values`` are the regressor's values on the rows the model uses; ``relative`` says whether
    its transform reads changes relative to the level (the transform registry's
    ``relative_change``); ``kind`` is the profile's kind when known (money, duration_years, ...);
    ``binary`` says whether the values are 0/1 (worked out from ``values`` when None);
    ``finite`` that every value is finite (a design's rows), which spares a pass over them.
    """
    x = np.asarray(values, dtype=float)
    if not finite:
        keep = np.isfinite(x)
        if not keep.all():  # a copy only when needed: a million-row copy is most of the rule's time
            x = x[keep]
    if binary is None:
        binary = bool(len(x)) and bool(np.all((x == 0.0) | (x == 1.0)))
    if binary:
        return "0->1"
    if kind == "duration_years":
        return "+1"
    if relative and kind == "money":
        return "+10%"
    sample = x[:: max(1, len(x) // _SPREAD_ROWS)]
    with np.errstate(all="ignore"):
        # The first rows (contiguous, so cheap), then the sample, then every row, each only when
        # the one before is all whole numbers (most columns fail on their first rows).
        head = x[:256]
        whole = (
            bool(len(x))
            and bool(np.all(head == np.rint(head)))
            and bool(np.all(sample == np.rint(sample)))
            and bool(np.all(x == np.rint(x)))
        )
        if relative and not whole:
            return "+10%"  # whatever the spread
        spread = _typical_spread(sample)
    if whole and relative and len(x):
        # On a log-type scale a step reads against the level: at most about a tenth of a typical
        # value, like the +10 % of an amount (100 square feet for houses of 1,800).
        spread = min(spread, 0.1 * abs(float(np.median(sample)))) or spread
    step = _round_step(spread)
    if whole:
        return _units(max(1.0, step))
    if relative:
        return "+10%"
    return _units(step)


def _typical_spread(x: np.ndarray) -> float:
    if len(x) == 0:
        return 0.0
    low, high = np.percentile(x, [25.0, 75.0])
    spread = float(high - low) / 1.349
    return spread if spread > 0 and math.isfinite(spread) else float(np.std(x))


def _round_step(spread: float) -> float:
    """The power of ten at or below ``spread`` (1 for no spread or an overflowing one)."""
    if not math.isfinite(spread) or spread <= 0:
        return 1.0
    step = float(10.0 ** math.floor(math.log10(spread)))
    return step if step > 0 else spread  # a power of ten below the smallest float is zero


def _units(step: float) -> str:
    if step >= 1 and step < _EXACT_INTEGER:
        return f"+{int(round(step))}"
    return f"+{step:g}"
