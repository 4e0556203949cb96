"""Numbers as text: the one place that decides digits, separators, signs and dashes.

The screen and the exported files read their numbers from here, so a figure looks the same
wherever it is shown. A true minus sign (U+2212) is used in running text and tables on screen;
exported cells that must stay machine-readable use ``export_number``.
"""

from __future__ import annotations

import math

DASH = "—"
MINUS = "\u2212"
# Non-breaking space: keeps '−6.94 %' on one line in narrow table columns.
NBSP = "\u00a0"


def sig(value: float | None, digits: int = 4, signed: bool = False) -> str:
    """``value`` to ``digits`` significant digits, thousands separated, scientific only
    for very large or very small magnitudes; a dash for missing values."""
    if value is None or not math.isfinite(value):
        return DASH
    magnitude = abs(value)
    if magnitude == 0:
        text = "0"
    elif magnitude >= 1e7 or magnitude < 1e-4:
        text = f"{magnitude:.{digits - 1}e}"
    else:
        decimals = max(0, digits - 1 - math.floor(math.log10(magnitude)))
        text = f"{magnitude:,.{decimals}f}"
    if value < 0 and text.strip("0.,e+-") != "":
        return MINUS + text
    return ("+" if signed and value > 0 else "") + text


def p_value(value: float | None) -> str:
    if value is None or not math.isfinite(value):
        return DASH
    if value < 0.001:
        return "< 0.001"
    return f"{value:.3f}"


def interval(low: float | None, high: float | None, digits: int = 3, suffix: str = "") -> str:
    if low is None or high is None:
        return DASH
    return f"{sig(low, digits)}{suffix} to {sig(high, digits)}{suffix}"


def compact(value: float) -> str:
    """A number in few characters for the 'about' column: 4.1, 6,383, 0.0123, 3.5e+06."""
    if not math.isfinite(value):
        return "n/a"
    magnitude = abs(value)
    if magnitude == 0:
        return "0"
    if magnitude >= 1e6 or magnitude < 1e-3:
        return f"{value:.2g}"
    if magnitude >= 1000:
        return f"{value:,.0f}"
    return f"{value:.3g}"


def p_text(p: float | None) -> str:
    """'p = 0.92', 'p = 0.013', 'p < 0.001'; two significant digits below 0.1."""
    if p is None or not math.isfinite(p):
        return "p not available"
    if p < 0.001:
        return "p < 0.001"
    if p < 0.1:
        return f"p = {p:.2g}"
    return f"p = {p:.2f}"


def round_sig(value: float, digits: int = 4) -> float:
    """``value`` rounded to ``digits`` significant digits (input defaults that read well)."""
    if value == 0 or not math.isfinite(value):
        return value
    return round(value, digits - 1 - math.floor(math.log10(abs(value))))


def step_for(value: float) -> float:
    """A +/- step of about a tenth of the value's magnitude: 6383 -> 100, 4.56 -> 0.1."""
    if value == 0 or not math.isfinite(value):
        return 1.0
    return float(10 ** (math.floor(math.log10(abs(value))) - 1))


def signed(value: float, digits: int = 2) -> str:
    # Rounded first, so a value that rounds to zero shows as 0.00, not −0.00.
    return f"{round(value, digits) + 0.0:.{digits}f}".replace("-", "\u2212")


def format_cell(value: float | int | str | None, digits: int = 4) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            return ""
        if value == 0:
            return "0"
        if 10**digits <= abs(value) < 1e15:
            return f"{value:,.0f}"
        if abs(value) >= 1e15 or abs(value) < 10 ** (-digits):
            return f"{value:.{digits - 1}e}"
        return f"{value:.{digits}g}"
    return str(value)
