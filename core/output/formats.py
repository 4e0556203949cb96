"""Whole-result renderings for the command line: JSON, Markdown, CSV and LaTeX documents."""

from __future__ import annotations

import json
from typing import Any

from core.output.escape import csv_cell, markdown
from core.output.tables import render, result_tables


def to_json(result: dict[str, Any]) -> str:
    return json.dumps(result, indent=2, allow_nan=False, ensure_ascii=False)


def model_sentence(result: dict[str, Any]) -> str:
    outcome = result["outcome"]
    return (
        f"Outcome {outcome['column']} ({outcome['transform']}); {result['n_obs']} rows used, "
        f"{result['n_dropped']} dropped; standard errors: {result['covariance']}."
    )


def to_markdown(result: dict[str, Any]) -> str:
    """A memo-ready summary: model, coefficients, effects, checks, warnings and cautions."""
    out = ["# Formwise results", "", markdown(model_sentence(result)), "", render(result_tables(result), "markdown")]
    if result.get("warnings"):
        out += ["## Warnings", ""] + [f"- {markdown(w)}" for w in result["warnings"]] + [""]
    out += ["## Cautions", ""] + [f"- {markdown(c)}" for c in result.get("cautions", [])]
    return "\n".join(out) + "\n"


def to_csv(result: dict[str, Any]) -> str:
    return f"{csv_cell(model_sentence(result))}\n\n" + render(result_tables(result), "csv")


def to_latex(result: dict[str, Any]) -> str:
    return f"% {model_sentence(result)}\n" + render(result_tables(result), "latex")


FORMATS = {"json": to_json, "markdown": to_markdown, "csv": to_csv, "latex": to_latex}
