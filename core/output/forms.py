"""The sweep over functional forms (docs/contract.md §3.16) in words and tables, the same on the
screen and in the report: which variables change form, one sentence on the spread of the focus
effect, "what moves the answer" and the models ranked by original-scale AIC."""

from __future__ import annotations

from typing import Any

import pandas as pd

from core.inference.sweep import MAX_MODELS
from core.output.numbers import sig
from core.output.text import join_words


def varying(sweep: dict[str, Any]) -> list[str]:
    """The variables that take more than one form across the sweep's models, outcome first."""
    models = sweep["models"]
    return [c for c in models[0]["transforms"] if len({m["transforms"][c] for m in models}) > 1]


def forms_text(transforms: dict[str, str], columns: list[str]) -> str:
    return ", ".join(f"{c}: {transforms[c]}" for c in columns)


def _finite(values: list[Any]) -> list[float]:
    return [float(v) for v in values if v is not None and v == v]


def summary_sentence(sweep: dict[str, Any]) -> str:
    """How far the focus effect moves across the models, and what the best by AIC says."""
    models = sweep["models"]
    focus = sweep["focus"]
    found = _finite([m["percent"] for m in models])
    best = models[0]["percent"]
    head = f"Across {len(models)} combinations of forms on the same {sweep['n_obs']:,} rows"
    if not found:
        return f"{head}, the change {focus['change']} in {focus['column']} leaves the range of every form; there is no effect to compare."
    best_words = f"{sig(best)}\u00a0%" if best is not None else "no effect (the change leaves its forms' range)"
    return (
        f"{head}, the effect of {focus['change']} in {focus['column']} on the expected outcome runs from "
        f"{sig(min(found))}\u00a0% to {sig(max(found))}\u00a0%; the best model by AIC on the original scale gives {best_words}."
    )


def held_sentence(sweep: dict[str, Any]) -> str | None:
    """The variables that keep the spec's form in every model, and why; None when none does."""
    held = sweep.get("held") or []
    if not held:
        return None
    one = len(held) == 1
    why = f"To stay within {MAX_MODELS:,} models, " if sweep.get("held_for_cap") else ""
    return f"{why}{join_words(held)} keep{'s' if one else ''} {'its' if one else 'their'} form in the model in every combination."


def ranked_table(sweep: dict[str, Any], columns: list[str], limit: int | None = None) -> pd.DataFrame:
    """The models ranked by original-scale AIC (the first ``limit`` of them)."""
    models = sweep["models"][:limit]
    return pd.DataFrame(
        [
            {
                "Rank": i + 1,
                "Forms": forms_text(m["transforms"], columns),
                "Effect, %": sig(m["percent"]),
                "95 % interval, %": f"{sig(m['percent_ci_low'])} to {sig(m['percent_ci_high'])}",
                "ΔAIC": sig(m["delta_aic"]),
                "AIC": sig(m["aic_original_scale"]),
                "R² (original scale)": sig(m["r2_original_scale"]),
            }
            for i, m in enumerate(models)
        ],
        columns=["Rank", "Forms", "Effect, %", "95 % interval, %", "ΔAIC", "AIC", "R² (original scale)"],
    )


def moves_table(sweep: dict[str, Any], columns: list[str]) -> pd.DataFrame:
    """For each variable that changes form, the focus effect under each of its forms."""
    rows = [
        {
            "Variable": entry["column"],
            "Form": entry["transform"],
            "Models": entry["n_models"],
            "Median effect, %": sig(entry["median_percent"]),
            "Range, %": f"{sig(entry['min_percent'])} to {sig(entry['max_percent'])}",
        }
        for entry in sweep["by_choice"]
        if entry["column"] in columns
    ]
    return pd.DataFrame(rows, columns=["Variable", "Form", "Models", "Median effect, %", "Range, %"])
