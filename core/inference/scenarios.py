"""Scenarios: several regressor changes at once, priced by the fitted model (docs/contract.md §3.14).

A scenario starts from the reference point (docs/contract.md §2.8) with each switched regressor at
its start value ("before") and applies every change together ("after"). The design rows X0 and
X1 come from the model's encoder, so the combined index change Δη = (X1 - X0)·b is one formula
for any mix of transforms, and ``core.inference.effects.outcome_change`` maps it to the outcome
exactly as it maps a single change: the difference for a level outcome, 100·(exp Δη - 1) for a
log outcome, 100·(S(η1)/S(η0) - 1) with the smearing estimate otherwise. Under a log or IHS
outcome this is not the sum of the single effects; ``sum_of_approximate`` (the single changes'
first-order effects, each from the scenario's "before" point) is given beside it for contrast.
Its interval is ``core.inference.effects.exact_interval``: the t interval of Δη carried through
for level and log outcomes, the delta method otherwise. ``before`` and ``after`` are the
predicted outcome on the original scale (the smearing estimate where the outcome is
transformed; exp(η)·mean(exp ê) for a log outcome, Duan 1983).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from core.errors import SpecError
from core.inference.effects import effect_arrays, exact_interval, outcome_change, raise_level
from core.inference.retransform import smear_rows
from core.model.design import Block, match_level
from core.model.fitted import Model
from core.model.spec import Change, Scenario


def _ends(block: Block, change: Change, reference: Any) -> tuple[Any, Any]:
    """Start and end of one change: a switch names both, other changes start at the reference."""
    column = block.spec.column
    if block.is_category:
        known = [block.reference_level, *block.levels]
        ends = [match_level(v, known) for v in (change.start, change.end)]
        for given, level in zip((change.start, change.end), ends, strict=True):
            if level is None:
                raise_level(column, str(given), set(known))
        return ends[0], ends[1]
    if change.kind == "switch":
        if not all(isinstance(v, float) for v in (change.start, change.end)):
            raise SpecError(f"spec.scenarios ({column}): '{change.text}' must go between two numbers for a numeric column.")
        return change.start, change.end
    return reference, change.apply(reference)


def scenario_points(model: Model, scenario: Scenario) -> tuple[dict[str, Any], dict[str, Any], list[dict[str, Any]]]:
    """The points before and after the scenario, and each change's ``{column, change, from, to}``."""
    design = model.design
    before = dict(design.reference)
    changes = []
    for column, change in scenario.changes:
        start, end = _ends(design.encoder.block(column), change, design.reference[column])
        before[column] = start
        changes.append({"column": column, "change": change.text, "from": start, "to": end})
    after = dict(before, **{c["column"]: c["to"] for c in changes})
    return before, after, changes


def _leaves_domain(model: Model, changes: list[dict[str, Any]]) -> str | None:
    for entry in changes:
        block = model.design.encoder.block(entry["column"])
        if block.is_category:
            continue
        bad, reason = block.spec.transform.invalid(np.array([entry["from"], entry["to"]], dtype=float))
        if bad.any():
            return f"the change {entry['change']} of '{entry['column']}' leaves the range its transform takes: {reason}"
    return None


def _outside(model: Model, changes: list[dict[str, Any]]) -> bool:
    for entry in changes:
        if model.design.encoder.block(entry["column"]).is_category:
            continue
        low, high = model.design.observed_range(entry["column"])
        if min(entry["from"], entry["to"]) < low or max(entry["from"], entry["to"]) > high:
            return True
    return False


def one_scenario(model: Model, scenario: Scenario, warnings: list[str]) -> dict[str, Any]:
    """The result entry of one scenario (docs/contract.md §3.14)."""
    before, after, changes = scenario_points(model, scenario)
    entry: dict[str, Any] = {"name": scenario.name, "units": model.units, "changes": changes}
    problem = _leaves_domain(model, changes)
    if problem:
        warnings.append(f"scenario '{scenario.name}': {problem}.")
        empty = ("exact", "ci_low", "ci_high", "sum_of_approximate", "before", "after")
        return entry | dict.fromkeys(empty) | {"extrapolated": True}
    singles = []
    for change in changes:
        block = model.design.encoder.block(change["column"])
        kind = object if block.is_category else float
        start, end = np.array([change["from"]], dtype=kind), np.array([change["to"]], dtype=kind)
        singles.append(float(effect_arrays(model, block, start, end, before, 1).approximate[0]))
    X0, X1 = model.encode(before, 1), model.encode(after, 1)
    arrays = outcome_change(model, X0, X1, X1 @ model.coef - X0 @ model.coef)
    exact = float(arrays.exact[0])
    low, high, _ = exact_interval(model, arrays, exact)
    levels = smear_rows(model, np.array([float((X0 @ model.coef)[0]), float((X1 @ model.coef)[0])]))
    extrapolated = _outside(model, changes)
    if extrapolated:
        warnings.append(
            f"scenario '{scenario.name}' reaches outside the observed range of a variable it changes; it is an extrapolation."
        )
    numbers = {
        "exact": exact,
        "ci_low": float(min(low, high)),
        "ci_high": float(max(low, high)),
        "sum_of_approximate": float(np.sum(singles)),
        "before": float(levels[0]),
        "after": float(levels[1]),
    }
    if not all(math.isfinite(v) for v in numbers.values()):
        warnings.append(
            f"scenario '{scenario.name}': some of its numbers cannot be computed: on the original scale they are too "
            "large for floating-point numbers or outside what the outcome's transform maps back to, so they are shown "
            "empty. Check the sizes of its changes."
        )
    return entry | numbers | {"extrapolated": extrapolated}


def compute_scenarios(model: Model, scenarios: tuple[Scenario, ...]) -> tuple[list[dict[str, Any]], list[str]]:
    """One entry per scenario of the spec, in its order, and the warnings they raise."""
    warnings: list[str] = []
    return [one_scenario(model, scenario, warnings) for scenario in scenarios], warnings
