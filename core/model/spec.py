"""The model specification: validated up front, parsed as plain data only.

A spec is a JSON-able dict (docs/contract.md §2). ``parse_spec`` checks every key against the data's
columns and returns a ``ModelSpec``; every problem raises ``SpecError`` naming the part.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from core.errors import SpecError
from core.model.covariance import COVARIANCE_KINDS
from core.model.transforms import Category, Transform, parse_transform

TOP_KEYS = {"outcome", "regressors", "estimator", "covariance", "cluster", "weights", "at", "name", "predict"}
OUTCOME_KEYS = {"column", "transform"}
REGRESSOR_KEYS = {"column", "transform", "change", "reference"}
ESTIMATORS = ("ols", "ppml")

_PERCENT = re.compile(r"^([+-])\s*(\d+(?:\.\d*)?|\.\d+)\s*%$")
_UNITS = re.compile(r"^([+-])\s*(\d+(?:\.\d*)?(?:e[+-]?\d+)?|\.\d+)$", re.IGNORECASE)
_ARROW = re.compile(r"^(.+?)\s*->\s*(.+)$")


@dataclass(frozen=True)
class Change:
    """A change of one regressor in original units.

    kind 'percent': x -> x * (1 + amount/100); 'units': x -> x + amount;
    'switch': from ``start`` to ``end`` (numbers, or category levels as strings).
    """

    text: str
    kind: str
    amount: float = 0.0
    start: Any = None
    end: Any = None

    def apply(self, x: Any) -> Any:
        if self.kind == "percent":
            return x * (1.0 + self.amount / 100.0)
        if self.kind == "units":
            return x + self.amount
        return self.end

    def scaled(self, factor: float) -> Change:
        """The same kind of change, ``factor`` times as large (for gap charts)."""
        amount = self.amount * factor
        sign = "+" if amount >= 0 else "-"
        suffix = "%" if self.kind == "percent" else ""
        return Change(text=f"{sign}{abs(amount):g}{suffix}", kind=self.kind, amount=amount)


@dataclass(frozen=True)
class RegressorSpec:
    column: str
    transform: Transform
    change: Change | None
    reference: str | None


@dataclass(frozen=True)
class ModelSpec:
    outcome_column: str
    outcome_transform: Transform
    regressors: tuple[RegressorSpec, ...]
    estimator: str = "ols"
    covariance: str = "HC1"
    cluster: str | None = None
    weights: str | None = None
    at: dict[str, Any] = field(default_factory=dict)
    name: str | None = None
    predict: tuple[dict[str, Any], ...] = ()

    @property
    def columns(self) -> list[str]:
        """Every data column the model reads, outcome first, without repeats."""
        cols = [self.outcome_column] + [r.column for r in self.regressors]
        cols += [c for c in (self.weights, self.cluster) if c]
        return list(dict.fromkeys(cols))


def parse_change(text: object, where: str) -> Change:
    """Parse '+10%', '-25%', '+1', '-0.5' or 'A->B' (numbers or category levels)."""
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise SpecError(f"{where}: change must be text such as '+10%', '+1' or '0->1'.")
    raw = str(text).strip()
    if isinstance(text, (int, float)) and not raw.startswith(("+", "-")):
        raw = "+" + raw
    match = _PERCENT.match(raw)
    if match:
        amount = float(match.group(2)) * (1 if match.group(1) == "+" else -1)
        if amount <= -100:
            raise SpecError(f"{where}: a change of {raw} would make the variable zero or negative; use a change above -100%.")
        if amount == 0:
            raise SpecError(f"{where}: a change of {raw} changes nothing; give a non-zero change.")
        return Change(text=raw, kind="percent", amount=amount)
    match = _UNITS.match(raw)
    if match:
        amount = float(match.group(2)) * (1 if match.group(1) == "+" else -1)
        if amount == 0 or not math.isfinite(amount):
            raise SpecError(f"{where}: a change of {raw} changes nothing; give a non-zero change.")
        return Change(text=raw, kind="units", amount=amount)
    match = _ARROW.match(raw)
    if match:
        start, end = (_number_or_text(v.strip()) for v in match.groups())
        if start == end:
            raise SpecError(f"{where}: '{raw}' goes from a value to itself; name two different values.")
        return Change(text=raw, kind="switch", start=start, end=end)
    raise SpecError(
        f"{where}: cannot read the change '{raw}'. Write a percent change ('+10%'), "
        "a change in units ('+1', '-0.5') or a move between two values ('0->1', 'Coast->Inland')."
    )


def _number_or_text(value: str) -> Any:
    try:
        number = float(value)
    except ValueError:
        return value
    return number if math.isfinite(number) else value


def _require_column(name: object, data: pd.DataFrame, where: str) -> str:
    if not isinstance(name, str) or not name:
        raise SpecError(f"{where}: column must be a column name (text).")
    if name not in data.columns:
        close = [c for c in map(str, data.columns) if c.lower() == name.lower()]
        hint = f" Did you mean '{close[0]}'?" if close else " Check the spelling against the data's header row."
        raise SpecError(f"{where}: there is no column '{name}' in the data.{hint}")
    return name


def _check_keys(entry: dict, allowed: set[str], where: str) -> None:
    unknown = sorted(set(entry) - allowed)
    if unknown:
        raise SpecError(f"{where}: unknown key '{unknown[0]}'; allowed keys are {', '.join(sorted(allowed))}.")


def _parse_regressors(spec: dict, data: pd.DataFrame, outcome_column: str) -> list[RegressorSpec]:
    entries = spec.get("regressors", [])
    if not isinstance(entries, list):
        raise SpecError("spec.regressors: must be a list of objects, one per regressor.")
    regressors: list[RegressorSpec] = []
    seen: set[str] = set()
    for i, entry in enumerate(entries):
        where = f"spec.regressors[{i}]"
        if not isinstance(entry, dict):
            raise SpecError(f'{where}: must be an object like {{"column": "price", "transform": "log"}}.')
        _check_keys(entry, REGRESSOR_KEYS, where)
        column = _require_column(entry.get("column"), data, where)
        where = f"{where} ({column})"
        if column == outcome_column:
            raise SpecError(f"{where}: the outcome cannot also be a regressor; remove it from the regressors.")
        if column in seen:
            raise SpecError(f"{where}: the column appears twice among the regressors; keep one entry.")
        seen.add(column)
        transform = parse_transform(entry.get("transform", "level"), "regressor", where)
        change = entry.get("change")
        parsed_change = None if change in (None, "") else parse_change(change, where)
        reference = entry.get("reference")
        if reference is not None and not isinstance(transform, Category):
            raise SpecError(f"{where}: 'reference' applies to category regressors only; remove it or use transform 'category'.")
        if isinstance(transform, Category) and parsed_change is not None and parsed_change.kind != "switch":
            raise SpecError(f"{where}: a category changes from one level to another, e.g. 'Coast->Inland'.")
        regressors.append(RegressorSpec(column, transform, parsed_change, None if reference is None else str(reference)))

    return regressors


def _parse_estimation(spec: dict, data: pd.DataFrame, outcome_transform: Transform) -> tuple[str, str, str | None]:
    """The estimator, the covariance kind and the cluster column it needs."""
    estimator = spec.get("estimator") or "ols"
    if estimator not in ESTIMATORS:
        raise SpecError(f"spec.estimator: unknown estimator '{estimator}'; use one of: {', '.join(ESTIMATORS)}.")
    if estimator == "ppml" and outcome_transform.code != "level":
        raise SpecError(
            "spec.outcome: with estimator 'ppml' give the outcome in levels (transform 'level'); "
            "PPML models the log of its mean itself, zeros included."
        )

    covariance = spec.get("covariance") or "HC1"
    by_lower = {c.lower(): c for c in COVARIANCE_KINDS}
    if not isinstance(covariance, str) or covariance.lower() not in by_lower:
        raise SpecError(f"spec.covariance: unknown covariance '{covariance}'; use one of: {', '.join(COVARIANCE_KINDS)}.")
    covariance = by_lower[covariance.lower()]

    cluster = spec.get("cluster")
    if COVARIANCE_KINDS[covariance].needs_groups:
        if not cluster:
            raise SpecError("spec.cluster: covariance 'cluster' needs 'cluster' naming the column that defines the groups.")
        cluster = _require_column(cluster, data, "spec.cluster")
    elif cluster:
        raise SpecError(
            "spec.cluster: a cluster column is set but covariance is not 'cluster'; set covariance to 'cluster' or remove it."
        )
    else:
        cluster = None

    return estimator, covariance, cluster


def _parse_points(spec: dict, regressors: list[RegressorSpec]) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """The reference values ``at`` and the prediction points, each naming regressors of the model."""
    at = spec.get("at") or {}
    if not isinstance(at, dict):
        raise SpecError('spec.at: must be an object of reference values, e.g. {"drink_price": 4.5}.')
    used = {r.column for r in regressors}
    for key, value in at.items():
        if key not in used:
            raise SpecError(f"spec.at: '{key}' is not a regressor of this model; remove it or add the regressor.")
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            raise SpecError(f"spec.at.{key}: must be a number (or a level name for a category).")
        if isinstance(value, float) and not math.isfinite(value):
            raise SpecError(f"spec.at.{key}: must be a finite number.")

    predict = spec.get("predict") or []
    if not isinstance(predict, list) or not all(isinstance(p, dict) for p in predict):
        raise SpecError('spec.predict: must be a list of objects of regressor values, e.g. [{"drink_price": 5}].')
    for i, point in enumerate(predict):
        for key, value in point.items():
            if key not in used:
                raise SpecError(f"spec.predict[{i}]: '{key}' is not a regressor of this model.")
            if isinstance(value, bool) or not isinstance(value, (int, float, str)):
                raise SpecError(f"spec.predict[{i}].{key}: must be a number (or a level name for a category).")

    return at, predict


def parse_spec(spec: object, data: pd.DataFrame) -> ModelSpec:
    """Validate a spec dict against the data and return the parsed model spec."""
    if not isinstance(spec, dict):
        raise SpecError("spec: must be a JSON object with at least 'outcome' and 'regressors'.")
    _check_keys(spec, TOP_KEYS, "spec")

    outcome = spec.get("outcome")
    if not isinstance(outcome, dict):
        raise SpecError('spec.outcome: must be an object like {"column": "revenue", "transform": "log"}.')
    _check_keys(outcome, OUTCOME_KEYS, "spec.outcome")
    outcome_column = _require_column(outcome.get("column"), data, "spec.outcome")
    outcome_transform = parse_transform(outcome.get("transform", "level"), "outcome", "spec.outcome")

    regressors = _parse_regressors(spec, data, outcome_column)
    estimator, covariance, cluster = _parse_estimation(spec, data, outcome_transform)
    weights = spec.get("weights")
    if weights:
        weights = _require_column(weights, data, "spec.weights")
    else:
        weights = None

    at, predict = _parse_points(spec, regressors)
    name = spec.get("name")
    if name is not None and not isinstance(name, str):
        raise SpecError("spec.name: must be text.")

    return ModelSpec(
        outcome_column=outcome_column,
        outcome_transform=outcome_transform,
        regressors=tuple(regressors),
        estimator=estimator,
        covariance=covariance,
        cluster=cluster,
        weights=weights,
        at=dict(at),
        name=name,
        predict=tuple(dict(p) for p in predict),
    )
