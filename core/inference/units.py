"""The units check: does a regressor's effect depend on the units it is recorded in?

A log regressor's slope does not depend on the units (rescaling only shifts the intercept);
IHS and shifted-log slopes do (Aihounton & Henningsen 2021, Econometrics Journal 24(2); Chen &
Roth 2024, QJE 139(2)). Each transform says which it is (``Transform.unit_invariant``).
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import numpy as np
import pandas as pd

from core.errors import FormwiseError
from core.inference.effects import compute_effects
from core.model.design import Design, rescaled_design
from core.model.fitted import Model, fit_design, fit_model
from core.model.ols import OLSFit
from core.model.spec import Change, ModelSpec

# Rescalings of a regressor for the units check (Aihounton & Henningsen 2021).
UNIT_FACTORS = (0.001, 0.01, 0.1, 10.0, 100.0, 1000.0)
# Relative movement of an effect across rescalings above which the user is warned.
UNITS_TOLERANCE = 0.10


def needs_units_check(model_spec: ModelSpec) -> list[str]:
    """The regressors whose transform's effects depend on the units of measurement."""
    return [r.column for r in model_spec.regressors if not r.transform.unit_invariant]


def _rescaled_change(change: Change | None, factor: float) -> Change | None:
    if change is None or change.kind == "percent":
        return change
    if change.kind == "units":
        return Change(text=f"{change.amount * factor:+g}", kind="units", amount=change.amount * factor)
    start, end = float(change.start) * factor, float(change.end) * factor
    return Change(text=f"{start:g}->{end:g}", kind="switch", start=start, end=end)


def units_check(
    data: pd.DataFrame, model_spec: ModelSpec, column: str, fitted: tuple[Design, OLSFit, Model] | None = None
) -> dict[str, Any]:
    """Refit with ``column`` measured in other units and report how its effect moves.

    A log regressor's slope does not depend on the units (rescaling only shifts the intercept);
    IHS and shifted-log slopes do (Aihounton & Henningsen 2021, Econometrics Journal 24(2);
    Chen & Roth 2024, QJE 139(2)). The change is rescaled with the variable, so the same real
    change is asked each time; the reference point scales with it.

    ``fitted`` is the model already fitted on ``data`` (``fit_model``), if at hand. Each
    rescaled refit reuses its design and redoes only the rescaled regressor's columns
    (``core.model.design.rescaled_design``) unless rescaling changes which rows are used.
    """
    design, _, base_model = fitted if fitted is not None else fit_model(data, model_spec)
    base_effects, _ = compute_effects(base_model, only=column, with_average=False)
    base = next(e for e in base_effects if e["column"] == column)
    rows: list[dict[str, Any]] = [{"factor": 1.0, "exact": base["exact"], "elasticity": base.get("elasticity")}]
    work = design.X.copy(order="K")  # overwritten with each rescaling's columns
    for factor in UNIT_FACTORS:
        regressors = tuple(
            replace(r, change=_rescaled_change(r.change, factor)) if r.column == column else r for r in model_spec.regressors
        )
        at = dict(model_spec.at)
        if column in at:
            at[column] = float(at[column]) * factor
        rescaled_spec = replace(model_spec, regressors=regressors, at=at)
        try:
            rescaled = rescaled_design(data, design, rescaled_spec, column, factor, work)
            if rescaled is not None:
                _, _, model = fit_design(rescaled, rescaled_spec)
            else:
                scaled = data[model_spec.columns].copy()
                scaled[column] = pd.to_numeric(scaled[column], errors="coerce") * factor
                _, _, model = fit_model(scaled, rescaled_spec)
            with np.errstate(all="ignore"):
                effects, _ = compute_effects(model, only=column, with_average=False)
            found = next(e for e in effects if e["column"] == column)
            rows.append({"factor": factor, "exact": found["exact"], "elasticity": found.get("elasticity")})
        except FormwiseError:
            rows.append({"factor": factor, "exact": None, "elasticity": None})
    reference = base["exact"]
    moves = [abs(r["exact"] - reference) / abs(reference) for r in rows if r["exact"] is not None and reference not in (None, 0)]
    largest = max(moves) if moves else None
    return {
        "column": column,
        "change": base["change"],
        "group": base.get("group"),  # a crossed regressor: its effect at the moderator's first value
        "units": base["units"],
        "rows": sorted(rows, key=lambda r: r["factor"]),
        "max_relative_move": largest,
        "moves": bool(largest is not None and largest > UNITS_TOLERANCE),
    }
