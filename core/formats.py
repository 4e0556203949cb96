"""Text renderings of an analysis result (the result dict of ``core.analyze``)."""

from __future__ import annotations

import json
import math
from typing import Any


def number(value: Any, digits: int = 4) -> str:
    """A number with ``digits`` significant digits; '' for missing values."""
    if value is None:
        return ""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return str(value)
    if not math.isfinite(value):
        return ""
    if value == 0:
        return "0"
    if abs(value) >= 10**digits or abs(value) < 10 ** (-digits):
        return f"{value:.{digits - 1}e}"
    return f"{value:.{digits}g}"


def p_value(value: Any) -> str:
    if value is None:
        return ""
    return "< 0.0001" if value < 1e-4 else f"{value:.4f}"


def to_json(result: dict[str, Any]) -> str:
    return json.dumps(result, indent=2, allow_nan=False)


def _md_table(header: list[str], rows: list[list[str]]) -> list[str]:
    def clean(cell: str) -> str:
        return cell.replace("|", "\\|").replace("\n", " ")

    lines = ["| " + " | ".join(map(clean, header)) + " |", "|" + "|".join("---" for _ in header) + "|"]
    lines += ["| " + " | ".join(map(clean, row)) + " |" for row in rows]
    return lines


def model_sentence(result: dict[str, Any]) -> str:
    outcome = result["outcome"]
    return f"Outcome {outcome['column']} ({outcome['transform']}); {result['n_obs']} rows used, {result['n_dropped']} dropped; standard errors: {result['covariance']}."


def effect_units(effect: dict[str, Any], outcome_column: str) -> str:
    return f"% change in {outcome_column}" if effect["units"] == "percent" else f"change in {outcome_column}"


def to_markdown(result: dict[str, Any]) -> str:
    """A memo-ready Markdown summary: model, coefficients, effects, fit, warnings, cautions."""
    out = ["# Formwise results", "", model_sentence(result), ""]
    if "terms" in result:
        out += ["## Coefficients", ""]
        rows = [
            [
                t["name"],
                number(t["estimate"]),
                number(t["std_error"]),
                f"{number(t['ci_low'])} to {number(t['ci_high'])}",
                p_value(t["p_value"]),
                t.get("reading", ""),
            ]
            for t in result["terms"]
        ]
        out += _md_table(["Term", "Estimate", "Std. error", "95 % interval", "p-value", "What it means"], rows) + [""]
    if "effects" in result:
        y = result["outcome"]["column"]
        out += ["## Effects of changes", ""]
        rows = []
        for e in result["effects"]:
            rows.append(
                [
                    e["column"],
                    e["change"],
                    effect_units(e, y),
                    number(e["approximate"]),
                    number(e["exact"]),
                    f"{number(e['ci_low'])} to {number(e['ci_high'])}",
                    number(e.get("adjusted")),
                    number(e.get("average")),
                    "yes" if e.get("extrapolated") else "",
                ]
            )
        out += _md_table(
            [
                "Variable",
                "Change",
                "Units",
                "Approximate (first order)",
                "Exact",
                "95 % interval (exact)",
                "Small-sample adjusted",
                "Sample average",
                "Extrapolated",
            ],
            rows,
        ) + [""]
    if "fit" in result:
        fit = result["fit"]
        out += ["## Fit", ""]
        rows = [[key, number(value)] for key, value in fit.items()]
        out += _md_table(["Measure", "Value"], rows) + [""]
    if result.get("warnings"):
        out += ["## Warnings", ""] + [f"- {w}" for w in result["warnings"]] + [""]
    if result.get("cautions"):
        out += ["## Cautions", ""] + [f"- {c}" for c in result["cautions"]] + [""]
    return "\n".join(out)
