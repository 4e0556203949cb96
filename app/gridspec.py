"""The variables grid as data: one row per column of the table, and the spec it describes.

No streamlit import here, so every rule the grid follows can be unit-tested. The grid is a
DataFrame with the columns listed in ``GRID_COLUMNS``.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd

from core.inference.choices import numeric_or_none
from core.model.covariance import COVARIANCE_KINDS
from core.model.transforms import lookup, menu_codes, menu_word
from core.output.numbers import compact

GRID_COLUMNS = ["column", "about", "role", "transform", "change", "by", "reference", "unit"]


ROLES = ["outcome", "regressor", "absorb", "not used"]


class GridError(ValueError):
    """The grid does not describe a model yet (e.g. no outcome); worded for the user."""


def describe_column(series: pd.Series) -> str:
    """What a column holds, in a few words, so the user can pick a sensible transform. Numbers
    are read off the smallest and largest value first: the counts of zeros, negatives and of
    values between 0 and 1 only when those can occur (a million-row column in four passes)."""
    missing = int(series.isna().sum())
    tail = f", {missing} missing" if missing else ""
    values = numeric_or_none(series)
    if values is None:
        levels = series.dropna().astype(str).nunique()
        return f"text, {levels} level{'s' if levels != 1 else ''}{tail}"
    every = values.to_numpy(dtype=float, na_value=np.nan)
    low, high = float(np.fmin.reduce(every, initial=np.inf)), float(np.fmax.reduce(every, initial=-np.inf))
    if low > high:  # no value but NaN (the reductions' start values are left)
        return f"empty{tail}"
    if low >= 0 and high <= 1 and not bool(np.any((every > 0) & (every < 1))):
        return f"0/1{tail}"
    parts = [f"{compact(low)} to {compact(high)}"]
    zeros = int(np.count_nonzero(every == 0)) if low <= 0 <= high else 0
    negatives = int(np.count_nonzero(every < 0)) if low < 0 else 0
    if zeros:
        parts.append(f"{zeros:,} zero{'s' if zeros != 1 else ''}")
    if negatives:
        parts.append(f"{negatives:,} negative")
    return ", ".join(parts) + tail


# Kinds the advisor reads as labels of rows, not variables: kept out of the model unless the
# user asks for them (an identifier still serves to cluster standard errors).
LOCKED_KINDS = {"identifier": "identifier", "date": "dates"}


def profile_entries(profile: dict[str, Any] | None) -> dict[str, dict[str, Any]]:
    """The profile's column entries by column name (empty without a profile)."""
    return {str(e["column"]): e for e in (profile or {}).get("columns") or []}


# --- spec <-> grid ------------------------------------------------------------------------------
def spec_to_grid(spec: dict[str, Any], frame: pd.DataFrame, profile: dict[str, Any] | None = None) -> pd.DataFrame:
    """One grid row per data column, in the file's order, filled from ``spec``. With the file's
    ``profile``, unused rows carry the advisor's suggested transform and identifier and date
    columns say what they are."""
    entries = profile_entries(profile)
    outcome = spec.get("outcome") or {}
    by_column = {r["column"]: r for r in spec.get("regressors") or []}
    absorb = spec.get("absorb") or []
    absorbed = [absorb] if isinstance(absorb, str) else [str(c) for c in absorb]  # one name is a list of one
    # The model's own variables first (outcome, then regressors in the spec's order), so the
    # grid reads like the spec; the unused columns follow in the file's order.
    names = [str(c) for c in frame.columns]
    first = [c for c in [outcome.get("column"), *by_column] if c in names]
    rows = []
    for name in first + [c for c in names if c not in first]:
        series = frame[name]
        row = {
            "column": name,
            "about": describe_column(series),
            "role": "not used",
            "change": "",
            "by": "",
            "reference": "",
            "unit": "",
        }
        advice = entries.get(name) or {}
        if advice.get("kind") in LOCKED_KINDS:
            row["about"] = f"{LOCKED_KINDS[advice['kind']]} · {row['about']}"
        if name == outcome.get("column"):
            row.update(role="outcome", transform=outcome.get("transform", "level"), unit=_text(outcome.get("unit")))
        elif name in by_column:
            entry = by_column[name]
            row.update(
                role="regressor",
                transform=entry.get("transform", "level"),
                change=_text(entry.get("change")),
                by=_text(entry.get("by")),
                reference=_text(entry.get("reference")),
                unit=_text(entry.get("unit")),
            )
        elif name in absorbed:
            row.update(role="absorb", transform="category")
        elif advice.get("suggested_transform") in menu_codes("regressor"):
            row["transform"] = advice["suggested_transform"]
        else:
            # No advice (a column the advisor did not profile): text as a category, numbers as they are.
            row["transform"] = "level" if numeric_or_none(series) is not None else "category"
        rows.append(row)
    return pd.DataFrame(rows, columns=GRID_COLUMNS).astype(object)


def _text(value: Any) -> str:
    """A grid cell as stripped text; blank for None, NaN and pandas' missing markers."""
    if value is None:
        return ""
    try:
        if pd.isna(value):
            return ""
    except (TypeError, ValueError):
        pass
    return str(value).strip()


def _switch_ends(change: str) -> tuple[str, str] | None:
    if "->" not in change:
        return None
    start, end = (part.strip() for part in change.split("->", 1))
    return start, end


def _is_number(text: str) -> bool:
    try:
        return math.isfinite(float(text))
    except ValueError:
        return False


def grid_to_spec(
    grid: pd.DataFrame,
    covariance: str = "HC1",
    cluster: str | list[str] | None = None,
    at: dict[str, Any] | None = None,
    estimator: str = "ols",
) -> tuple[dict[str, Any], list[str]]:
    """The spec the grid describes, plus notes on cells that were set aside.

    Raises ``GridError`` unless exactly one row is the outcome, or when the outcome has a
    regressor-only transform. Everything else (columns, transforms, change text) is checked
    by ``core`` so the rules live in one place. With ``estimator='ppml'`` the outcome enters
    in levels whatever the grid says (PPML models the log of its mean itself).
    """
    outcomes = [r for r in grid.to_dict("records") if _text(r.get("role")) == "outcome"]
    if not outcomes:
        raise GridError("no outcome chosen: set the role of one column to 'outcome'.")
    if len(outcomes) > 1:
        names = ", ".join(_text(r["column"]) for r in outcomes)
        raise GridError(f"more than one outcome ({names}): keep exactly one row with the role 'outcome'.")
    outcome = outcomes[0]
    outcome_transform = _text(outcome.get("transform")) or "level"
    if outcome_transform not in menu_codes("outcome") and lookup(outcome_transform, "outcome") is None:
        raise GridError(
            f"the outcome '{_text(outcome['column'])}' cannot be '{outcome_transform}'; "
            f"use one of: {', '.join(menu_codes('outcome'))}."
        )
    notes: list[str] = []
    if estimator == "ppml" and outcome_transform != "level":
        notes.append(
            f"Poisson pseudo-maximum likelihood models the mean of '{_text(outcome['column'])}' directly, so the "
            f"outcome enters in levels; the grid's '{menu_word(outcome_transform)}' is set aside."
        )
        outcome_transform = "level"
    regressors: list[dict[str, Any]] = []
    for row in grid.to_dict("records"):
        if _text(row.get("role")) != "regressor":
            continue
        column = _text(row["column"])
        transform = _text(row.get("transform")) or "level"
        entry: dict[str, Any] = {"column": column, "transform": transform}
        change = _text(row.get("change"))
        if transform == "category":
            reference = _text(row.get("reference"))
            if reference:
                entry["reference"] = reference
            ends = _switch_ends(change)
            # core reads number-like ends ('0->1') as numbers, which then do not match the
            # text levels of a category; every level is compared with the reference instead.
            if ends and not any(_is_number(e) for e in ends):
                entry["change"] = change
            elif change:
                notes.append(
                    f"'{column}' is a category, so its effects compare every level with the reference level; "
                    f"the change '{change}' was set aside (write two level names, e.g. 'A->B', to pick one pair)."
                )
        elif change:
            entry["change"] = change
        if _text(row.get("unit")):
            entry["unit"] = _text(row.get("unit"))
        regressors.append(entry)
    used = {r["column"] for r in regressors}
    notes += _moderators(grid, regressors, used)
    absorbed = [_text(r["column"]) for r in grid.to_dict("records") if _text(r.get("role")) == "absorb"]
    outcome_entry = {"column": _text(outcome["column"]), "transform": outcome_transform}
    if _text(outcome.get("unit")):
        outcome_entry["unit"] = _text(outcome.get("unit"))
    spec: dict[str, Any] = {
        "outcome": outcome_entry,
        "regressors": regressors,
        "estimator": estimator,
        "covariance": covariance,
        "cluster": cluster if covariance == "cluster" else None,
        "weights": None,
        "at": {k: v for k, v in (at or {}).items() if k in used},
    }
    if absorbed:
        spec["absorb"] = absorbed
    return spec, notes


def constant_within(frame: pd.DataFrame, grid: pd.DataFrame, column: str) -> list[str]:
    """The regressors of the grid that never change within a level of ``column``: absorbing its
    fixed effects absorbs them too."""
    regressors = [_text(r["column"]) for r in grid.to_dict("records") if _text(r.get("role")) == "regressor"]
    regressors = [c for c in regressors if c in frame.columns and c != column]
    if not regressors or column not in frame.columns:
        return []
    changes = frame.groupby(frame[column].astype(str), sort=False)[regressors].nunique(dropna=True).max()
    return [c for c in regressors if int(changes[c]) <= 1]


def with_absorbed(frame: pd.DataFrame, grid: pd.DataFrame, column: str) -> tuple[pd.DataFrame, list[str]]:
    """The grid with ``column`` absorbed and the regressors constant within its levels set to
    'not used' (their effect is in the fixed effects); the regressors so moved."""
    moved = constant_within(frame, grid, column)
    out = grid.copy()
    for i in out.index:
        name = _text(out.at[i, "column"])
        if name == column:
            out.at[i, "role"] = "absorb"
        elif name in moved:
            out.at[i, "role"] = "not used"
    return out, moved


def _moderators(grid: pd.DataFrame, regressors: list[dict[str, Any]], used: set[str]) -> list[str]:
    """Each regressor's 'varies by' cell into its entry's ``by`` when it names another regressor
    (a moderator needs its own effect in the model); a note for each one set aside."""
    by_row = {_text(r["column"]): _text(r.get("by")) for r in grid.to_dict("records")}
    notes = []
    for entry in regressors:
        by = by_row.get(entry["column"], "")
        if not by:
            continue
        if by in used and by != entry["column"]:
            entry["by"] = by
        else:
            why = "itself" if by == entry["column"] else f"'{by}', which is not a regressor now"
            notes.append(
                f"The effect of '{entry['column']}' is set to vary by {why}; that is set aside until "
                f"{'another regressor is named' if by == entry['column'] else f'{by} is a regressor too'}."
            )
    return notes


def with_time_and_scenarios(
    spec: dict[str, Any], time: str | None, lags: int | None, scenarios: list[dict[str, Any]] | None
) -> tuple[dict[str, Any], list[str]]:
    """``spec`` with the sidebar's time column (time-series errors only) and the saved scenarios
    whose changes all name regressors of the model; a note for each scenario set aside."""
    out = dict(spec)
    if COVARIANCE_KINDS[spec["covariance"]].needs_time:
        out["time"] = time
        if lags is not None:
            out["lags"] = lags
    used = {r["column"] for r in spec.get("regressors") or []}
    kept, notes = [], []
    for scenario in scenarios or []:
        missing = [c for c in scenario["changes"] if c not in used]
        if missing:
            notes.append(
                f"The scenario '{scenario['name']}' changes {', '.join(missing)}, which is not a regressor now; "
                "it is set aside until the variable is back in the model."
            )
        else:
            kept.append(scenario)
    if kept:
        out["scenarios"] = kept
    return out, notes


def with_sweep(spec: dict[str, Any], vary: list[str] | None, focus: str | None = None) -> dict[str, Any]:
    """``spec`` with a sweep entry (its own, else the defaults) and the Forms view's choices: the
    variables whose forms vary, those of them still in the model (None or none left: the sweep's
    own choice, every variable within its cap), and the regressor whose effect is compared (when
    it still is one)."""
    entry = dict(spec.get("sweep") or {})
    regressors = [r["column"] for r in spec.get("regressors") or []]
    if vary is not None:
        kept = [c for c in vary if c == spec["outcome"]["column"] or c in regressors]
        if kept:
            entry["vary"] = kept
    if focus in regressors:
        entry["focus"] = focus
    return {**spec, "sweep": entry}


def resolve_outcome(grid: pd.DataFrame, previous: pd.DataFrame) -> pd.DataFrame:
    """When an edit makes a second row the outcome, the new choice wins and the old outcome
    becomes 'not used', so the user can switch outcome with one click."""
    is_outcome = grid["role"].map(_text) == "outcome"
    if is_outcome.sum() <= 1:
        return grid
    before = dict(zip(previous["column"].map(_text), previous["role"].map(_text), strict=False))
    new = [i for i in grid.index[is_outcome] if before.get(_text(grid.at[i, "column"])) != "outcome"]
    keep = new[-1] if new else grid.index[is_outcome][-1]
    resolved = grid.copy()
    for i in grid.index[is_outcome]:
        if i != keep:
            resolved.at[i, "role"] = "not used"
    if resolved.at[keep, "transform"] not in menu_codes("outcome"):
        resolved.at[keep, "transform"] = "level"
    return resolved


def frequent_levels(series: pd.Series, limit: int) -> list[str]:
    """Up to ``limit`` + 1 levels of a column as text, the most frequent first."""
    return series.dropna().astype(str).value_counts().index[: limit + 1].tolist()


def category_levels(
    frame: pd.DataFrame, grid: pd.DataFrame, limit: int = 12, levels: Callable[[str], list[str]] | None = None
) -> dict[str, list[str]]:
    """Levels of the columns used as categories, so the user can type a reference level.
    ``levels(column)``, when given, is ``frequent_levels`` of that column with ``limit`` (a cache)."""
    out: dict[str, list[str]] = {}
    for row in grid.to_dict("records"):
        if _text(row.get("transform")) == "category" and _text(row.get("role")) == "regressor":
            column = _text(row["column"])
            if column in frame.columns:
                found = levels(column) if levels is not None else frequent_levels(frame[column], limit)
                out[column] = found[:limit] + (["…"] if len(found) > limit else [])
    return out


def spec_json(spec: dict[str, Any]) -> str:
    """The cache key of a spec: its JSON with sorted keys, without the display name."""
    return json.dumps({k: v for k, v in spec.items() if k != "name"}, sort_keys=True)


# --- the PPML offer for outcomes with zeros ----------------------------------------------------------
def outcome_column(grid: pd.DataFrame) -> str | None:
    found = [_text(r["column"]) for r in grid.to_dict("records") if _text(r.get("role")) == "outcome"]
    return found[0] if len(found) == 1 else None


def with_outcome_level(grid: pd.DataFrame) -> pd.DataFrame:
    """The grid with the outcome's transform set to 'level' (what PPML needs)."""
    out = grid.copy()
    for i in out.index:
        if _text(out.at[i, "role"]) == "outcome":
            out.at[i, "transform"] = "level"
    return out


def transform_options(grid: pd.DataFrame) -> list[str]:
    """The transforms the grid offers: the registry's menu, plus any other code a spec put in
    the grid (e.g. 'shifted_log:2'), so the cell can show it."""
    offered = menu_codes("regressor")
    extra = sorted(set(grid["transform"].dropna().map(str)) - set(offered))
    return offered + extra
