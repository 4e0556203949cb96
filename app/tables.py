"""Result sections -> display tables with readable numbers (no streamlit import).

Numbers are turned into text here, with a sensible number of significant digits and a
true minus sign, so every table on screen reads the same way.
"""

from __future__ import annotations

import math
from typing import Any

import pandas as pd
from pandas.io.formats.style import Styler

from app.state import variable_label

DASH = "—"
MINUS = "\u2212"
# Non-breaking space: keeps '−6.94 %' on one line in narrow table columns.
NBSP = "\u00a0"
EXTRAPOLATED = "⚠ beyond the observed data"


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


def term_label(term: dict[str, Any], references: dict[str, str]) -> str:
    """Plain name of a coefficient: 'log of drink_price', 'region = Inland (vs Coast)'."""
    column = term["column"]
    if column is None:
        return "Intercept"
    if term["level"] is not None:
        ref = references.get(column)
        return f"{column} = {term['level']}" + (f" (vs {ref})" if ref else "")
    if term["power"] == 1:
        return column
    if term["power"] == 2:
        return f"{column} squared"
    return variable_label(column, term["transform"])


def category_references(result: dict[str, Any], spec: dict[str, Any] | None) -> dict[str, str]:
    """The omitted level of each category: the spec's choice, else core's default (the most
    frequent level, which is also the reference point when none is given)."""
    out: dict[str, str] = {}
    point = result.get("reference_point") or {}
    for reg in (spec or {}).get("regressors", []):
        if reg.get("transform") == "category":
            ref = reg.get("reference") or point.get(reg["column"])
            if ref is not None:
                out[reg["column"]] = str(ref)
    return out


def coefficient_table(result: dict[str, Any], spec: dict[str, Any] | None = None) -> pd.DataFrame:
    references = category_references(result, spec)
    rows = []
    for term in result.get("terms") or []:
        rows.append(
            {
                "Term": term_label(term, references),
                "Estimate": sig(term["estimate"]),
                "Std. error": sig(term["std_error"], 3),
                "95 % interval": interval(term["ci_low"], term["ci_high"]),
                "p-value": p_value(term["p_value"]),
                "What it means": term.get("reading") or "",
            }
        )
    return pd.DataFrame(rows, columns=["Term", "Estimate", "Std. error", "95 % interval", "p-value", "What it means"])


def units_words(units: str, outcome: str) -> str:
    return f"% change in {outcome}" if units == "percent" else f"change in {outcome} (its own units)"


def _value_text(value: Any) -> str:
    if isinstance(value, float):
        return sig(value, 4)
    return str(value)


def change_text(effect: dict[str, Any]) -> str:
    """'+10%: 4.559 → 5.014' for numeric changes, 'Coast → Inland' for moves between values."""
    change = str(effect["change"])
    start, end = effect.get("from"), effect.get("to")
    if "->" in change:
        return change.replace("->", " → ")
    if isinstance(start, (int, float)) and isinstance(end, (int, float)):
        return f"{change}: {_value_text(float(start))}{NBSP}→{NBSP}{_value_text(float(end))}"
    return change


EFFECT_COLUMNS = [
    "Variable",
    "Change",
    "First-order approximation",
    "Exact",
    "95 % interval (exact)",
    "Gap (approx. − exact)",
    "Small-sample adjusted",
    "Average over rows",
    "Measured as",
    "Note",
]


def effects_table(result: dict[str, Any], spec: dict[str, Any] | None = None) -> pd.DataFrame:
    outcome = result["outcome"]["column"]
    transforms = {r["column"]: r.get("transform", "level") for r in (spec or {}).get("regressors", [])}
    rows = []
    for effect in result.get("effects") or []:
        percent = effect["units"] == "percent"
        suffix = f"{NBSP}%" if percent else ""
        digits = 3 if percent else 4

        def show(value: float | None, digits: int = digits, suffix: str = suffix) -> str:
            text = sig(value, digits, signed=True)
            return text if text == DASH else text + suffix

        column = effect["column"]
        if effect.get("exact") is None and effect.get("extrapolated"):
            note = "change leaves the values the transform accepts"
        elif effect.get("extrapolated"):
            note = EXTRAPOLATED
        else:
            note = ""
        rows.append(
            {
                "Variable": variable_label(column, transforms.get(column)),
                "Change": change_text(effect),
                "First-order approximation": show(effect.get("approximate")),
                "Exact": show(effect.get("exact")),
                "95 % interval (exact)": interval(effect.get("ci_low"), effect.get("ci_high"), digits, suffix),
                "Gap (approx. − exact)": show(effect.get("gap"), suffix=f"{NBSP}%{NBSP}pts" if percent else ""),
                "Small-sample adjusted": show(effect.get("adjusted")),
                "Average over rows": show(effect.get("average")),
                "Measured as": units_words(effect["units"], outcome),
                "Note": note,
            }
        )
    table = pd.DataFrame(rows, columns=EFFECT_COLUMNS)
    if not table.empty and not table["Note"].astype(bool).any():
        table = table.drop(columns="Note")
    return table


def extrapolated_rows(result: dict[str, Any]) -> list[int]:
    return [i for i, e in enumerate(result.get("effects") or []) if e.get("extrapolated")]


NUMBER_COLUMNS = {
    "Estimate",
    "Std. error",
    "95 % interval",
    "p-value",
    "First-order approximation",
    "Exact",
    "95 % interval (exact)",
    "Gap (approx. − exact)",
    "Small-sample adjusted",
    "Average over rows",
}
HIGHLIGHT = "background-color: #FFF4D6"


def styled(table: pd.DataFrame, highlight_rows: list[int] | None = None) -> Styler:
    """Numbers right-aligned on one line (so columns line up and never break mid-number);
    the listed rows tinted, e.g. extrapolated effects."""
    numbers = [c for c in table.columns if c in NUMBER_COLUMNS]
    style = table.style.set_properties(subset=numbers, **{"text-align": "right", "white-space": "nowrap"})
    rows = set(highlight_rows or [])
    if rows:
        style = style.apply(lambda row: [HIGHLIGHT if row.name in rows else ""] * len(row), axis=1)
    return style
