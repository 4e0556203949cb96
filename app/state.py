"""Pure logic behind the variables grid: spec <-> grid, defaults for a new file, plain words.

No streamlit import here, so every rule the screen follows can be unit-tested. The grid is a
DataFrame with one row per data column and the columns listed in ``GRID_COLUMNS``.
"""

from __future__ import annotations

import json
import math
import re
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from core.model.covariance import leverage
from core.model.fitted import fit_model
from core.model.spec import parse_spec
from core.model.transforms import parse_transform
from core.output.escape import plain
from core.output.numbers import compact, p_text, round_sig, signed, step_for

GRID_COLUMNS = ["column", "about", "role", "transform", "change", "reference"]
ROLES = ["outcome", "regressor", "not used"]
REGRESSOR_TRANSFORMS = ["level", "log", "ihs", "shifted_log:1", "sqrt", "quadratic", "category"]
OUTCOME_TRANSFORMS = ["level", "log", "ihs", "shifted_log:1", "sqrt"]
TRANSFORM_WORDS = {
    "level": "level (as is)",
    "log": "log",
    "ihs": "IHS (asinh)",
    "shifted_log:1": "log(x + 1)",
    "sqrt": "square root",
    "quadratic": "quadratic (x and x²)",
    "category": "category (dummies)",
}
COVARIANCES = ["classical", "HC0", "HC1", "HC2", "HC3", "cluster"]
COVARIANCE_SHORT = {
    "classical": "classical",
    "HC0": "robust (HC0)",
    "HC1": "robust (HC1)",
    "HC2": "robust (HC2)",
    "HC3": "robust (HC3)",
    "cluster": "clustered",
}
COVARIANCE_WORDS = {
    "classical": "Classical (same noise in every row)",
    "HC0": "Robust, HC0",
    "HC1": "Robust, HC1 (usual choice)",
    "HC2": "Robust, HC2",
    "HC3": "Robust, HC3 (cautious in small samples)",
    "cluster": "Clustered by a grouping column",
}
# A default model on a wide file stays readable and quick; the user can add more in the grid.
MAX_DEFAULT_REGRESSORS = 12
# Text columns with more levels than this are treated as identifiers, not categories.
MAX_DEFAULT_LEVELS = 20
# Skewness above which a positive amount is logged by default (a common rule of thumb).
SKEWED = 1.0
_INDEX_NAME = re.compile(r"(^|_)(id|index|week|year|month|day|quarter|period|date|time)s?($|_)", re.IGNORECASE)


class GridError(ValueError):
    """The grid does not describe a model yet (e.g. no outcome); worded for the user."""


# --- reading a column ------------------------------------------------------------------------
def _numeric(series: pd.Series) -> pd.Series | None:
    """The column as floats when every non-missing cell is a number, else None."""
    if pd.api.types.is_bool_dtype(series):
        return series.astype(float)
    if pd.api.types.is_numeric_dtype(series):
        return series.astype(float)
    return None


def _looks_like_index(name: str, values: pd.Series) -> bool:
    """Row counters, ids and time indices make poor outcomes and regressors by default."""
    finite = values.dropna()
    if finite.empty:
        return True
    integer = bool(np.all(np.equal(np.mod(finite.to_numpy(), 1), 0)))
    if not integer:
        return False
    if _INDEX_NAME.search(name):
        return True
    distinct = finite.nunique()
    return distinct > 2 and distinct == int(finite.max() - finite.min()) + 1


def _skewness(values: pd.Series) -> float:
    skew = values.dropna().skew()
    return float(skew) if skew is not None and math.isfinite(skew) else 0.0


def describe_column(series: pd.Series) -> str:
    """What a column holds, in a few words, so the user can pick a sensible transform."""
    missing = int(series.isna().sum())
    tail = f", {missing} missing" if missing else ""
    values = _numeric(series)
    if values is None:
        levels = series.dropna().astype(str).nunique()
        return f"text, {levels} level{'s' if levels != 1 else ''}{tail}"
    finite = values.dropna()
    if finite.empty:
        return f"empty{tail}"
    if set(finite.unique()) <= {0.0, 1.0}:
        return f"0/1{tail}"
    parts = [f"{compact(float(finite.min()))} to {compact(float(finite.max()))}"]
    zeros = int((finite == 0).sum())
    negatives = int((finite < 0).sum())
    if zeros:
        parts.append(f"{zeros:,} zero{'s' if zeros != 1 else ''}")
    if negatives:
        parts.append(f"{negatives:,} negative")
    return ", ".join(parts) + tail


def suggest_transform(series: pd.Series, role: str = "regressor") -> str:
    """A first transform for a column (rules of thumb, the user can change it in the grid).

    Text -> category; 0/1 -> level; strictly positive and right-skewed -> log; non-negative
    with zeros and right-skewed -> IHS (log would drop the zero rows); otherwise level.
    """
    values = _numeric(series)
    if values is None:
        return "level" if role == "outcome" else "category"
    finite = values.dropna()
    if finite.empty or set(finite.unique()) <= {0.0, 1.0}:
        return "level"
    skewed = _skewness(finite) > SKEWED
    if skewed and (finite > 0).all():
        return "log"
    if skewed and (finite >= 0).all():
        return "ihs"
    return "level"


def _is_outcome_candidate(name: str, series: pd.Series) -> bool:
    values = _numeric(series)
    if values is None:
        return False
    finite = values.dropna()
    return bool(len(finite) > 2 and (finite > 0).all() and finite.nunique() > 2 and not _looks_like_index(name, finite))


def default_spec(frame: pd.DataFrame, profile: dict[str, Any] | None = None) -> dict[str, Any]:
    """A starting model for a newly loaded file.

    Outcome: the first strictly positive numeric column that is not a counter or time index.
    Regressors: the other numeric columns that vary, and text columns with a few levels as
    categories, up to ``MAX_DEFAULT_REGRESSORS``. Raises ``GridError`` when no column fits
    as an outcome. With the file's ``profile`` (``core.intake.profile.profile_table``) the advisor
    decides: kinds pick the columns and its suggested transforms fill the grid.
    """
    if profile is not None:
        return _advised_spec(frame, profile)
    names = [str(c) for c in frame.columns]
    outcome = next((c for c in names if _is_outcome_candidate(c, frame[c])), None)
    if outcome is None:
        raise GridError("the table has no numeric column with positive values to use as the outcome; check the file.")
    regressors: list[dict[str, Any]] = []
    for name in names:
        if name == outcome or len(regressors) >= MAX_DEFAULT_REGRESSORS:
            continue
        series = frame[name]
        values = _numeric(series)
        if values is None:
            levels = series.dropna().astype(str).nunique()
            if 2 <= levels <= min(MAX_DEFAULT_LEVELS, max(2, len(series) // 10)):
                regressors.append({"column": name, "transform": "category"})
            continue
        finite = values.dropna()
        if finite.nunique() < 2 or _looks_like_index(name, finite):
            continue
        regressors.append({"column": name, "transform": suggest_transform(series)})
    return {
        "outcome": {"column": outcome, "transform": suggest_transform(frame[outcome], "outcome")},
        "regressors": regressors,
        "estimator": "ols",
        "covariance": "HC1",
        "cluster": None,
        "weights": None,
        "at": {},
    }


# Kinds the advisor reads as labels of rows, not variables: kept out of the model unless the
# user asks for them (an identifier still serves to cluster standard errors).
LOCKED_KINDS = {"identifier": "identifier", "date": "dates"}
# Kinds that make a sensible default outcome: amounts and measurements, not labels or 0/1.
_OUTCOME_KINDS = ("money", "count", "continuous", "duration_years", "share", "percent")
_NOT_BY_DEFAULT = {"time_index", "calendar_year", "constant", "empty"}


def profile_entries(profile: dict[str, Any] | None) -> dict[str, dict[str, Any]]:
    """The profile's column entries by column name (empty without a profile)."""
    return {str(e["column"]): e for e in (profile or {}).get("columns") or []}


def _advised_spec(frame: pd.DataFrame, profile: dict[str, Any]) -> dict[str, Any]:
    """``default_spec`` following the advisor: identifiers, dates, text, constants and time
    indices stay out; every other column enters with its suggested transform."""
    entries = profile_entries(profile)
    names = [str(c) for c in frame.columns]

    def usable(name: str) -> bool:
        entry = entries.get(name)
        return bool(entry and entry.get("suggested_transform") and not set(entry.get("flags") or []) & _NOT_BY_DEFAULT)

    def outcome_fits(name: str) -> bool:
        entry = entries.get(name) or {}
        return (
            usable(name)
            and entry.get("kind") in _OUTCOME_KINDS
            and (entry.get("min") or 0) > 0
            and (entry.get("n_distinct") or 0) > 2
        )

    outcome = next((c for c in names if outcome_fits(c)), None)
    if outcome is None:
        # The advisor found no amount to explain; fall back on the plain rules.
        return default_spec(frame)
    suggested = entries[outcome]["suggested_transform"]
    regressors: list[dict[str, Any]] = []
    for name in names:
        if name == outcome or len(regressors) >= MAX_DEFAULT_REGRESSORS or not usable(name):
            continue
        transform = entries[name]["suggested_transform"]
        if transform == "category" and entries[name].get("n_distinct", 0) > min(MAX_DEFAULT_LEVELS, max(2, len(frame) // 10)):
            continue  # many levels: a dummy each would swamp a first model; the user can add it
        regressors.append({"column": name, "transform": transform})
    return {
        "outcome": {"column": outcome, "transform": suggested if suggested in OUTCOME_TRANSFORMS else "level"},
        "regressors": regressors,
        "estimator": "ols",
        "covariance": "HC1",
        "cluster": None,
        "weights": None,
        "at": {},
    }


def suggest_cluster(frame: pd.DataFrame) -> str | None:
    """A grouping column for clustered errors: the text or whole-number column with the most
    groups that still repeat (at most half as many groups as rows)."""
    best, best_groups = None, 0
    for name in frame.columns:
        series = frame[name]
        values = _numeric(series)
        if values is not None and not bool(np.all(np.equal(np.mod(values.dropna().to_numpy(), 1), 0))):
            continue
        groups = series.nunique()
        if 2 <= groups <= len(series) // 2 and groups > best_groups:
            best, best_groups = str(name), groups
    return best


# --- spec <-> grid ------------------------------------------------------------------------------
def spec_to_grid(spec: dict[str, Any], frame: pd.DataFrame, profile: dict[str, Any] | None = None) -> pd.DataFrame:
    """One grid row per data column, in the file's order, filled from ``spec``. With the file's
    ``profile``, unused rows carry the advisor's suggested transform and identifier and date
    columns say what they are."""
    entries = profile_entries(profile)
    outcome = spec.get("outcome") or {}
    by_column = {r["column"]: r for r in spec.get("regressors") or []}
    # The model's own variables first (outcome, then regressors in the spec's order), so the
    # grid reads like the spec; the unused columns follow in the file's order.
    names = [str(c) for c in frame.columns]
    first = [c for c in [outcome.get("column"), *by_column] if c in names]
    rows = []
    for name in first + [c for c in names if c not in first]:
        series = frame[name]
        row = {"column": name, "about": describe_column(series), "role": "not used", "change": "", "reference": ""}
        advice = entries.get(name) or {}
        if advice.get("kind") in LOCKED_KINDS:
            row["about"] = f"{LOCKED_KINDS[advice['kind']]} · {row['about']}"
        if name == outcome.get("column"):
            row.update(role="outcome", transform=outcome.get("transform", "level"))
        elif name in by_column:
            entry = by_column[name]
            row.update(
                role="regressor",
                transform=entry.get("transform", "level"),
                change=_text(entry.get("change")),
                reference=_text(entry.get("reference")),
            )
        elif advice.get("suggested_transform") in REGRESSOR_TRANSFORMS:
            row["transform"] = advice["suggested_transform"]
        else:
            row["transform"] = suggest_transform(series)
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
    cluster: str | None = None,
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
    if outcome_transform in ("quadratic", "category"):
        raise GridError(
            f"the outcome '{_text(outcome['column'])}' cannot be '{outcome_transform}'; "
            f"use one of: {', '.join(OUTCOME_TRANSFORMS)}."
        )
    notes: list[str] = []
    if estimator == "ppml" and outcome_transform != "level":
        notes.append(
            f"Poisson pseudo-maximum likelihood models the mean of '{_text(outcome['column'])}' directly, so the "
            f"outcome enters in levels; the grid's '{TRANSFORM_WORDS.get(outcome_transform, outcome_transform)}' is set aside."
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
        regressors.append(entry)
    used = {r["column"] for r in regressors}
    spec: dict[str, Any] = {
        "outcome": {"column": _text(outcome["column"]), "transform": outcome_transform},
        "regressors": regressors,
        "estimator": estimator,
        "covariance": covariance,
        "cluster": cluster if covariance == "cluster" else None,
        "weights": None,
        "at": {k: v for k, v in (at or {}).items() if k in used},
    }
    return spec, notes


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
    if resolved.at[keep, "transform"] not in OUTCOME_TRANSFORMS:
        resolved.at[keep, "transform"] = "level"
    return resolved


def category_levels(frame: pd.DataFrame, grid: pd.DataFrame, limit: int = 12) -> dict[str, list[str]]:
    """Levels of the columns used as categories, so the user can type a reference level."""
    out: dict[str, list[str]] = {}
    for row in grid.to_dict("records"):
        if _text(row.get("transform")) == "category" and _text(row.get("role")) == "regressor":
            column = _text(row["column"])
            if column in frame.columns:
                counts = frame[column].dropna().astype(str).value_counts()
                out[column] = counts.index[:limit].tolist() + (["…"] if len(counts) > limit else [])
    return out


# --- plain words -------------------------------------------------------------------------------
def variable_label(column: str, transform: str | None, role: str = "regressor") -> str:
    """Short plain name of a transformed variable: 'log of drink_price', 'IHS of ad_spend',
    'log(visits + 1)', 'region (categories)'; the bare name for levels."""
    code = (transform or "level").strip()
    if code == "level":
        return column
    if code in ("log", "ihs", "sqrt"):
        word = {"log": "log", "ihs": "IHS", "sqrt": "square root"}[code]
        return f"{word} of {column}"
    if code.startswith("shifted_log:"):
        return f"log({column} + {code.split(':', 1)[1]})"
    if code == "quadratic":
        return f"{column} and its square"
    if code == "category":
        return f"{column} (categories)"
    try:
        return parse_transform(code, role, column).label(column)
    except ValueError:
        return f"{code} of {column}"


def join_words(items: list[str]) -> str:
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


def model_sentence(result: dict[str, Any]) -> str:
    """'log of weekly_revenue explained by log of drink_price, ... and region (categories)'."""
    outcome = result["outcome"]
    y = variable_label(outcome["column"], outcome["transform"], "outcome")
    seen: dict[str, str] = {}
    for term in result.get("terms") or []:
        if term["column"] and term["column"] not in seen:
            seen[term["column"]] = variable_label(term["column"], term["transform"])
    if not seen:
        return f"{y} with no regressors (a mean only)"
    return f"{y} explained by {join_words(list(seen.values()))}"


def rows_sentence(result: dict[str, Any]) -> str:
    used = result.get("n_obs", 0)
    dropped = result.get("n_dropped", 0)
    return f"{used:,} rows used, {dropped:,} dropped"


def fit_sentence(result: dict[str, Any], estimator: str = "ols") -> str:
    """' · R² 0.714 on the log scale, 0.703 for weekly_revenue itself' (empty without a fit).

    R² of a transformed outcome measures the transformed scale; the original-scale R²
    (squared correlation of y with the retransformed prediction) is the one that compares
    across outcome transforms, so both are named. PPML has no least-squares R²; its R² is the
    squared correlation of y with the fitted mean, and is named so.
    """
    fit = result.get("fit") or {}
    r2 = fit.get("r2")
    if r2 is None:
        return ""
    outcome = result["outcome"]
    if estimator == "ppml":
        return f" · R² {r2:.3f} (squared correlation of {outcome['column']} with its fitted mean)"
    if outcome["transform"] == "level":
        return f" · R² {r2:.3f}"
    text = f" · R² {r2:.3f} for {variable_label(outcome['column'], outcome['transform'], 'outcome')}"
    original = fit.get("r2_original_scale")
    if original is not None:
        text += f", {original:.3f} for {outcome['column']} itself"
    return text


def dropped_lines(result: dict[str, Any]) -> list[str]:
    """One line per reason rows were left out, naming the column."""
    return [f"{d['count']:,} row(s): {d['reason']} in '{d['column']}'" for d in result.get("dropped") or []]


def sentence_case(text: str) -> str:
    return text[:1].upper() + text[1:] if text else text


# --- the views' shared helpers ----------------------------------------------------------------------
# Largest number of points any chart sends to the browser (docs/contract.md §6).
MAX_POINTS = 20_000
# Data points drawn lightly behind an effect curve.
CURVE_POINTS = 2_000
# Significance level for the plain-word test sentences (common practice, no source).
ALPHA = 0.05


def spec_json(spec: dict[str, Any]) -> str:
    """The cache key of a spec: its JSON with sorted keys, without the display name."""
    return json.dumps({k: v for k, v in spec.items() if k != "name"}, sort_keys=True)


# --- the PPML offer for outcomes with zeros ----------------------------------------------------------
def outcome_column(grid: pd.DataFrame) -> str | None:
    found = [_text(r["column"]) for r in grid.to_dict("records") if _text(r.get("role")) == "outcome"]
    return found[0] if len(found) == 1 else None


def zero_note(frame: pd.DataFrame, column: str | None) -> dict[str, Any] | None:
    """Zeros in a numeric outcome and the rows a log would drop; None without zeros."""
    if column is None or column not in frame.columns:
        return None
    values = _numeric(frame[column])
    if values is None:
        return None
    finite = values.dropna()
    zeros = int((finite == 0).sum())
    if not zeros:
        return None
    negatives = int((finite < 0).sum())
    return {
        "column": column,
        "zeros": zeros,
        "negatives": negatives,
        "dropped_by_log": zeros + negatives,
        "share": (zeros + negatives) / len(finite),
        "ppml_possible": negatives == 0,
    }


def zero_sentence(note: dict[str, Any]) -> str:
    """'catering_orders is zero in 955 rows: a log of catering_orders would drop 955 rows (64 %).'"""
    column = plain(note["column"])  # Markdown: the name is escaped, the bold is meant
    what = f"zero in {note['zeros']:,} row{'s' if note['zeros'] != 1 else ''}"
    if note["negatives"]:
        what += f" and negative in {note['negatives']:,}"
    return (
        f"**{column}** is {what}: a log of {column} would drop {note['dropped_by_log']:,} rows "
        f"({note['share'] * 100:.0f} % of the data)."
    )


def with_outcome_level(grid: pd.DataFrame) -> pd.DataFrame:
    """The grid with the outcome's transform set to 'level' (what PPML needs)."""
    out = grid.copy()
    for i in out.index:
        if _text(out.at[i, "role"]) == "outcome":
            out.at[i, "transform"] = "level"
    return out


# --- effect curves ---------------------------------------------------------------------------------
CURVE_TRANSFORMS = ["level", "log", "ihs", "sqrt", "quadratic", "shifted_log:1"]


_PHRASES = {
    "level": "{c} in levels",
    "log": "{c} as a log",
    "ihs": "{c} as IHS",
    "sqrt": "{c} as a square root",
    "quadratic": "{c} as a quadratic",
}


def transform_phrase(column: str, code: str) -> str:
    """'drink_price in levels', 'drink_price as a log', 'visits as log(visits + 1)'."""
    if code in _PHRASES:
        return _PHRASES[code].format(c=column)
    return f"{column} as {variable_label(column, code)}"


def overlay_options(frame: pd.DataFrame, column: str, current: str) -> list[str]:
    """Other transforms of ``column`` that accept all of its values, so a second curve is fitted
    on the same rows and the two can be compared."""
    values = _numeric(frame[column]) if column in frame.columns else None
    if values is None:
        return []
    finite = values.dropna().to_numpy()
    out = []
    for code in CURVE_TRANSFORMS:
        if code == current:
            continue
        bad, _ = parse_transform(code, "regressor", column).invalid(finite)
        if not bad.any():
            out.append(code)
    return out


def switch_transform(spec: dict[str, Any], column: str, transform: str) -> dict[str, Any]:
    """A copy of ``spec`` with one regressor's transform replaced (everything else kept)."""
    out = {**spec, "regressors": [dict(r) for r in spec.get("regressors") or []]}
    for entry in out["regressors"]:
        if entry["column"] == column:
            entry["transform"] = transform
    out.pop("name", None)
    return out


def sample_points(frame: pd.DataFrame, x_column: str, y_column: str, limit: int = CURVE_POINTS, seed: int = 0) -> dict[str, Any]:
    """At most ``limit`` rows (seeded, so the picture is stable) with a usable x and y."""
    x = frame[x_column]
    y = pd.to_numeric(frame[y_column], errors="coerce")
    numeric_x = _numeric(x)
    usable = y.notna() & np.isfinite(y.to_numpy(dtype=float, na_value=np.nan))
    if numeric_x is not None:
        usable &= numeric_x.notna() & np.isfinite(numeric_x.to_numpy(dtype=float, na_value=np.nan))
    else:
        usable &= x.notna()
    rows = np.flatnonzero(usable.to_numpy())
    total = len(rows)
    if total > limit:
        rows = np.sort(np.random.default_rng(seed).choice(rows, size=limit, replace=False))
    xs = numeric_x.iloc[rows].to_numpy() if numeric_x is not None else x.iloc[rows].astype(str).to_numpy()
    return {"x": xs.tolist(), "y": y.iloc[rows].to_numpy().tolist(), "shown": len(rows), "total": total}


def showing_words(shown: int, total: int, what: str = "rows") -> str:
    """'showing all 1,500 rows' or 'showing 20,000 of 1,000,000 rows (a random sample)'."""
    if shown >= total:
        return f"showing all {total:,} {what}"
    return f"showing {shown:,} of {total:,} {what} (a random sample)"


def retransforms_differ(curve: dict[str, Any], tolerance: float = 1e-6) -> bool:
    """True where the naive and the smearing curve are visibly different lines."""
    naive = np.array([np.nan if v is None else v for v in curve.get("naive") or []], dtype=float)
    smear = np.array([np.nan if v is None else v for v in curve.get("smearing") or []], dtype=float)
    if naive.size == 0 or naive.shape != smear.shape:
        return False
    with np.errstate(invalid="ignore", divide="ignore"):
        rel = np.abs(naive - smear) / np.maximum(np.abs(smear), 1e-300)
    return bool(np.nanmax(np.nan_to_num(rel, nan=0.0)) > tolerance)


# --- units check (IHS and shifted-log regressors) -----------------------------------------------------
UNIT_WORDS = {
    0.001: ("÷1000", "in thousands"),
    0.01: ("÷100", "in hundreds"),
    0.1: ("÷10", "in tens"),
    1.0: ("as recorded", "as in the data"),
    10.0: ("×10", "in tenths"),
    100.0: ("×100", "in hundredths"),
    1000.0: ("×1000", "in thousandths"),
}


def factor_words(factor: float) -> tuple[str, str]:
    """('÷1000', 'in thousands') for 0.001; a generic '×f' for factors not listed."""
    for known, words in UNIT_WORDS.items():
        if math.isclose(factor, known, rel_tol=1e-9):
            return words
    return f"×{factor:g}", f"multiplied by {factor:g}"


def units_warning(check: dict[str, Any], transform: str | None) -> str | None:
    """The plain warning when the effect moves with the units (None when it barely moves)."""
    if not check.get("moves"):
        return None
    column = check["column"]
    largest = check.get("max_relative_move") or 0.0
    kind = variable_label(column, transform)
    return (
        f"The effect of {column} changes by up to {largest * 100:.0f} % when {column} is measured in other units. "
        f"With {kind} the result depends on the units of measurement, so report the units you used, or use a log "
        f"of {column} if it has no zeros (a log's effects do not depend on units)."
    )


# --- residual checks -----------------------------------------------------------------------------------
def _evenly(n: int, limit: int) -> np.ndarray:
    """Up to ``limit`` positions spread evenly over 0..n-1, both ends included."""
    if n <= limit:
        return np.arange(n)
    return np.unique(np.linspace(0, n - 1, limit).round().astype(int))


def _binned_means(x: np.ndarray, y: np.ndarray, bins: int = 30) -> tuple[list[float], list[float]]:
    """Mean of y within equal-count bins of x: a smooth trend line from every row, sent as a
    few dozen points."""
    if len(x) < 2 * bins:
        bins = max(2, len(x) // 10)
    order = np.argsort(x, kind="stable")
    groups = np.array_split(order, bins)
    xs = [float(np.mean(x[g])) for g in groups if len(g)]
    ys = [float(np.mean(y[g])) for g in groups if len(g)]
    return xs, ys


def residual_sample(frame: pd.DataFrame, spec: dict[str, Any], limit: int = MAX_POINTS, seed: int = 0) -> dict[str, Any] | None:
    """Residuals, fitted values and what the four residual charts need, at most ``limit`` points
    each; histograms, trend lines and the Q-Q line use every row. None for PPML (its residuals
    are not meant to have constant spread or a normal shape).

    Standardised residuals are internally studentised, eᵢ / (s·sqrt(1 − hᵢ)) (Cook & Weisberg
    1982, Residuals and Influence in Regression, §2.2.1), with weights applied as in core.
    """
    if (spec.get("estimator") or "ols") == "ppml":
        return None
    # Room for the trend lines drawn with the dots, so a chart stays within ``limit`` points.
    limit = max(limit - 100, 10)
    design, fit, _ = fit_model(frame, parse_spec(spec, frame))
    root_w = np.sqrt(fit.weights) if fit.weights is not None else None
    u = fit.resid * root_w if root_w is not None else fit.resid
    X = design.X * root_w[:, None] if root_w is not None else design.X
    h = np.clip(leverage(X, fit.xtx_inv), 0.0, 1.0 - 1e-12)
    with np.errstate(divide="ignore", invalid="ignore"):
        standardised = u / (fit.sigma * np.sqrt(1.0 - h))
    n = len(u)
    rows = np.arange(n)
    if n > limit:
        rows = np.sort(np.random.default_rng(seed).choice(n, size=limit, replace=False))
    # Q-Q: the ordered standardised residuals against normal quantiles, thinned evenly by rank
    # so both tails are always drawn.
    ordered = np.sort(standardised)
    picks = _evenly(n, limit)
    theory = stats.norm.ppf((picks + 0.5) / n)
    counts, edges = np.histogram(u, bins=min(60, max(10, int(np.sqrt(n)))))
    trend_x, trend_y = _binned_means(fit.fitted, u)
    root_abs = np.sqrt(np.abs(standardised))
    spread_x, spread_y = _binned_means(fit.fitted, root_abs)
    return {
        "n": n,
        "shown": len(rows),
        "sigma": float(np.sqrt(np.mean(u * u) * n / max(n - fit.k, 1))),
        "fitted": fit.fitted[rows].tolist(),
        "resid": u[rows].tolist(),
        "root_abs": root_abs[rows].tolist(),
        "qq_theory": theory.tolist(),
        "qq_sample": ordered[picks].tolist(),
        "hist_counts": counts.tolist(),
        "hist_edges": edges.tolist(),
        "trend": {"x": trend_x, "y": trend_y},
        "spread_trend": {"x": spread_x, "y": spread_y},
    }


def _histogram(values: np.ndarray, bins: int = 40) -> dict[str, list[float]]:
    counts, edges = np.histogram(values, bins=bins)
    return {"counts": counts.tolist(), "edges": edges.tolist()}


def _skew(values: np.ndarray) -> float | None:
    skew = pd.Series(values).skew() if len(values) > 2 else float("nan")
    return float(skew) if skew is not None and math.isfinite(skew) else None


def variable_distributions(frame: pd.DataFrame, spec: dict[str, Any]) -> list[dict[str, Any]]:
    """For the outcome and each numeric regressor: histograms of the values as recorded and as
    transformed (rows the transform cannot take left out and counted), with skewness of each."""
    entries = [(spec["outcome"]["column"], spec["outcome"].get("transform", "level"), "outcome")]
    if (spec.get("estimator") or "ols") == "ppml":
        entries[0] = (entries[0][0], "level", "outcome")
    entries += [(r["column"], r.get("transform", "level"), "regressor") for r in spec.get("regressors") or []]
    out = []
    for column, code, role in entries:
        if code == "category" or column not in frame.columns:
            continue
        values = _numeric(frame[column])
        if values is None:
            continue
        raw = values.dropna().to_numpy()
        raw = raw[np.isfinite(raw)]
        if raw.size < 3 or bool(np.all((raw == 0.0) | (raw == 1.0))):
            continue
        item: dict[str, Any] = {
            "column": column,
            "zeros": int((raw == 0).sum()),
            "role": role,
            "transform": code,
            "label": variable_label(column, code, role),
            "raw": _histogram(raw),
            "skew_raw": _skew(raw),
            "transformed": None,
            "skew_transformed": None,
            "n_left_out": 0,
        }
        if code not in ("level", "quadratic"):
            transform = parse_transform(code, role, column)
            bad, _ = transform.invalid(raw)
            with np.errstate(all="ignore"):
                moved = transform.forward(raw[~bad])
            moved = moved[np.isfinite(moved)]
            if moved.size >= 3:
                item.update(transformed=_histogram(moved), skew_transformed=_skew(moved), n_left_out=int(bad.sum()))
        out.append(item)
    return out


def skew_words(before: float | None, after: float | None, zeros: int = 0) -> str:
    """'skewness 3.10 → 0.05' with a word on what changed; a transform that keeps zeros leaves
    them as a spike at zero, which a skewness near 0 does not show."""
    if before is None:
        return "skewness not available"
    if after is None:
        return f"skewness {signed(before)}"
    text = f"skewness {signed(before)} → {signed(after)}"
    if abs(after) < 0.5 <= abs(before):
        text += " (the transform tamed the long tail)"
    elif abs(after) > abs(before) + 0.25:
        text += " (more skewed than before)"
    if zeros:
        text += f"; its {zeros:,} zeros stay a separate spike at 0"
    return text


def check_sentences(diagnostics: dict[str, Any], covariance: str = "HC1") -> list[tuple[bool, str]]:
    """One plain sentence per residual test, with whether it raises a concern (p < ALPHA)."""
    out: list[tuple[bool, str]] = []
    robust = covariance != "classical"
    bp = diagnostics.get("breusch_pagan") or {}
    p = bp.get("p_value")
    if p is not None and p < ALPHA:
        text = f"The spread of residuals changes with the regressors (Breusch–Pagan, Koenker form: {p_text(p)})."
        text += (
            " The robust standard errors chosen in the sidebar allow for this."
            if robust
            else " Classical standard errors assume it does not: choose robust (HC) errors in the sidebar."
        )
        out.append((True, text))
    elif p is not None:
        out.append(
            (
                False,
                f"No sign that the spread of residuals changes with the regressors (Breusch–Pagan, Koenker form: {p_text(p)}).",
            )
        )
    white = diagnostics.get("white") or {}
    p = white.get("p_value")
    if p is not None and p < ALPHA:
        out.append(
            (True, f"The spread of residuals changes with the regressors, their squares or products (White: {p_text(p)}).")
        )
    elif p is not None:
        out.append(
            (False, f"No sign that the spread changes with the regressors, their squares or products (White: {p_text(p)}).")
        )
    jb = diagnostics.get("jarque_bera") or {}
    p = jb.get("p_value")
    shape = ""
    if jb.get("skewness") is not None and jb.get("kurtosis") is not None:
        shape = f"; skewness {jb['skewness']:.2f}, kurtosis {jb['kurtosis']:.2f} where a normal curve has 0 and 3"
    if p is not None and p < ALPHA:
        out.append(
            (
                True,
                f"The residuals don't look normal (Jarque–Bera: {p_text(p)}{shape}). Coefficients and robust intervals do "
                "not need normal residuals in large samples, but the prediction interval and the normal-theory "
                "retransform lean on it; the smearing retransform does not.",
            )
        )
    elif p is not None:
        out.append((False, f"The residuals look normal (Jarque–Bera: {p_text(p)}{shape})."))
    reset = diagnostics.get("reset") or {}
    p = reset.get("p_value")
    if p is not None and p < ALPHA:
        out.append(
            (
                True,
                f"The functional form may be missing curvature (RESET: {p_text(p)}): try another transform, a quadratic "
                "term, or a regressor that is left out.",
            )
        )
    elif p is not None:
        out.append((False, f"No sign of missing curvature in the functional form (RESET: {p_text(p)})."))
    return out


def boxcox_sentence(boxcox: dict[str, Any], column: str) -> str:
    """What the Box-Cox profile suggests for the outcome, in words."""
    lam, low, high = boxcox.get("lambda"), boxcox.get("ci_low"), boxcox.get("ci_high")
    if lam is None:
        return f"The Box-Cox profile for {column} could not be computed."
    if low is None or high is None:
        return f"The best power for {column} is λ = {signed(lam)}; its 95 % interval is open on one side."
    head = f"The best power for {column} is λ = {signed(lam)} (95 % interval {signed(low)} to {signed(high)}). "

    def inside(value: float) -> bool:
        return low <= value <= high

    if inside(0) and inside(1):
        return (
            head + "Both a log (λ = 0) and levels (λ = 1) are consistent with the data; the profile cannot choose between them."
        )
    if inside(0):
        return head + f"A log of {column} (λ = 0) is consistent with the data; levels (λ = 1) are not."
    if inside(1):
        return head + f"{column} in levels (λ = 1) is consistent with the data; a log (λ = 0) is not."
    if inside(0.5):
        return head + f"Neither a log nor levels: a square root of {column} (λ = 0.5) is consistent with the data."
    if high < 0:
        return head + f"The data ask for a stronger transform than a log (λ below 0), so even log of {column} leaves some skew."
    if low > 1:
        return head + f"The data ask for a power above 1: {column} is skewed to the left, and a log would make it worse."
    side = "log" if abs(lam) < abs(lam - 1) else "levels"
    return head + f"Neither a log nor levels fits best; the best power lies between them, closer to {side}."


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


# --- predict ---------------------------------------------------------------------------------------
def predict_inputs(frame: pd.DataFrame, spec: dict[str, Any], reference: dict[str, Any]) -> list[dict[str, Any]]:
    """One input per regressor: categories and 0/1 variables pick a value, numbers are typed;
    defaults are the reference point (sample mean, most frequent level)."""
    out = []
    for reg in spec.get("regressors") or []:
        column = reg["column"]
        default = reference.get(column)
        if reg.get("transform") == "category" or _numeric(frame[column]) is None:
            counts = frame[column].dropna().value_counts()
            counts.index = counts.index.astype(str)
            options = sorted(counts.index.tolist(), key=lambda v: (-counts[v], v))
            out.append({"column": column, "kind": "choice", "options": options, "default": str(default)})
            continue
        values = _numeric(frame[column]).dropna()
        low, high = float(values.min()), float(values.max())
        if bool(values.isin((0.0, 1.0)).all()):
            out.append(
                {"column": column, "kind": "choice", "options": [0.0, 1.0], "default": 1.0 if (default or 0) >= 0.5 else 0.0}
            )
            continue
        value = round_sig(float(default if default is not None else values.mean()))
        out.append({"column": column, "kind": "number", "default": value, "step": step_for(value), "low": low, "high": high})
    return out


def predict_spec(spec: dict[str, Any], values: dict[str, Any]) -> dict[str, Any]:
    out = {k: v for k, v in spec.items() if k != "name"}
    out["predict"] = [dict(values)]
    return out


def outside_words(prediction: dict[str, Any], inputs: list[dict[str, Any]]) -> list[str]:
    """'drink_price = 8 is outside the observed 3 to 6.29' for each flagged value."""
    ranges = {i["column"]: (i.get("low"), i.get("high")) for i in inputs if i["kind"] == "number"}
    out = []
    for column in prediction.get("outside_observed_range") or []:
        value = (prediction.get("values") or {}).get(column)
        low, high = ranges.get(column, (None, None))
        where = f" (observed {compact(low)} to {compact(high)})" if low is not None and high is not None else ""
        shown = compact(float(value)) if isinstance(value, (int, float)) else str(value)
        out.append(f"{column} = {shown} is outside the values in the data{where}")
    return out


def curve_sentence(curve: dict[str, Any], outcome: str, show_naive: bool) -> str:
    """What an effect curve says, in one or two sentences."""

    def floats(key: str) -> np.ndarray:
        return np.array([np.nan if v is None else float(v) for v in curve.get(key) or []], dtype=float)

    smear, naive = floats("smearing"), floats("naive")
    column = curve["column"]
    if curve["kind"] == "levels":
        parts = [
            f"{v if not isinstance(v, float) else f'{column} = {v:g}'}: {compact(s)}"
            for v, s in zip(curve["x"], smear, strict=True)
        ]
        text = f"Expected {outcome} with the other regressors at their reference values: " + "; ".join(parts) + "."
    else:
        x = floats("x")
        low, high = float(curve["observed_min"]), float(curve["observed_max"])
        start, end = float(np.interp(low, x, smear)), float(np.interp(high, x, smear))
        change = (end / start - 1) * 100 if start else float("nan")
        move = "rises" if end > start else "falls"
        text = (
            f"Across the observed {column} ({compact(low)} to {compact(high)}), expected {outcome} {move} from "
            f"{compact(start)} to {compact(end)}"
            + (f" ({change:+.0f} %)".replace("-", "\u2212") if math.isfinite(change) else "")
            + ", the other regressors held at their reference values."
        )
    if show_naive:
        with np.errstate(invalid="ignore", divide="ignore"):
            gap = float(np.nanmean(naive / smear - 1)) * 100
        if math.isfinite(gap):
            side = "below" if gap < 0 else "above"
            text += (
                f" The naive back-transform lies on average {abs(gap):.1f} % {side} the expected value: it tracks "
                f"something closer to the median of {outcome}, not its mean."
            )
    return text
