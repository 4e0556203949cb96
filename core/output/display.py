"""Result sections as the tables a reader sees: every number already printed as text.

The screen shows these tables and every export writes them (``core.output.tables``), so a
figure reads the same in the app, in a CSV, in Markdown, in LaTeX and in the report. Numbers
are printed by ``core.output.numbers``; words come from ``core.output.text`` and the registry.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd

from core.model.transforms import variable_label
from core.output.numbers import DASH, MINUS, NBSP, interval, p_value, sig
from core.output.unit_words import amount, label, units_of

EXTRAPOLATED = "⚠ beyond the observed data"


def term_label(term: dict[str, Any], references: dict[str, str]) -> str:
    """Plain name of a coefficient: 'log of drink_price', 'region = Inland (vs Coast)'."""
    column = term["column"]
    if column is None:
        return "Intercept"
    if term.get("by"):
        own = term_label({**term, "by": None}, references)
        other = f"{term['by']} = {term['by_level']}" if term.get("by_level") is not None else term["name"].split(" × ", 1)[1]
        return f"{own} × {other}"
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


def units_words(units: str, outcome: str, unit: str | None = None) -> str:
    """'% change in y', or 'change in y ($ per week)' ('(its own units)' without a unit)."""
    if units == "percent":
        return f"% change in {outcome}"
    return f"change in {label(outcome, unit, 'its own units')}"


def _value_text(value: Any) -> str:
    if isinstance(value, float):
        return sig(value, 4)
    return str(value)


def change_text(effect: dict[str, Any], unit: str | None = None) -> str:
    """'+10%: 4.559 → 5.014' for numeric changes, 'Coast → Inland' for moves between values.
    With the column's unit, a change in units names it ('+1 year: 5.2 → 6.2') and a percent
    change names it on its end value ('+10%: 4.559 → 5.014 $')."""
    change = str(effect["change"])
    start, end = effect.get("from"), effect.get("to")
    if "->" in change:
        return change.replace("->", " → ")
    percent = change.endswith("%")
    if not percent:
        change = amount(change, unit, NBSP)
    if isinstance(start, (int, float)) and isinstance(end, (int, float)):
        shown = _value_text(float(end))
        shown = amount(shown, unit, NBSP) if percent else shown
        return f"{change}: {_value_text(float(start))}{NBSP}→{NBSP}{shown}"
    return change


EFFECT_COLUMNS = [
    "Variable",
    "Read at",
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
    units = units_of(result, spec)
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
                "Read at": group_text(effect.get("group")).replace(" = ", f"{NBSP}={NBSP}"),
                "Change": change_text(effect, units.get(column)),
                "First-order approximation": show(effect.get("approximate")),
                "Exact": show(effect.get("exact")),
                "95 % interval (exact)": interval(effect.get("ci_low"), effect.get("ci_high"), digits, suffix),
                "Gap (approx. − exact)": show(effect.get("gap"), suffix=f"{NBSP}%{NBSP}pts" if percent else ""),
                "Small-sample adjusted": show(effect.get("adjusted")),
                "Average over rows": show(effect.get("average")),
                "Measured as": units_words(effect["units"], outcome, units.get(outcome)),
                "Note": note,
            }
        )
    table = pd.DataFrame(rows, columns=EFFECT_COLUMNS)
    for optional in ("Note", "Read at"):
        if not table.empty and not table[optional].astype(bool).any():
            table = table.drop(columns=optional)
    return table


def group_text(group: dict[str, Any] | None) -> str:
    """Where a moderated effect is read: 'region = Inland', 'foot_traffic = 1,250'; '' without."""
    return ", ".join(f"{by} = {_value_text(value)}" for by, value in (group or {}).items())


def _bootstrap_text(entry: dict[str, Any], method: str, digits: int, suffix: str) -> str:
    found = (entry.get("bootstrap") or {}).get(method)
    return interval(found[0], found[1], digits, suffix) if found else DASH


def scenarios_table(result: dict[str, Any]) -> pd.DataFrame:
    """One row per scenario (docs/contract.md §3.14): its changes, the exact combined effect and
    its interval, the sum of the single first-order effects, the outcome before and after; the
    bootstrap intervals (§3.15) when the result has them."""
    outcome = result["outcome"]["column"]
    units = units_of(result)
    rows = []
    for entry in result.get("scenarios") or []:
        percent = entry["units"] == "percent"
        suffix, digits = (f"{NBSP}%", 3) if percent else ("", 4)
        row = {
            "Scenario": entry["name"],
            "Changes": "; ".join(f"{c['column']} {change_text(c, units.get(c['column']))}" for c in entry["changes"]),
            "Exact": sig(entry.get("exact"), digits, signed=True) + (suffix if entry.get("exact") is not None else ""),
            "95 % interval (exact)": interval(entry.get("ci_low"), entry.get("ci_high"), digits, suffix),
            "Sum of single approximations": sig(entry.get("sum_of_approximate"), digits, signed=True)
            + (suffix if entry.get("sum_of_approximate") is not None else ""),
            "Before": sig(entry.get("before"), 5),
            "After": sig(entry.get("after"), 5),
            "Measured as": units_words(entry["units"], outcome, units.get(outcome)),
        }
        if "bootstrap" in entry:
            row["Bootstrap 95 % (percentile)"] = _bootstrap_text(entry, "percentile", digits, suffix)
            row["Bootstrap 95 % (BCa)"] = _bootstrap_text(entry, "bca", digits, suffix)
        if entry.get("extrapolated"):
            row["Note"] = EXTRAPOLATED if entry.get("exact") is not None else "a change leaves the values the transform accepts"
        rows.append(row)
    table = pd.DataFrame(rows)
    if "Note" in table:
        table["Note"] = table["Note"].fillna("")
    return table


def extrapolated_rows(result: dict[str, Any]) -> list[int]:
    return [i for i, e in enumerate(result.get("effects") or []) if e.get("extrapolated")]


# --- units check -----------------------------------------------------------------------------------------
def units_table(check: dict[str, Any], words: list[tuple[str, str]]) -> pd.DataFrame:
    """The effect of the same real change with the variable recorded in other units."""
    percent = check["units"] == "percent"
    suffix = f"{NBSP}%" if percent else ""
    column = check["column"]
    effect_col = f"Exact effect of {check['change']}"
    rows = []
    for row, (short, long) in zip(check["rows"], words, strict=True):
        exact = row.get("exact")
        rows.append(
            {
                "Units": short,
                "Meaning": f"{column} measured {long}" if short != "as recorded" else f"{column} as in the data",
                effect_col: DASH if exact is None else sig(exact, 3, signed=True) + suffix,
                "Elasticity at the reference point": sig(row.get("elasticity"), 3),
            }
        )
    return pd.DataFrame(rows, columns=["Units", "Meaning", effect_col, "Elasticity at the reference point"])


# --- residual checks ----------------------------------------------------------------------------------------
VIF_LIMIT = 10.0  # rule of thumb (Belsley, Kuh & Welsch 1980 discuss it; common practice)


def vif_table(result: dict[str, Any], spec: dict[str, Any] | None = None) -> pd.DataFrame:
    references = category_references(result, spec)
    labels = {t["name"]: term_label(t, references) for t in result.get("terms") or []}
    rows = []
    for entry in (result.get("diagnostics") or {}).get("vif") or []:
        value = entry.get("vif")
        high = value is not None and value > VIF_LIMIT
        rows.append(
            {
                "Term": labels.get(entry["name"], entry["name"]),
                "Variance inflation (VIF)": sig(value, 3),
                "Note": "⚠ above 10: entangled with other regressors" if high else "",
            }
        )
    return pd.DataFrame(rows, columns=["Term", "Variance inflation (VIF)", "Note"])


def influence_table(result: dict[str, Any], frame: pd.DataFrame | None, columns: list[str]) -> pd.DataFrame:
    """The most influential rows, numbered as in the spreadsheet (header = row 1), with the
    model's own columns so the user can recognise them."""
    rows = []
    for entry in ((result.get("diagnostics") or {}).get("influence") or {}).get("rows") or []:
        row: dict[str, Any] = {
            "Sheet row": f"{entry['sheet_row']:,}",
            "Leverage": sig(entry.get("leverage"), 3),
            "Cook's distance": sig(entry.get("cooks_distance"), 3),
            "Residual": sig(entry.get("residual"), 3),
        }
        position = entry["sheet_row"] - 2
        if frame is not None and 0 <= position < len(frame):
            for column in columns:
                if column in frame.columns:
                    row[column] = cell_text(frame[column].iloc[position])
        rows.append(row)
    return pd.DataFrame(rows)


def cell_text(value: Any) -> str:
    """A data cell as the user would recognise it: 37,400, 4.69, 0.085, Inland."""
    if isinstance(value, (bool, np.bool_)) or value is None:
        return str(value)
    if isinstance(value, (int, np.integer)):
        return f"{int(value):,}"
    if isinstance(value, (float, np.floating)):
        number = float(value)
        if not math.isfinite(number):
            return DASH
        return f"{number:,.6g}".replace("-", MINUS)
    return str(value)


# --- compare models ----------------------------------------------------------------------------------------
NOT_COMPARABLE = "not comparable"


RAW_R2 = "R² as fitted ¹"


def compare_table(rows: list[dict[str, Any]], best: set[str]) -> pd.DataFrame:
    """One row per saved model: measures that compare across outcome transforms, the best by
    original-scale AIC marked, and the raw R² flagged as not comparable."""
    best_aic = {}
    for row in rows:
        if row["name"] in best:
            best_aic[(row["data_id"], row["n_obs"])] = row["aic"]
    out = []
    for row in rows:
        ppml = row["ppml"]

        def measure(value: float | None, digits: int = 6, ppml: bool = ppml) -> str:
            return NOT_COMPARABLE if ppml else sig(value, digits)

        reference = best_aic.get((row["data_id"], row["n_obs"]))
        if row["name"] in best:
            rank = "★ best"
        elif ppml:
            rank = NOT_COMPARABLE
        elif reference is not None and row["aic"] is not None:
            rank = f"+{sig(row['aic'] - reference, 4)} worse"
        else:
            rank = "not ranked (other rows)" if len(rows) > 1 else DASH
        out.append(
            {
                "Model": row["name"],
                "Outcome as fitted": row["outcome_label"],
                "Rows used": f"{row['n_obs']:,}",
                "R² (original scale)": sig(row["r2_original"], 3),
                "Log-likelihood (original scale)": measure(row["loglik"]),
                "AIC (original scale)": measure(row["aic"]),
                "BIC (original scale)": measure(row["bic"]),
                "AIC rank": rank,
                "Breusch–Pagan p": p_value(row["bp_p"]) if not ppml else "does not apply",
                RAW_R2: sig(row["r2_raw"], 3),
            }
        )
    return pd.DataFrame(out)


def compare_effects_table(rows: list[dict[str, Any]]) -> pd.DataFrame:
    """Each regressor's change (rows) under each saved model (columns): the exact effect with
    its units, so the same question can be read across models."""
    keys: list[tuple[str, str]] = []
    cells: dict[tuple[str, str], dict[str, str]] = {}
    for row in rows:
        for effect in row["effects"]:
            at = group_text(effect.get("group"))
            key = (effect["column"], str(effect["change"]).replace("->", " → ") + (f" at {at}" if at else ""))
            if key not in cells:
                keys.append(key)
                cells[key] = {}
            percent = effect["units"] == "percent"
            value = effect.get("exact")
            text = DASH if value is None else sig(value, 3 if percent else 4, signed=True) + (f"{NBSP}%" if percent else "")
            if effect.get("extrapolated") and value is not None:
                text += " ⚠"
            cells[key][row["name"]] = text
    measured = {"Change": "Effects measured as"}
    for row in rows:
        units = {e["units"] for e in row["effects"]}
        measured[row["name"]] = units_words(units.pop(), row["outcome"]) if len(units) == 1 else "see each row"
    out = [measured]
    for key in keys:
        line = {"Change": f"{key[0]}: {key[1]}"}
        for row in rows:
            line[row["name"]] = cells[key].get(row["name"], "not in this model")
        out.append(line)
    return pd.DataFrame(out, columns=["Change"] + [r["name"] for r in rows])


# --- predict ----------------------------------------------------------------------------------------------
def prediction_table(prediction: dict[str, Any], outcome: str, ppml: bool = False) -> pd.DataFrame:
    """The prediction on the original scale by each retransform, with the interval for the
    expected value and the wider interval for one new observation."""

    def value(key: str) -> str:
        return sig(prediction.get(key), 4)

    mean_interval = interval(prediction.get("mean_ci_low"), prediction.get("mean_ci_high"), 4)
    new_interval = interval(prediction.get("interval_low"), prediction.get("interval_high"), 4)
    rows = [
        {
            "Retransform": "Smearing (Duan)",
            "What it estimates": "the expected value, without assuming a shape for the residuals",
            f"Predicted {outcome}": value("smearing"),
            "95 % interval": mean_interval + " (for the expected value)",
        },
        {
            "Retransform": "Normal theory",
            "What it estimates": "the expected value, if the residuals are normal",
            f"Predicted {outcome}": value("normal"),
            "95 % interval": DASH,
        },
        {
            "Retransform": "Naive back-transform",
            "What it estimates": "closer to the median; understates the expected value when the transform is curved",
            f"Predicted {outcome}": value("naive"),
            "95 % interval": DASH,
        },
        {
            "Retransform": "One new observation",
            "What it estimates": "where a single new row would fall",
            f"Predicted {outcome}": DASH,
            "95 % interval": ("not available: PPML models the mean only" if ppml else new_interval + " (prediction interval)"),
        },
    ]
    return pd.DataFrame(rows)


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
    "Elasticity at the reference point",
    "Variance inflation (VIF)",
    "Sheet row",
    "Leverage",
    "Cook's distance",
    "Residual",
    "Rows used",
    "R² (original scale)",
    "Log-likelihood (original scale)",
    "AIC (original scale)",
    "BIC (original scale)",
    "Breusch–Pagan p",
    "R² as fitted ¹",
    "Sum of single approximations",
    "Before",
    "After",
    "Bootstrap 95 % (percentile)",
    "Bootstrap 95 % (BCa)",
}
