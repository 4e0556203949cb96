"""The transform advisor: the one place for the rules that propose a model.

Two levels, both written out so that a user can read and overrule them:

- ``suggest_transform(entry)`` (in ``core.intake.column_rule``): a transform for one profiled
  column, with reasons in plain words (``core.intake.profile.profile_table`` attaches it);
- ``suggest(data, profile=None)`` and ``suggest_with_notes``: a starting model for a whole table
  — the outcome, the regressors with transform, change and reference, the estimator — with a
  note for every choice (docs/contract.md §2 for the spec it returns).

The rules are rules of thumb: common practice in applied work, no single source. The one
published point they lean on: effects of IHS and of logs with zeros depend on the units of
measurement (Aihounton & Henningsen 2021, Econometrics Journal 24(2); Chen & Roth 2024, QJE
139(2)), which is why a zero-heavy amount gets IHS with that caution attached as a regressor, and
a zero-heavy outcome starts with PPML.

How ``suggest`` builds the starting model (each step common practice, no source):
1. Columns that are not variables stay out: identifiers, dates, free text, time indices and
   calendar years, constants, categories with too many levels.
2. Columns that are exact functions of another column (to the rounding of the stored values)
   stay out, with a note naming both columns and the relation: a copy or linear rescaling, a
   log (so also the column an exp is taken of), a square root, a lag or a difference (of the
   level, of the log, or a relative change). A square of another column becomes that column's
   ``quadratic`` transform instead.
3. The outcome: the first money amount, else the first count or measurement with enough
   distinct values, else any numeric column, else a 0/1 column (a linear probability model);
   never an identifier, a year or a derived column. Positive amounts are logged; a
   non-negative amount or count with zeros starts with PPML.
4. Regressors: the remaining columns in file order, at most ``MAX_REGRESSORS``. On the rows
   the model uses (rows with a missing cell left out) it drops columns missing in most of the
   outcome's rows, columns constant there, and columns that are an exact linear combination
   of others there (for a complete set of dummies, the most frequent one, as the reference).
5. The model is fitted on that design by the fit engine and the covariance registry
   (``core.model.fitted.fit_design``, what ``core.analyze`` runs); should that still raise a
   ``FormwiseError``, the regressor it names is removed, one at a time, with a note.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from core.errors import DataError, FormwiseError
from core.inference.changes import default_change_text
from core.intake.column_rule import name_words
from core.intake.profile import profile_table
from core.model.design import ColumnCache, build_design
from core.model.engine import single_threaded_blas
from core.model.fitted import fit_design
from core.model.spec import parse_spec
from core.model.transforms import lookup

# Thresholds of the model rule (common practice, no source).
MAX_REGRESSORS = 12  # a starting model stays readable and quick; the user can add more
MAX_LEVELS = 20  # categories with more levels (or more than a tenth of the rows) stay out
OUTCOME_MIN_DISTINCT = 10  # an outcome needs this many distinct values (counts with zeros: 3)
EXACT = 1e-6  # 1 - R² below this: one column is an exact function of another, to rounding
LAG_MIN_DISTINCT = 5  # lags and differences are sought among columns this varied (not dummies)
MAX_LAG = 2  # lags sought up to this order (longer ones are lags of lags in practice)
SCREEN_ROWS = 5_000  # relations are sought on this many first rows, then confirmed on all
MIN_PRESENT = 0.5  # a regressor present in fewer of the outcome's rows than this share stays out
MIN_DF = 2  # residual degrees of freedom a starting model keeps at least
EXACT_FIT = 1e-9  # 1 - R² below this: the outcome is an exact function of the regressors
# Smallest singular value of the centred, unit-length design relative to the largest at or below
# which a column is an exact linear combination of others to the rounding of stored data (float32
# files carry about 1e-7; the fit itself refuses only at about 2e-13, core.model.ols).
COMBINATION_TOLERANCE = 1e-6
# A count of events the units produce, zero in most rows, is another outcome rather than a cause.
_EVENT_STEMS = (
    "order", "purchase", "visit", "booking", "claim", "complaint", "arrest", "accident",
    "transaction", "sold",
)  # fmt: skip
# Traits of people that are usually regressors, not outcomes: schooling and age, also of a mother,
# father or husband ('meduc', 'fatheduc', 'husage', 'age75').
_TRAIT = re.compile(r"^(m|f|mom|dad|moth|mother|fath|father|hus|wife|sp)?(educ|age)\d*$")
_NOT_BY_DEFAULT = {"time_index", "calendar_year", "constant", "empty"}  # flags of columns left out
_OUTCOME_NAMES = {1: "money amount", 2: "count or measurement", 3: "numeric column", 4: "0/1 column"}


# --- a whole table --------------------------------------------------------------------------------
Note = dict[str, Any]  # {"column": str | None, "about": str, "text": str}


@dataclass(frozen=True)
class Relation:
    """``derived`` is an exact function of ``source`` (to the rounding of the stored values)."""

    derived: str
    source: str
    how: str  # copy, rescaling, log, log10, log1p, log_affine, square, square_affine, sqrt, lag, difference, ...
    detail: str = ""

    def words(self) -> str:
        s = f"'{self.source}'"
        return {
            "copy": f"a copy of {s}",
            "rescaling": f"a linear rescaling of {s} ({self.detail})",
            "log": f"the log of {s}",
            "log10": f"the base-10 log of {s}",
            "log1p": f"the log of 1 + {s}",
            "log_affine": f"a linear function of the log of {s} ({self.detail})",
            "square": f"the square of {s}",
            "square_affine": f"a linear function of the square of {s} ({self.detail})",
            "sqrt": f"the square root of {s}",
            "lag": f"the lag of {s}" if self.detail == "1" else f"the lag {self.detail} of {s}",
            "lag_affine": f"a linear function of the lag of {s} ({self.detail})",
            "difference": f"the difference of {s} from the row before",
            "log_difference": f"the difference of the log of {s} from the row before",
            "relative_change": f"the relative change of {s} from the row before",
        }[self.how]


@dataclass
class _Table:
    """What the model rule reads of a table: each column's profile entry and, for numeric
    columns, the values as floats (NaN where missing or infinite)."""

    data: pd.DataFrame
    entries: dict[str, dict[str, Any]]
    values: dict[str, np.ndarray]
    names: list[str]
    n: int
    notes: list[Note] = field(default_factory=list)
    # The trial fits' converted and transformed columns, shared by the design checks and the fit.
    columns: ColumnCache = field(default_factory=ColumnCache)

    def note(self, column: str | None, about: str, text: str) -> None:
        self.notes.append({"column": column, "about": about, "text": text})

    def kind(self, column: str) -> str | None:
        return self.entries[column].get("kind")


def suggest(data: pd.DataFrame, profile: dict[str, Any] | None = None) -> dict[str, Any]:
    """A starting model for ``data`` as a spec dict (docs/contract.md §2); see ``suggest_with_notes``."""
    return suggest_with_notes(data, profile)[0]


def suggest_with_notes(
    data: pd.DataFrame, profile: dict[str, Any] | None = None, columns: ColumnCache | None = None
) -> tuple[dict[str, Any], list[Note]]:
    """A starting model for ``data`` and a note for each choice made.

    ``profile`` is the table's ``profile_table`` (computed here when left out). Returns
    ``(spec, notes)``: ``spec`` has ``outcome``, ``regressors`` (each with ``column``,
    ``transform``, and ``change`` or, for categories, ``reference``), ``estimator``,
    ``covariance``, ``cluster``, ``weights`` and ``at``, and ``core.analyze`` fits it; each note
    is ``{"column": name or None, "about": "outcome" | "estimator" | "left_out" | "quadratic" |
    "removed" | "limit" | "cluster" | "absorb", "text": plain words}``. Raises ``DataError`` when the
    table has fewer than two columns a model can use. ``columns``, a ``ColumnCache`` for this
    table, keeps what the trial fits convert and transform for the caller's later fits (used
    only when ``data`` has no ``attrs``: a table with them is worked on as a copy without).
    """
    if not isinstance(data, pd.DataFrame):
        raise DataError("the data must be a table (a pandas DataFrame).")
    if profile is None:
        profile = profile_table(data, [], boxcox=False)  # the advice does not read the column Box-Cox
    if data.attrs:
        # Without attrs: pandas deep-copies them (the reader's notes) into every column taken.
        data = data.copy(deep=False)
        data.attrs = {}
        columns = None
    table = _read(data, profile, columns)
    usable = _usable(table)
    candidates = [c for c in table.names if c in table.values and (table.entries[c].get("n_distinct") or 0) >= 3]
    sources = [c for c in candidates if c in usable or set(table.entries[c].get("flags") or []) & {"time_index", "calendar_year"}]
    derived = _assign(table, find_relations(table.values, sources, table.n))
    outcome, tier = _choose_outcome(table, [c for c in usable if c not in derived])
    if outcome is None:
        raise DataError(_too_few(table))
    spec = _outcome_spec(table, outcome, tier)
    pool = []
    for column in usable:
        if column == outcome:
            continue
        if column in derived:
            relation = derived[column]
            if _squares(relation) and relation.source not in derived and relation.source != outcome:
                if relation.source in usable and table.kind(relation.source) not in ("category", "binary"):
                    continue  # noted once the model's regressors are known
            table.note(column, "left_out", f"'{column}' left out: it is {relation.words()}{_whose(relation, outcome, derived)}.")
            continue
        if _another_outcome(table, column):
            share = table.entries[column]["n_zero"] / max(1, table.entries[column]["n"] - table.entries[column]["n_missing"])
            table.note(
                column,
                "left_out",
                f"'{column}' left out: it counts events of the units and is zero in most rows ({share:.0%}), so it reads as "
                "another outcome rather than a cause; to model it, make it the outcome (PPML keeps its zeros).",
            )
            continue
        pool.append(column)
    squares = {
        c: r
        for c, r in derived.items()
        if _squares(r) and r.source in pool and table.kind(r.source) not in ("category", "binary")
    }
    for column, relation in derived.items():
        if _squares(relation) and column not in squares and not any(n["column"] == column for n in table.notes):
            table.note(column, "left_out", f"'{column}' left out: it is {relation.words()}{_whose(relation, outcome, derived)}.")
    spec = _fit_or_trim(table, spec, pool, {r.source for r in squares.values()})
    used = {r["column"]: r["transform"] for r in spec["regressors"]}
    for column, relation in squares.items():
        if used.get(relation.source) == "quadratic":
            text = f"'{column}' is {relation.words()}: it enters as the quadratic term of '{relation.source}'."
            table.note(column, "quadratic", text)
        else:
            text = f"'{column}' left out: it is {relation.words()}, which is not in the starting model."
            table.note(column, "left_out", text)
    if not _panel_hint(table, data):
        _cluster_hint(table)
    return spec, table.notes


def panel_notes(data: pd.DataFrame, profile: dict[str, Any]) -> list[Note]:
    """The panel proposal alone (``_panel_hint``), for a table whose model was not suggested."""
    table = _read(data.copy(deep=False), profile)
    _panel_hint(table, data)
    return table.notes


def _squares(relation: Relation) -> bool:
    return relation.how in ("square", "square_affine")


def _read(data: pd.DataFrame, profile: dict[str, Any], columns: ColumnCache | None = None) -> _Table:
    entries = {str(e["column"]): e for e in profile.get("columns") or []}
    names = [c for c in data.columns if isinstance(c, str) and c in entries]
    values = {}
    for column in names:
        series = data[column]
        if pd.api.types.is_bool_dtype(series) or (
            pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_complex_dtype(series)
        ):
            x = series.astype(float).to_numpy(dtype=float, na_value=np.nan)
            values[column] = np.where(np.isfinite(x), x, np.nan)
    return _Table(data, entries, values, names, len(data), columns=columns if columns is not None else ColumnCache())


def _usable(table: _Table) -> list[str]:
    """Columns a starting model may use, in file order; a note for each one left out."""
    usable = []
    for column in table.names:
        e = table.entries[column]
        flags = set(e.get("flags") or [])
        reason = (e.get("reasons") or [""])[0]
        if e.get("suggested_transform") is None:
            table.note(column, "left_out", f"'{column}' left out: {reason}.")
            continue
        if flags & _NOT_BY_DEFAULT:
            table.note(column, "left_out", f"'{column}' left out: {reason}.")
            continue
        if e.get("suggested_transform") == "category":
            levels = int(e.get("n_distinct") or 0)
            if levels > min(MAX_LEVELS, max(2, table.n // 10)):
                table.note(
                    column,
                    "left_out",
                    f"'{column}' left out: its {levels} levels would add {levels - 1} coefficients to a first model; "
                    "add it in the grid (or group rare levels) to use it.",
                )
                continue
        usable.append(column)
    return usable


# --- exact relations between columns ------------------------------------------------------------
def find_relations(values: dict[str, np.ndarray], names: list[str], n: int) -> list[Relation]:
    """Every pair of ``names`` where one column is, to rounding, a copy, linear rescaling, log,
    square (root), lag or difference of the other; in the order they are to be resolved.

    A relation holds when, on the rows where both columns have values (at least 8, and nearly
    every row of the derived column), the derived column is a linear function of the
    transformed (or shifted) source with 1 - R² below ``EXACT``.
    Long tables are searched on their first ``SCREEN_ROWS`` rows (contiguous, so lags stay
    lags) and each relation found there is confirmed on every row.
    """
    if len(names) < 2:
        return []
    screen = min(n, SCREEN_ROWS)
    found = _relations_among(np.column_stack([values[c][:screen] for c in names]), names)
    if screen == n:
        return found
    confirmed = []
    for relation in found:
        pair = [relation.source, relation.derived]
        again = _relations_among(np.column_stack([values[c] for c in pair]), pair)
        if any(r.derived == relation.derived and r.source == relation.source for r in again):
            confirmed.append(relation)
    return confirmed


def _relations_among(X: np.ndarray, names: list[str]) -> list[Relation]:
    n = len(X)
    present = np.isfinite(X).sum(axis=0)
    found: list[Relation] = []
    with np.errstate(all="ignore"):
        every = _Against(X)
        for j, source in enumerate(names):
            x = X[:, j]
            forms = [
                ("identity", x),
                ("log", np.where(x > 0, np.log(x), np.nan)),
                ("log1p", np.where(x >= 0, np.log1p(x), np.nan)),  # log(1 + x), a log that keeps zeros
                ("square", x * x),
            ]
            for form, v in forms:
                r2, alpha, beta, count = every.fit(np.where(np.isfinite(v), v, np.nan))
                for i in np.flatnonzero((1.0 - r2 <= EXACT) & (count >= np.maximum(8, 0.9 * present))):
                    if i == j or (form == "identity" and i < j):
                        continue  # a copy or rescaling is named once, the later column derived
                    found.append(_name_relation(names[i], source, form, alpha[i], beta[i], X[:, i], v))
        varied = [j for j, c in enumerate(names) if len(np.unique(X[np.isfinite(X[:, j]), j])) >= LAG_MIN_DISTINCT]
        if varied:
            Xv = X[:, varied]
            against = _Against(Xv)
            wanted = np.maximum(8, 0.8 * present[varied])
            for j in varied:
                x = X[:, j]
                for k in range(1, min(MAX_LAG, n - 1) + 1):
                    shifted = np.full(n, np.nan)
                    shifted[k:] = x[:-k]
                    r2, alpha, beta, count = against.fit(shifted)
                    for i in np.flatnonzero((1.0 - r2 <= EXACT) & (count >= wanted)):
                        if varied[i] != j:
                            lag = _name_relation(names[varied[i]], names[j], "lag", alpha[i], beta[i], Xv[:, i], shifted)
                            found.append(Relation(lag.derived, lag.source, lag.how, str(k) if lag.how == "lag" else lag.detail))
                before = np.concatenate([[np.nan], x[:-1]])
                logs = np.where(x > 0, np.log(x), np.nan)
                log_before = np.concatenate([[np.nan], logs[:-1]])
                for how, d in (
                    ("difference", x - before),
                    ("log_difference", logs - log_before),
                    ("relative_change", x / before - 1.0),
                ):
                    d = np.where(np.isfinite(d), d, np.nan)
                    r2, _, _, count = against.fit(d)
                    for i in np.flatnonzero((1.0 - r2 <= EXACT) & (count >= wanted)):
                        if varied[i] != j:
                            found.append(Relation(names[varied[i]], names[j], how))
    rank = {
        "copy": 0,
        "rescaling": 0,
        "log": 1,
        "log10": 1,
        "log1p": 1,
        "log_affine": 1,
        "square": 2,
        "square_affine": 2,
        "lag": 3,
    }
    order = {c: i for i, c in enumerate(names)}
    return sorted(
        found, key=lambda r: (rank.get(r.how, 4), order[r.derived], r.detail if r.how == "lag" else "", order[r.source])
    )


class _Against:
    """Columns X prepared once for many ``fit`` calls: each is centred at its overall mean (so the
    one-pass sums below lose no precision to a large mean) with missing cells as 0, its squares,
    and where it has values."""

    def __init__(self, X: np.ndarray) -> None:
        self.present = np.isfinite(X).astype(float)
        self.centre = np.nanmean(np.where(np.isfinite(X), X, np.nan), axis=0) if len(X) else np.zeros(X.shape[1])
        self.centre = np.where(np.isfinite(self.centre), self.centre, 0.0)
        self.X = np.where(np.isfinite(X), X - self.centre, 0.0)
        self.X2 = self.X * self.X

    def fit(self, v: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """R², intercept and slope of each column on v over the rows where both have values, and
        the number of those rows; sums as vector-matrix products, no n x m temporaries."""
        has = np.isfinite(v)
        shift = float(v[has].mean()) if has.any() else 0.0
        w = np.where(has, v - shift, 0.0)
        ones = has.astype(float)
        count = ones @ self.present
        safe = np.maximum(count, 1.0)
        sx, sxx = ones @ self.X, ones @ self.X2
        sv, svv, sxv = w @ self.present, (w * w) @ self.present, w @ self.X
        var_x = sxx - sx * sx / safe
        var_v = svv - sv * sv / safe
        cov = sxv - sx * sv / safe
        # A column constant on the shared rows leaves only rounding noise in its variance.
        varies = (var_x > 1e-12 * sxx) & (var_v > 1e-12 * svv) & (count >= 3)
        r2 = np.where(varies, cov * cov / np.where(varies, var_x * var_v, 1.0), 0.0)
        r2 = np.where(np.isfinite(r2), r2, 0.0)
        beta = np.where(varies, cov / np.where(varies, var_v, 1.0), 0.0)
        alpha = (sx / safe + self.centre) - beta * (sv / safe + shift)
        return r2, alpha, beta, count


def _name_relation(derived: str, source: str, form: str, alpha: float, beta: float, y: np.ndarray, v: np.ndarray) -> Relation:
    """The relation's name: plain (y = g(x) up to the rounding of the stored values) or affine."""
    with np.errstate(all="ignore"):
        gap = np.abs(y - v)
        plain = bool(np.nanmax(gap) <= 1e-3 * max(1.0, float(np.nanmax(np.abs(y))))) if np.isfinite(gap).any() else False
    sign = "-" if beta < 0 else "+"
    formula = f"'{derived}' = {_coef(alpha)} {sign} {_coef(abs(beta))} × {{}}"
    if form == "identity":
        return (
            Relation(derived, source, "copy") if plain else Relation(derived, source, "rescaling", formula.format(f"'{source}'"))
        )
    if form == "lag":
        return (
            Relation(derived, source, "lag")
            if plain
            else Relation(derived, source, "lag_affine", formula.format(f"lag of '{source}'"))
        )
    if form == "log1p":
        if plain:
            return Relation(derived, source, "log1p")
        return Relation(derived, source, "log_affine", formula.format(f"log(1 + '{source}')"))
    if form == "log":
        if plain:
            return Relation(derived, source, "log")
        if abs(alpha) <= 1e-3 * max(1.0, abs(beta)) and abs(beta - 1 / math.log(10)) <= 1e-4:
            return Relation(derived, source, "log10")
        return Relation(derived, source, "log_affine", formula.format(f"log('{source}')"))
    if plain:
        return Relation(derived, source, "square")
    return Relation(derived, source, "square_affine", formula.format(f"'{source}'²"))


def _coef(value: float) -> str:
    return f"{value:.4g}"


def _assign(table: _Table, relations: list[Relation]) -> dict[str, Relation]:
    """Each derived column and the one relation that names it (the first found, in order),
    never making a column derived from itself through a chain. A square whose name does not
    say so (no 'sq') of a column with no negative values is read the other way round: that
    column is the square root of the other."""
    derived: dict[str, Relation] = {}

    def root(column: str) -> str:
        seen = set()
        while column in derived and column not in seen:
            seen.add(column)
            column = derived[column].source
        return column

    for relation in relations:
        if relation.how == "square":
            name = relation.derived.lower()
            named_square = "sq" in name and "sqrt" not in name
            if not named_square and bool(np.nanmin(table.values[relation.source]) >= 0):
                relation = Relation(relation.source, relation.derived, "sqrt")
        if relation.derived in derived or root(relation.source) == relation.derived:
            continue
        derived[relation.derived] = relation
    return derived


def _whose(relation: Relation, outcome: str, derived: dict[str, Relation]) -> str:
    """', the outcome' or ', itself the log of ...' after the source's name, where it helps."""
    if relation.source == outcome:
        return ", the outcome"
    if relation.source in derived:
        return f", itself {derived[relation.source].words()}"
    return ""


# --- the outcome ----------------------------------------------------------------------------------
def _tier(e: dict[str, Any]) -> int | None:
    """1 money amount, 2 count or measurement, 3 other numeric, 4 a 0/1 column; None: never."""
    kind, distinct = e.get("kind"), int(e.get("n_distinct") or 0)
    if kind == "binary":
        return 4
    if any(_TRAIT.match(w) for w in name_words(str(e.get("column")))) and distinct >= 3:
        return 3
    if kind == "money" and distinct >= OUTCOME_MIN_DISTINCT:
        return 1
    if kind in ("count", "continuous") and (
        distinct >= OUTCOME_MIN_DISTINCT or (kind == "count" and e.get("min") == 0 and distinct >= 3)
    ):
        return 2
    if kind in ("money", "count", "continuous", "share", "percent", "duration_years") and distinct >= 3:
        return 3
    return None


def _choose_outcome(table: _Table, usable: list[str]) -> tuple[str | None, int]:
    """The first column of the best tier (file order breaks ties)."""
    ranked = [(tier, i, c) for i, c in enumerate(usable) if c in table.values and (tier := _tier(table.entries[c]))]
    if not ranked:
        return None, 0
    tier, _, column = min(ranked)
    return column, tier


def _outcome_spec(table: _Table, outcome: str, tier: int) -> dict[str, Any]:
    """The spec's frame with the outcome, its transform and the estimator, and their notes."""
    e = table.entries[outcome]
    why = {
        1: "the first money amount in the table",
        2: "the first count or measurement in the table with enough distinct values to explain "
        "(no money amount is present; identifiers, years, dummies and traits such as age or schooling "
        "are not outcomes by default)",
        3: "the first numeric column that varies enough (the table has no money amount and no count "
        "or measurement with many distinct values)",
        4: "a 0/1 column, as the table has no amount, count or measurement to explain: "
        "least squares on it is a linear probability model (effects are changes in the probability)",
    }[tier]
    y = table.values[outcome]
    y = y[np.isfinite(y)]
    low = float(y.min())
    suggested = e.get("suggested_transform")
    transform, estimator = "level", "ols"
    if low > 0 and suggested == "log":
        transform = "log"
    elif low == 0 and tier in (1, 2, 3) and (e.get("kind") in ("money", "count") or suggested == "ihs"):
        estimator = "ppml"
    reason = (e.get("reasons") or [""])[0]
    how = {"log": "in logs", "level": "in levels"}[transform]
    missing = int(e.get("n_missing") or 0)
    gaps = f" It is missing in {missing:,} rows, which the model leaves out." if missing else ""
    table.note(outcome, "outcome", f"'{outcome}' is the outcome: {why}; {how} — {reason}.{gaps}")
    if estimator == "ppml":
        zeros = int(e.get("n_zero") or 0)
        share = zeros / max(1, len(y))
        table.note(
            outcome,
            "estimator",
            f"'{outcome}' is zero in {zeros:,} rows ({share:.0%}): the model starts with PPML (estimator 'ppml', "
            "outcome in levels), which keeps those rows and reads like a log model; a log would drop them, "
            "and IHS would keep them but its effects depend on the units of the outcome.",
        )
    return {
        "outcome": {"column": outcome, "transform": transform},
        "regressors": [],
        "estimator": estimator,
        "covariance": "HC1",
        "cluster": None,
        "weights": None,
        "at": {},
    }


def _another_outcome(table: _Table, column: str) -> bool:
    e = table.entries[column]
    if e.get("kind") != "count" or not e.get("n_zero"):
        return False
    share = e["n_zero"] / max(1, e["n"] - e["n_missing"])
    return share > 0.5 and any(w.startswith(stem) for w in name_words(column) for stem in _EVENT_STEMS)


def _too_few(table: _Table, outcome: str | None = None) -> str:
    """One message for a table with fewer than two usable columns, naming why the others are out
    (exact relations first: they are the least obvious)."""
    out = [n["text"] for n in table.notes if n["about"] in ("left_out", "removed")]
    out.sort(key=lambda text: " it is " not in text)
    shown = " ".join(out[:3]) + (f" ({len(out) - 3} more left out.)" if len(out) > 3 else "")
    first = (
        f"besides the outcome '{outcome}', no column is left to explain it"
        if outcome
        else "no column holds an amount, count, measurement or 0/1 value to explain"
    )
    return (
        f"the table has fewer than two columns a model can use ({len(table.names)} read): {first}. {shown} "
        "Check the file, or pick the sheet that holds the data."
    ).replace("  ", " ")


# --- regressors, on the rows the model uses -------------------------------------------------------
Removal = tuple[str, str, str]  # (column, note text, note about)


def _fit_or_trim(table: _Table, spec: dict[str, Any], pool: list[str], quadratic: set[str]) -> dict[str, Any]:
    """The regressors from ``pool`` (file order, at most ``MAX_REGRESSORS``) that the model can
    use on its rows, with changes and references, and a fit that succeeds."""
    outcome = spec["outcome"]["column"]
    order = {c: i for i, c in enumerate(table.names)}
    removed: set[str] = set()
    for _ in range(2 * len(pool) + 5):
        # A column whose square the file carries was modelled as a quadratic by whoever made the
        # file: it takes a place first; the rest go in file order.
        kept = [c for c in pool if c not in removed]
        first = set(sorted(kept, key=lambda c: (c not in quadratic, order[c]))[:MAX_REGRESSORS])
        active = [c for c in kept if c in first]
        if not active:
            break
        problems = _row_problems(table, spec, active, order)
        if not problems:
            spec, full, problems = _fit_problems(table, spec, active, quadratic, order)
            if full is not None:
                rest = [c for c in kept if c not in first]
                if rest:
                    shown = ", ".join(f"'{c}'" for c in rest[:8]) + (", ..." if len(rest) > 8 else "")
                    text = f"a first model takes at most {MAX_REGRESSORS} regressors; also usable: {shown}; add them in the grid."
                    table.note(None, "limit", text)
                return full
        for column, text, about in problems:
            removed.add(column)
            table.note(column, about, text)
    raise DataError(_too_few(table, outcome))


def _row_problems(table: _Table, spec: dict[str, Any], active: list[str], order: dict[str, int]) -> list[Removal]:
    """Regressors to leave out for the rows the model would use: those missing in most of the
    outcome's rows, the one missing most when together they leave too few, constants there."""
    data, outcome = table.data, spec["outcome"]["column"]
    y = table.values[outcome]
    y_rows = np.isfinite(y) & ((y > 0) if spec["outcome"]["transform"] == "log" else True)
    n_y = int(y_rows.sum())
    present = {c: data[c].notna().to_numpy() if c not in table.values else np.isfinite(table.values[c]) for c in active}
    sparse = [
        (
            c,
            f"'{c}' left out: it has a value in only {float(present[c][y_rows].mean()):.0%} of the rows where '{outcome}' "
            "has one; using it would drop the others.",
            "left_out",
        )
        for c in active
        if present[c][y_rows].mean() < MIN_PRESENT
    ]
    if sparse:
        return sparse
    complete = y_rows & np.logical_and.reduce([present[c] for c in active])
    if complete.sum() < MIN_PRESENT * n_y:
        worst = max(active, key=lambda c: (int((~present[c] & y_rows).sum()), order[c]))
        missing = int((~present[worst] & y_rows).sum())
        text = (
            f"'{worst}' left out: rows with a missing cell would leave only {int(complete.sum()):,} of the {n_y:,} rows "
            f"where '{outcome}' has a value; '{worst}' is missing in {missing:,} of them, more than any other regressor."
        )
        return [(worst, text, "left_out")]
    return [
        (
            c,
            f"'{c}' left out: it has the same value{_value(table, c, complete)} in every row the model uses "
            "(rows with a missing cell in the model's columns left out), so it cannot explain anything there.",
            "left_out",
        )
        for c in active
        if _levels(table, c, complete) < 2
    ]


def _fit_problems(
    table: _Table, spec: dict[str, Any], active: list[str], quadratic: set[str], order: dict[str, int]
) -> tuple[dict[str, Any], dict[str, Any] | None, list[Removal]]:
    """Build the design and fit it: ``(spec, full spec, [])`` when the fit succeeds, else the
    regressor to remove, or (PPML failing) the spec switched to least squares and no removal."""
    data, outcome = table.data, spec["outcome"]["column"]

    def transform_of(column: str) -> str:
        return "quadratic" if column in quadratic else str(table.entries[column]["suggested_transform"])

    def named(exc: FormwiseError) -> list[Removal]:
        column = _offender(str(exc), active, order, table) or active[-1]
        return [(column, f"'{column}' removed from the starting model: {exc}", "removed")]

    trial = dict(spec, regressors=[{"column": c, "transform": transform_of(c)} for c in active])
    try:
        design = build_design(data, parse_spec(trial, data), table.columns)
    except FormwiseError as exc:
        return spec, None, named(exc)
    dependent = _dependent(design, order)
    if dependent:
        return spec, None, [(*dependent, "left_out")]
    n, k = design.X.shape
    if n - k < MIN_DF:
        widest = max(design.encoder.blocks, key=lambda b: (b.stop - b.start, order[b.spec.column]))
        column = widest.spec.column if widest.stop - widest.start > 1 else active[-1]
        text = f"'{column}' left out: the model would have {k} coefficients for {n} rows, too few to estimate them."
        return spec, None, [(column, text, "left_out")]
    full = dict(spec, regressors=_entries(table, design))
    try:
        # On the design just built: the full spec adds only the changes and the references the
        # design chose, so its design is this one (a second build cost 0.2 s at 1,000,000 rows).
        with single_threaded_blas:
            fit = fit_design(design, parse_spec(full, data))[1]
    except FormwiseError as exc:
        if full["estimator"] == "ppml" and "PPML" in str(exc):
            fallback = "ihs" if table.entries[outcome].get("suggested_transform") == "ihs" else "level"
            text = f"PPML could not be fitted ({exc}); the model uses least squares with '{outcome}' in {fallback} instead."
            table.note(outcome, "estimator", text)
            return dict(spec, estimator="ols", outcome={"column": outcome, "transform": fallback}), None, []
        return spec, None, named(exc)
    if full["estimator"] == "ols" and (fit.r2 if math.isfinite(fit.r2) else 0.0) > 1.0 - EXACT_FIT:
        text = (
            f"'{active[-1]}' left out: with it the regressors reproduce '{outcome}' exactly (R² = 1 to rounding), so the "
            "outcome is a function of them rather than something they explain."
        )
        return spec, None, [(active[-1], text, "left_out")]
    return spec, full, []


def _levels(table: _Table, column: str, rows: np.ndarray) -> int:
    """Distinct values of ``column`` on ``rows`` (0, 1 or 2: only whether it varies matters)."""
    if column in table.values:
        x = table.values[column][rows]
        return 0 if len(x) == 0 else (1 if np.ptp(x) == 0 else 2)
    return min(2, int(table.data[column][rows].astype(str).nunique()))


def _value(table: _Table, column: str, rows: np.ndarray) -> str:
    if not rows.any():
        return ""
    first = table.data[column].to_numpy()[np.flatnonzero(rows)[0]]
    return f" ({first:g})" if isinstance(first, (int, float, np.number)) and not isinstance(first, bool) else f" ('{first}')"


def _entries(table: _Table, design: Any) -> list[dict[str, Any]]:
    """Spec entries of the design's regressors: a change from their values on the rows used
    (``core.inference.changes``), the design's reference level for categories."""
    entries = []
    for block in design.encoder.blocks:
        column = block.spec.column
        entry: dict[str, Any] = {"column": column, "transform": block.spec.transform.code}
        if block.is_category:
            entry["reference"] = block.reference_level
        else:
            transform = lookup(block.spec.transform.code)
            relative = bool(getattr(transform, "relative_change", False))
            entry["change"] = default_change_text(design.values[column], relative, table.kind(column), block.binary)
        entries.append(entry)
    return entries


def _offender(message: str, active: list[str], order: dict[str, int], table: _Table) -> str | None:
    """The regressor an error message names (the last in file order; numeric before categories)."""
    named = [c for c in active if f"'{c}'" in message]
    if not named and "collinear" in message and ": " in message:
        labels = [label.strip() for label in message.split(": ", 1)[1].split(". ")[0].split(",")]
        named = [
            c
            for c in active
            if any(lb == c or lb == f"{c}^2" or lb.startswith(f"{c}[") or lb.endswith(f"({c})") for lb in labels)
        ]
    if not named:
        return None
    return max(named, key=lambda c: (table.entries[c].get("suggested_transform") != "category", order[c]))


def _dependent(design: Any, order: dict[str, int]) -> tuple[str, str] | None:
    """A regressor that is an exact linear combination of others on the rows used, and why.

    The test reads the smallest eigenvalue of the Gram matrix of the centred, unit-length design
    columns (the squared singular values; ``COMBINATION_TOLERANCE``). For a complete set of dummies the most frequent one is
    left out, as the reference; otherwise the last column in file order among those involved.
    """
    X = design.X
    n, k = X.shape
    if k <= 2:
        return None
    means = X[:, 1:].mean(axis=0)
    gram = np.zeros((k - 1, k - 1))
    for start in range(0, n, 65_536):
        chunk = X[start : start + 65_536, 1:] - means
        gram += chunk.T @ chunk
    scale = np.sqrt(np.diag(gram)).copy()
    scale[scale == 0] = 1.0
    gram = gram / scale[:, None] / scale[None, :]
    values, vectors = np.linalg.eigh(gram)
    if values.min() > COMBINATION_TOLERANCE**2 * values.max():
        return None
    vector = np.abs(vectors[:, int(np.argmin(values))])
    columns = set((np.flatnonzero(vector > 0.1 * vector.max()) + 1).tolist())
    blocks = [b for b in design.encoder.blocks if columns & set(range(b.start, b.stop))]
    names = [b.spec.column for b in blocks]
    if len(blocks) >= 2 and all(b.binary for b in blocks):
        total = np.sum([design.values[c] for c in names], axis=0)
        if np.all(total == 1.0):
            counts = {c: float(design.values[c].sum()) for c in names}
            reference = max(names, key=lambda c: (counts[c], -order[c]))
            listed = ", ".join(f"'{c}'" for c in names)
            return reference, (
                f"'{reference}' left out as the reference: {listed} are a complete set of dummies (every row used has "
                f"exactly one of them), so one must go; '{reference}' is the most frequent."
            )
    column = max(names, key=lambda c: (not design.encoder.block(c).is_category, order[c]))
    others = [f"'{c}'" for c in names if c != column]
    if not others and design.encoder.block(column).stop - design.encoder.block(column).start > 1:
        return (
            column,
            f"'{column}' left out: on the rows the model uses its design columns are collinear (too few distinct values).",
        )
    if not others:
        return column, (
            f"'{column}' left out: on the rows the model uses its values cannot be told apart from a constant "
            "(their spread is below the rounding of the numbers)."
        )
    return (
        column,
        f"'{column}' left out: on the rows the model uses it is an exact linear combination of {', '.join(others)} and the constant.",
    )


# A table is read as a panel when an identifier repeats over a time column and almost every
# (identifier, period) pair is met once (common practice, no source).
PANEL_UNIQUE_SHARE = 0.95


def _panel_hint(table: _Table, data: pd.DataFrame) -> bool:
    """Propose absorbing an identifier that repeats over a time column (a panel) and clustering
    by it; True when proposed (the plain cluster hint is then said with it)."""
    times = [c for c in table.names if set(table.entries[c].get("flags") or []) & {"time_index", "calendar_year"}]
    times += [c for c in table.names if table.entries[c].get("kind") == "date" and c not in times]
    for column in table.names:
        e = table.entries[column]
        groups = int(e.get("n_distinct") or 0)
        present = int(e.get("n", 0)) - int(e.get("n_missing") or 0)
        if e.get("kind") != "identifier" or not 2 <= groups <= present // 2:
            continue
        for time in times:
            pairs = data[[column, time]].dropna()
            if len(pairs) and 1 - pairs.duplicated().mean() >= PANEL_UNIQUE_SHARE:
                periods = int(pairs[time].nunique())
                table.note(
                    column,
                    "absorb",
                    f"'{column}' repeats over '{time}' ({groups:,} units, {periods:,} periods): a panel. To compare each "
                    f"{column} with itself over time, absorb '{column}' (role 'absorb': a fixed effect per level) and "
                    f"cluster the standard errors by '{column}'.",
                )
                return True
    return False


def _cluster_hint(table: _Table) -> None:
    """Name an identifier that groups the rows, for clustered standard errors."""
    for column in table.names:
        e = table.entries[column]
        groups = int(e.get("n_distinct") or 0)
        present = int(e.get("n", 0)) - int(e.get("n_missing") or 0)
        if e.get("kind") == "identifier" and 2 <= groups <= present // 2:
            table.note(
                column,
                "cluster",
                f"'{column}' groups the rows ({groups:,} groups): for standard errors clustered by it, "
                f"set covariance to 'cluster' with cluster '{column}'.",
            )
            return
