"""The model specification: validated up front, parsed as plain data only.

A spec is a JSON-able dict (docs/contract.md §2). ``parse_spec`` checks every key against the data's
columns and returns a ``ModelSpec``; every problem raises ``SpecError`` naming the part.
"""

from __future__ import annotations

import math
import re
import unicodedata
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from core.errors import SpecError
from core.model.covariance import COVARIANCE_KINDS
from core.model.transforms import Category, ShiftedLog, Transform, parse_transform

TOP_KEYS = {
    "outcome",
    "regressors",
    "estimator",
    "covariance",
    "cluster",
    "weights",
    "at",
    "name",
    "predict",
    "time",
    "lags",
    "scenarios",
    "bootstrap",
    "sweep",  # validated by core.inference.sweep (docs/contract.md §2.13)
    "absorb",
}
# The most fixed-effect factors absorbed at once (each more adds sweeps of alternating projections).
MAX_ABSORBED = 4
OUTCOME_KEYS = {"column", "transform", "unit"}
REGRESSOR_KEYS = {"column", "transform", "change", "reference", "unit", "by", "at"}
# The most values of a moderator the effects of one regressor are given at (docs/contract.md §2.4).
MAX_GROUPS = 24
UNIT_MAX_CHARS = 40
ESTIMATORS = ("ols", "ppml")
SCENARIO_KEYS = {"name", "changes"}
BOOTSTRAP_KEYS = {"draws", "seed", "cluster"}
# A log shift above this many times a column's largest size makes log(x + c) a straight line
# to within rounding (x/c near 1e-10 against rounding of 1e-16 of log c): refused.
MAX_SHIFT_RATIO = 1e10
# Bounds on the bootstrap draws (BCa needs about a thousand; each draw is one small solve).
MIN_DRAWS, MAX_DRAWS = 50, 100_000

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
    """One regressor entry. ``by`` names a moderator (another regressor): the design then holds
    the products of the two blocks' columns, and effects are given per value of the moderator:
    each level of a category, else ``by_at`` (default: its quartiles)."""

    column: str
    transform: Transform
    change: Change | None
    reference: str | None
    by: str | None = None
    by_at: tuple[Any, ...] = ()


@dataclass(frozen=True)
class Scenario:
    """Several regressor changes at once, named (docs/contract.md §2.11)."""

    name: str
    changes: tuple[tuple[str, Change], ...]


@dataclass(frozen=True)
class Bootstrap:
    """A pairs bootstrap (whole groups when ``cluster`` names a column), docs/contract.md §2.12."""

    draws: int = 999
    seed: int = 0
    cluster: str | None = None


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
    time: str | None = None
    lags: int | None = None
    scenarios: tuple[Scenario, ...] = ()
    bootstrap: Bootstrap | None = None
    units: dict[str, str] = field(default_factory=dict)  # column -> its unit, as the user named it
    absorb: tuple[str, ...] = ()  # identifiers whose fixed effects are swept out (core.model.absorb)
    cluster_second: str | None = None  # the second grouping of two-way clustered errors

    @property
    def columns(self) -> list[str]:
        """Every data column the model reads, outcome first, without repeats."""
        cols = [self.outcome_column] + [r.column for r in self.regressors]
        cols += [c for c in (self.weights, self.cluster, self.cluster_second, self.time, *self.absorb) if c]
        if self.bootstrap is not None and self.bootstrap.cluster:
            cols.append(self.bootstrap.cluster)
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
        if not math.isfinite(amount):
            raise SpecError(
                f"{where}: a change of {raw[:40]} is beyond the range of floating-point numbers; give a smaller change."
            )
        if amount <= -100:
            raise SpecError(f"{where}: a change of {raw} would make the variable zero or negative; use a change above -100%.")
        if amount == 0:
            raise SpecError(f"{where}: a change of {raw} changes nothing; give a non-zero change.")
        return Change(text=raw, kind="percent", amount=amount)
    match = _UNITS.match(raw)
    if match:
        amount = float(match.group(2)) * (1 if match.group(1) == "+" else -1)
        if not math.isfinite(amount):
            raise SpecError(
                f"{where}: a change of {raw[:40]} is beyond the range of floating-point numbers (about ±1.8e308); "
                "give a change on the scale of the data."
            )
        if amount == 0:
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
        by, by_at = _parse_moderator(entry, data, column, outcome_column, where)
        regressors.append(
            RegressorSpec(column, transform, parsed_change, None if reference is None else str(reference), by, by_at)
        )
    _check_moderators(regressors)
    return regressors


def _parse_moderator(
    entry: dict, data: pd.DataFrame, column: str, outcome_column: str, where: str
) -> tuple[str | None, tuple[Any, ...]]:
    """The moderator a regressor entry names (``by``) and the values its effects are given at
    (``at``); checked against the other regressors by ``_check_moderators``."""
    by, at = entry.get("by"), entry.get("at")
    if by in (None, ""):
        if at not in (None, []):
            raise SpecError(f"{where}: 'at' lists the values of a moderator; name the moderator with 'by' or remove 'at'.")
        return None, ()
    by = _require_column(by, data, f"{where}.by")
    if by == column:
        raise SpecError(f"{where}.by: a regressor cannot moderate itself; name another regressor, or use 'quadratic'.")
    if by == outcome_column:
        raise SpecError(f"{where}.by: the outcome cannot moderate a regressor; name another regressor.")
    if at in (None, []):
        return by, ()
    if not isinstance(at, list) or len(at) > MAX_GROUPS:
        raise SpecError(f"{where}.at: must be a list of at most {MAX_GROUPS} values of '{by}', e.g. [10, 20, 40].")
    for value in at:
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            raise SpecError(f"{where}.at: each value must be a number of '{by}' (or a level name for a category).")
        if isinstance(value, float) and not math.isfinite(value):
            raise SpecError(f"{where}.at: each value must be a finite number.")
    return by, tuple(dict.fromkeys(at))


def _check_moderators(regressors: list[RegressorSpec]) -> None:
    """Each moderator is a regressor of the model (its main effect), and each pair is crossed once."""
    by_column = {r.column: r for r in regressors}
    for reg in regressors:
        if reg.by is None:
            continue
        where = f"spec.regressors ({reg.column}).by"
        moderator = by_column.get(reg.by)
        if moderator is None:
            raise SpecError(
                f"{where}: '{reg.by}' must also be a regressor of the model (its own effect, the main effect); "
                "add it to the regressors."
            )
        if moderator.by == reg.column:
            raise SpecError(
                f"{where}: '{reg.column}' and '{reg.by}' name each other as moderator; the product enters once, "
                f"so keep 'by' on one of the two."
            )
        if reg.by_at and not isinstance(moderator.transform, Category):
            for value in reg.by_at:
                _point_value(value, moderator, f"spec.regressors ({reg.column}).at")


def _parse_estimation(
    spec: dict, data: pd.DataFrame, outcome_transform: Transform
) -> tuple[str, str, list[str], str | None, int | None]:
    """The estimator, the covariance kind, the cluster columns it needs (none, one or two), and
    for the time-series kinds the time column and the lags (None: chosen from the data)."""
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

    clusters = _parse_clusters(spec, data, covariance)
    time, lags = _parse_time(spec, data, covariance)
    return estimator, covariance, clusters, time, lags


def _parse_clusters(spec: dict, data: pd.DataFrame, covariance: str) -> list[str]:
    """The grouping columns of clustered errors: one, or two for two-way clustering; none for
    the other kinds."""
    cluster = spec.get("cluster")
    if not COVARIANCE_KINDS[covariance].needs_groups:
        if cluster:
            raise SpecError(
                "spec.cluster: a cluster column is set but covariance is not 'cluster'; set covariance to 'cluster' or remove it."
            )
        return []
    if not cluster:
        raise SpecError("spec.cluster: covariance 'cluster' needs 'cluster' naming the column that defines the groups.")
    if not isinstance(cluster, list):
        return [_require_column(cluster, data, "spec.cluster")]
    if not 1 <= len(cluster) <= 2 or len(set(map(str, cluster))) < len(cluster):
        raise SpecError(
            "spec.cluster: name one grouping column, or a list of two different ones for two-way clustering "
            '(e.g. ["kiosk_id", "week"]).'
        )
    return [_require_column(c, data, "spec.cluster") for c in cluster]


def _parse_time(spec: dict, data: pd.DataFrame, covariance: str) -> tuple[str | None, int | None]:
    """The time column ordering the rows and the lags, for the kinds that need them."""
    time, lags = spec.get("time"), spec.get("lags")
    if not COVARIANCE_KINDS[covariance].needs_time:
        if time or lags is not None:
            key = "time" if time else "lags"
            raise SpecError(
                f"spec.{key}: '{key}' applies to the time-series covariances only "
                f"({', '.join(k for k, v in COVARIANCE_KINDS.items() if v.needs_time)}); set one of those or remove it."
            )
        return None, None
    if not time:
        raise SpecError(f"spec.time: covariance '{covariance}' needs 'time' naming the column that orders the rows in time.")
    time = _require_column(time, data, "spec.time")
    if lags is not None:
        integral = isinstance(lags, int) or (isinstance(lags, float) and math.isfinite(lags) and lags == int(lags))
        if isinstance(lags, bool) or not integral or lags < 0 or lags > 10_000:
            raise SpecError("spec.lags: must be a whole number of periods from 0 to 10000, or null to choose it from the data.")
        lags = int(lags)
    return time, lags


def _parse_points(
    spec: dict, regressors: list[RegressorSpec], absorb: tuple[str, ...] = ()
) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """The reference values ``at`` (regressors, and a level of an absorbed identifier) and the
    prediction points, each naming regressors of the model."""
    at = spec.get("at") or {}
    if not isinstance(at, dict):
        raise SpecError('spec.at: must be an object of reference values, e.g. {"drink_price": 4.5}.')
    at = dict(at)  # the caller's spec is never changed
    by_column = {r.column: r for r in regressors}
    for key, value in at.items():
        if key in absorb:
            if isinstance(value, bool) or not isinstance(value, (str, int, float)):
                raise SpecError(f"spec.at.{key}: name one level of the absorbed identifier '{key}'.")
            continue
        if key not in by_column:
            raise SpecError(f"spec.at: '{key}' is not a regressor of this model; remove it or add the regressor.")
        at[key] = _point_value(value, by_column[key], f"spec.at.{key}")

    predict = spec.get("predict") or []
    if not isinstance(predict, list) or not all(isinstance(p, dict) for p in predict):
        raise SpecError('spec.predict: must be a list of objects of regressor values, e.g. [{"drink_price": 5}].')
    points = []
    for i, point in enumerate(predict):
        for key in point:
            if key not in by_column:
                raise SpecError(f"spec.predict[{i}]: '{key}' is not a regressor of this model.")
        points.append({key: _point_value(value, by_column[key], f"spec.predict[{i}].{key}") for key, value in point.items()})
    return at, points


def _point_value(value: object, regressor: RegressorSpec, where: str) -> Any:
    """A value of ``at`` or ``predict``: a level name (text or number) for a category, else a
    finite number in the range of floating point that the regressor's transform takes."""
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise SpecError(f"{where}: must be a number (or a level name for a category).")
    if isinstance(regressor.transform, Category):
        return value
    column = regressor.column
    try:
        number = float(value)
    except OverflowError:
        number = math.inf
    except ValueError:
        raise SpecError(
            f"{where}: '{str(value)[:40]}' is not a number; '{column}' is a numeric regressor, so give a number in its units."
        ) from None
    if not math.isfinite(number):
        raise SpecError(
            f"{where}: must be a finite number within about ±1.8e308 (the range of floating-point numbers); "
            f"give a value in the units of '{column}'."
        )
    bad, reason = regressor.transform.invalid(np.array([number]))
    if bad[0]:
        raise SpecError(f"{where}: {number:g} cannot be used because {reason}; give a value the transform takes.")
    return number


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
    _check_shifts(outcome_column, outcome_transform, regressors, data)
    estimator, covariance, clusters, time, lags = _parse_estimation(spec, data, outcome_transform)
    weights = _parse_weights(spec, data, regressors)

    absorb = _parse_absorb(spec, data, outcome_column, regressors, weights, estimator)
    at, predict = _parse_points(spec, regressors, absorb)
    name = spec.get("name")
    if name is not None and not isinstance(name, str):
        raise SpecError("spec.name: must be text.")

    return ModelSpec(
        outcome_column=outcome_column,
        outcome_transform=outcome_transform,
        regressors=tuple(regressors),
        estimator=estimator,
        covariance=covariance,
        cluster=clusters[0] if clusters else None,
        cluster_second=clusters[1] if len(clusters) > 1 else None,
        weights=weights,
        at=dict(at),
        name=name,
        predict=tuple(dict(p) for p in predict),
        time=time,
        lags=lags,
        scenarios=_parse_scenarios(spec, regressors),
        bootstrap=_parse_bootstrap(spec, data, estimator),
        units=_parse_units(spec, outcome_column, regressors),
        absorb=absorb,
    )


def _parse_absorb(
    spec: dict, data: pd.DataFrame, outcome_column: str, regressors: list[RegressorSpec], weights: str | None, estimator: str
) -> tuple[str, ...]:
    """The identifiers whose fixed effects are absorbed (docs/contract.md §2.15)."""
    entries = spec.get("absorb")
    if entries in (None, []):
        return ()
    if isinstance(entries, str):
        entries = [entries]
    if not isinstance(entries, list) or len(entries) > MAX_ABSORBED:
        raise SpecError(f'spec.absorb: must be a list of at most {MAX_ABSORBED} identifier columns, e.g. ["kiosk_id", "week"].')
    used = {r.column for r in regressors}
    out: list[str] = []
    for i, entry in enumerate(entries):
        where = f"spec.absorb[{i}]"
        column = _require_column(entry, data, where)
        if column in out:
            raise SpecError(f"{where}: '{column}' is listed twice; absorb each identifier once.")
        if column == outcome_column or column == weights:
            role = "the outcome" if column == outcome_column else "the weights"
            raise SpecError(f"{where}: '{column}' is {role}; absorb an identifier such as a store, firm or week column.")
        if column in used:
            raise SpecError(
                f"{where}: '{column}' is also a regressor; its fixed effects absorb it entirely. Keep it in one place."
            )
        out.append(column)
    if estimator == "ppml":
        raise SpecError(
            "spec.absorb: absorbed fixed effects work with least squares only; use estimator 'ols' or enter them as a category."
        )
    if spec.get("bootstrap") is not None:
        raise SpecError("spec.absorb: the bootstrap refits without the absorbed fixed effects; remove 'bootstrap' or 'absorb'.")
    return tuple(out)


def parse_unit(value: object, where: str) -> str | None:
    """A column's unit as the user names it ('square foot', '$ per week'): short plain text,
    runs of spaces read as one; blank or null is no unit."""
    if value is None:
        return None
    if not isinstance(value, str):
        raise SpecError(f"{where}: the unit must be text such as 'square foot' or '$ per week'.")
    if any(unicodedata.category(ch).startswith("C") for ch in value):
        raise SpecError(f"{where}: the unit holds a control character (a tab, line break or similar); write it on one line.")
    text = " ".join(value.split())
    if len(text) > UNIT_MAX_CHARS:
        raise SpecError(
            f"{where}: the unit '{text[:20]}…' is longer than {UNIT_MAX_CHARS} characters; name it in a few words, "
            "such as 'square foot' or '$ per week'."
        )
    return text or None


def _parse_units(spec: dict, outcome_column: str, regressors: list[RegressorSpec]) -> dict[str, str]:
    """Column -> unit for the outcome and the regressors that name one (docs/contract.md §2.3)."""
    entries = [("spec.outcome", outcome_column, spec["outcome"])]
    # The regressors parsed without error, in the spec's order, so entry i is regressor i.
    entries += [(f"spec.regressors[{i}] ({r.column})", r.column, spec["regressors"][i]) for i, r in enumerate(regressors)]
    units = {}
    for where, column, entry in entries:
        unit = parse_unit(entry.get("unit"), where)
        if unit:
            units[column] = unit
    return units


def _parse_weights(spec: dict, data: pd.DataFrame, regressors: list[RegressorSpec]) -> str | None:
    """The weights column: numbers, never a category regressor or a column of text."""
    weights = spec.get("weights")
    if not weights:
        return None
    weights = _require_column(weights, data, "spec.weights")
    if any(r.column == weights and isinstance(r.transform, Category) for r in regressors):
        raise SpecError(
            f"spec.weights: '{weights}' is a category regressor of this model; weights must be a column of positive numbers."
        )
    series = data[weights]
    if not (pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series)):
        text = series.notna() & pd.to_numeric(series, errors="coerce").isna()
        if text.any():
            row = int(np.argmax(text.to_numpy()))
            raise SpecError(
                f"spec.weights: '{weights}' holds text (row {row + 1}: '{str(series.iloc[row])[:20]}'), so it cannot weight "
                "the rows; name a column of positive numbers, or remove 'weights'."
            )
    return weights


def _check_shifts(outcome_column: str, outcome_transform: Transform, regressors: list[RegressorSpec], data: pd.DataFrame) -> None:
    """Refuse a log shift so large next to the column that log(x + c) is a straight line to
    within rounding (``MAX_SHIFT_RATIO`` times the column's largest size)."""
    used = [(outcome_column, outcome_transform, "spec.outcome")]
    used += [(r.column, r.transform, f"spec.regressors ({r.column})") for r in regressors]
    for column, transform, where in used:
        if not isinstance(transform, ShiftedLog):
            continue
        values = pd.to_numeric(data[column], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        finite = np.abs(values[np.isfinite(values)])
        size = float(finite.max()) if len(finite) else 0.0
        if transform.shift > MAX_SHIFT_RATIO * max(size, np.finfo(float).tiny):
            raise SpecError(
                f"{where}: the shift {transform.shift:g} in '{transform.code}' is more than {MAX_SHIFT_RATIO:g} times the "
                f"largest value of '{column}' ({size:g}), so log({column} + shift) cannot tell the values apart; "
                "use a shift on the scale of the data, e.g. 'shifted_log:1' for counts."
            )


def _parse_scenarios(spec: dict, regressors: list[RegressorSpec]) -> tuple[Scenario, ...]:
    """Named sets of changes, each naming regressors of the model (docs/contract.md §2.11)."""
    entries = spec.get("scenarios") or []
    if not isinstance(entries, list):
        raise SpecError('spec.scenarios: must be a list like [{"name": "price up", "changes": {"drink_price": "+10%"}}].')
    by_column = {r.column: r for r in regressors}
    out: list[Scenario] = []
    for i, entry in enumerate(entries):
        where = f"spec.scenarios[{i}]"
        if not isinstance(entry, dict):
            raise SpecError(f'{where}: must be an object like {{"name": "price up", "changes": {{"drink_price": "+10%"}}}}.')
        _check_keys(entry, SCENARIO_KEYS, where)
        name = entry.get("name")
        if not isinstance(name, str) or not name.strip():
            raise SpecError(f"{where}: 'name' must be a non-empty text naming the scenario.")
        if name.strip() in {s.name for s in out}:
            raise SpecError(f"{where}: the name '{name.strip()}' is used by another scenario; give each its own name.")
        changes = entry.get("changes")
        if not isinstance(changes, dict) or not changes:
            raise SpecError(f'{where}.changes: must name at least one regressor and its change, e.g. {{"promo": "0->1"}}.')
        parsed = []
        for column, text in changes.items():
            if column not in by_column:
                raise SpecError(f"{where}.changes: '{column}' is not a regressor of this model; remove it or add the regressor.")
            change = parse_change(text, f"{where}.changes.{column}")
            if isinstance(by_column[column].transform, Category) and change.kind != "switch":
                raise SpecError(f"{where}.changes.{column}: a category changes from one level to another, e.g. 'Coast->Inland'.")
            parsed.append((column, change))
        out.append(Scenario(name.strip(), tuple(parsed)))
    return tuple(out)


def _whole(value: object, low: int, high: int) -> bool:
    return not isinstance(value, bool) and isinstance(value, int) and low <= value <= high


def _parse_bootstrap(spec: dict, data: pd.DataFrame, estimator: str) -> Bootstrap | None:
    """Draws, seed and the resampling groups of the bootstrap (docs/contract.md §2.12)."""
    entry = spec.get("bootstrap")
    if entry is None:
        return None
    if not isinstance(entry, dict):
        raise SpecError('spec.bootstrap: must be an object like {"draws": 999, "seed": 1, "cluster": null}.')
    _check_keys(entry, BOOTSTRAP_KEYS, "spec.bootstrap")
    if estimator == "ppml":
        raise SpecError("spec.bootstrap: the bootstrap refits least squares; it is not available with estimator 'ppml'.")
    draws = entry.get("draws", 999)
    if not _whole(draws, MIN_DRAWS, MAX_DRAWS):
        raise SpecError(f"spec.bootstrap.draws: must be a whole number from {MIN_DRAWS} to {MAX_DRAWS:,} (999 is usual).")
    seed = entry.get("seed", 0)
    if not _whole(seed, 0, 2**63 - 1):
        raise SpecError("spec.bootstrap.seed: must be a whole number of zero or more; the same seed gives the same draws.")
    cluster = entry.get("cluster")
    cluster = _require_column(cluster, data, "spec.bootstrap.cluster") if cluster else None
    return Bootstrap(draws, seed, cluster)
