"""Saved models side by side: the measures each contributes and which is best by AIC."""

from __future__ import annotations

from typing import Any

from core.model.transforms import variable_label

# --- compare models --------------------------------------------------------------------------------
COMPARE_PARTS = ("diagnostics", "effects", "fit", "terms")


def best_by_aic(rows: list[dict[str, Any]]) -> set[str]:
    """Names of the models with the lowest original-scale AIC among models fitted to the same
    rows (AIC compares models only on the same observations); groups of one are not ranked."""
    groups: dict[tuple[Any, Any], list[dict[str, Any]]] = {}
    for row in rows:
        if row.get("aic") is not None:
            groups.setdefault((row.get("data_id"), row.get("n_obs")), []).append(row)
    return {min(group, key=lambda r: r["aic"])["name"] for group in groups.values() if len(group) >= 2}


def compare_row(name: str, spec: dict[str, Any], result: dict[str, Any], data_id: str) -> dict[str, Any]:
    """The measures one saved model contributes to the comparison."""
    fit = result.get("fit") or {}
    outcome = result["outcome"]
    ppml = (spec.get("estimator") or "ols") == "ppml"
    diagnostics = result.get("diagnostics") or {}
    bp = diagnostics.get("breusch_pagan") or {}
    return {
        "name": name,
        "data_id": data_id,
        "ppml": ppml,
        "outcome": outcome["column"],
        "outcome_label": variable_label(outcome["column"], outcome["transform"], "outcome")
        + (" (Poisson pseudo-ML)" if ppml else ""),
        "transform": outcome["transform"],
        "n_obs": result.get("n_obs"),
        "r2_original": fit.get("r2_original_scale"),
        "loglik": fit.get("loglik_original_scale"),
        "aic": fit.get("aic_original_scale"),
        "bic": fit.get("bic_original_scale"),
        "bp_p": bp.get("p_value"),
        "r2_raw": fit.get("r2"),
        "effects": result.get("effects") or [],
    }


def unique_name(name: str, taken: list[str]) -> str:
    """``name`` or, when taken, 'name (2)', 'name (3)', ..."""
    if name not in taken:
        return name
    i = 2
    while f"{name} ({i})" in taken:
        i += 1
    return f"{name} ({i})"
