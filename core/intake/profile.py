"""Column profiles (docs/contract.md §4 ``profile``): what each column holds, before any advice.

``profile_table(frame, notes)`` describes every column — its kind, missing values, zeros,
negatives, range, skewness before and after a log or IHS, a small histogram, the Box-Cox λ of
the column alone — and adds the advisor's transform with reasons in plain words
(``core.intake.column_rule.suggest_transform``, re-exported here).

Kinds come from the values and the column name together: the name says what a number means
(a price, an age), the values say what a transform can do with it (zeros, negatives, skew).
Skewness and Box-Cox come from scipy (``scipy.stats.skew``, ``scipy.stats.boxcox``).
"""

from __future__ import annotations

import math
import os
import re
import warnings
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from core.inference.shape import skewness
from core.intake.column_rule import name_words, suggest_transform
from core.intake.reader import ATTRS_KEY

KINDS = ("money", "count", "duration_years", "share", "percent", "binary", "category", "continuous", "identifier", "date", "text")
HISTOGRAM_BINS = 20
# Thresholds of the column kinds (common practice, no source); the advisor's own are in advisor.py.
CATEGORY_MAX_LEVELS = 50  # more distinct text values than this (and not unique) reads as free text
IDENTIFIER_MIN_DISTINCT = 20  # a column named like an id with more distinct values is an identifier
DATE_SHARE = 0.9  # share of distinct text values that must look like dates
PARALLEL_MIN_ROWS = 100_000  # a shorter table profiles faster on one thread than it takes to start two
BOXCOX_SAMPLE = 5_000  # Box-Cox λ of a long column from this many evenly spaced quantiles

# Name words, matched against the column name split at non-letters and camelCase.
_MONEY_STEMS = (
    "price", "revenue", "cost", "spend", "spent", "income", "wage", "salar", "amount", "sales",
    "expend", "expense", "earn", "fare", "profit", "payment", "budget", "turnover", "dollar", "euro",
    "wealth", "asset", "debt", "loan", "prix", "preis", "precio", "ventes", "umsatz", "kosten",
)  # fmt: skip
_MONEY_WORDS = {"pay", "fee", "fees", "tax", "taxes", "rent", "usd", "eur", "gbp", "gdp"}
_CURRENCY_MARKS = ("$", "€", "£", "¥", "₹")
_DURATION_WORDS = {"years", "yrs", "age", "tenure", "duration", "experience", "exper", "seniority"}
_TIME_WORDS = {"week", "wk", "month", "quarter", "qtr", "period", "day", "t", "time", "year", "yr"}
_TIME_FILLER = {"no", "nr", "num", "number", "index", "idx", "of"}
_ID_WORDS = {
    "id", "ids", "identifier", "code", "key", "uuid", "guid", "sku", "zip", "zipcode", "postcode",
    "fips", "isbn", "ssn", "phone", "index", "idx", "row", "rowid",
}  # fmt: skip
# Units that identifiers number: 'distid', 'schid', 'countyid'; and words naming the group itself.
_ID_STEMS = {"dist", "sch", "school", "study", "county", "state", "firm", "person", "house", "hh", "int", "cust", "user", "store", "emp", "student", "fam", "ind", "case", "group", "team", "p", "u"}  # fmt: skip
_GROUP_WORDS = {"county", "state", "district", "nr", "puma", "team", "case", "firm", "school", "country", "city"}
_SHARE_WORDS = {"share", "shr", "ratio", "fraction", "frac", "prop", "proportion", "rate"}
_PERCENT_WORDS = {"pct", "percent", "percentage", "perc"}
_MONTHS = r"(?:jan|feb|mar|apr|may|jun|jul|aug|sep|sept|oct|nov|dec)[a-z]*\.?"
_DATE_PATTERNS = {
    "iso": re.compile(r"\d{4}-\d{1,2}-\d{1,2}(?:[ T]\d{1,2}:\d{2}(?::\d{2}(?:\.\d+)?)?)?(?:Z|[+-]\d{2}:?\d{2})?"),
    "ymd": re.compile(r"\d{4}/\d{1,2}/\d{1,2}"),
    "month": re.compile(r"\d{4}-\d{2}"),
    "slashed": re.compile(r"(\d{1,2})[/.-](\d{1,2})[/.-](\d{4}|\d{2})(?: \d{1,2}:\d{2}(?::\d{2})?)?"),
    "named": re.compile(rf"(?i)(?:\d{{1,2}}[ -]{_MONTHS}[ -]\d{{2,4}}|{_MONTHS} \d{{1,2}},? \d{{4}})"),
}


# --- the table ----------------------------------------------------------------------------------
def profile_table(frame: pd.DataFrame, notes: list[str] | None = None, boxcox: bool = True) -> dict[str, Any]:
    """Profile every column and suggest a transform for each; plain JSON-able data.

    ``notes`` are the reader's intake notes (``read_table_with_notes``); when left out, the
    notes the reader stored on the frame are used. ``boxcox=False`` leaves each column's Box-Cox
    λ out (None): scipy's search costs about 30 to 70 ms a column, and the advisor does not
    read it.
    """
    intake = frame.attrs.get(ATTRS_KEY) or {}
    facts = intake.get("columns") or {}
    if notes is None:
        notes = list(intake.get("notes") or [])
    bare = _without_attrs(frame)

    def one(position: int) -> dict[str, Any]:
        column = bare.columns[position]
        entry = profile_column(bare.iloc[:, position], str(column), facts.get(column) or {}, boxcox)
        entry["suggested_transform"], entry["reasons"] = suggest_transform(entry)
        return _strict(entry)

    positions = range(bare.shape[1])
    if len(bare) < PARALLEL_MIN_ROWS or bare.shape[1] < 2:
        columns = [one(p) for p in positions]
    else:
        # numpy's sorts and reductions release the GIL: long columns profile on every core.
        with ThreadPoolExecutor(max_workers=min(bare.shape[1], os.cpu_count() or 1)) as pool:
            columns = list(pool.map(one, positions))
    return {"intake": [str(n) for n in notes], "n_rows": int(len(frame)), "columns": columns}


def _without_attrs(frame: pd.DataFrame) -> pd.DataFrame:
    """A shallow copy without ``attrs``: pandas deep-copies a frame's attrs (here the reader's
    notes on every cell it converted) into every column taken from it, which on a wide table
    cost more than the profile itself."""
    bare = frame.copy(deep=False)
    bare.attrs = {}
    return bare


def _strict(value: Any) -> Any:
    """NaN and infinities become None, so the profile is strict JSON (docs/contract.md §1)."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _strict(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_strict(v) for v in value]
    return value


# --- one column ---------------------------------------------------------------------------------
def profile_column(series: pd.Series, column: str, facts: dict[str, Any] | None = None, boxcox: bool = True) -> dict[str, Any]:
    """Kind, counts, range, skewness and histogram of one column (no advice yet)."""
    facts = facts or {}
    entry: dict[str, Any] = {
        "column": column,
        "kind": "text",
        "n": int(len(series)),
        "n_missing": int(series.isna().sum()),
        "n_distinct": 0,
        "n_zero": 0,
        "n_negative": 0,
        "n_infinite": 0,
        "min": None,
        "median": None,
        "max": None,
        "median_positive": None,
        "skewness": None,
        "skewness_log": None,
        "skewness_ihs": None,
        "log_would_drop": 0,
        "histogram": None,
        "boxcox": None,
        "flags": [],
        "top_values": [],
    }
    if pd.api.types.is_bool_dtype(series) or (
        pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_complex_dtype(series)
    ):
        _numeric_profile(entry, series.astype(float).to_numpy(dtype=float, na_value=np.nan), column, facts, boxcox)
    elif pd.api.types.is_datetime64_any_dtype(series):
        stamps = series.dropna()
        entry["kind"] = "date"
        entry["n_distinct"] = int(stamps.nunique())
        if len(stamps):
            entry["first"], entry["last"] = str(stamps.min().date()), str(stamps.max().date())
    else:
        _text_profile(entry, series, column, facts)
    return entry


def _numeric_profile(entry: dict[str, Any], values: np.ndarray, column: str, facts: dict[str, Any], boxcox: bool) -> None:
    finite = values[np.isfinite(values)]
    entry["n_infinite"] = int(np.isinf(values).sum())
    entry["kind"] = "continuous"
    if len(finite) == 0:
        entry["flags"].append("empty")
        return
    # One sort answers the distinct values, the counts at zero, the medians and the range; on a
    # long column it is most of the profile's cost, so it is done once.
    ordered = np.sort(finite)
    starts = np.flatnonzero(np.r_[True, ordered[1:] != ordered[:-1]])
    distinct = ordered[starts]
    first_zero, past_zero = np.searchsorted(ordered, 0.0, side="left"), np.searchsorted(ordered, 0.0, side="right")
    entry["n_distinct"] = int(len(distinct))
    entry["n_zero"] = int(past_zero - first_zero)
    entry["n_negative"] = int(first_zero)
    entry["log_would_drop"] = int(past_zero)
    positive = ordered[past_zero:]
    with np.errstate(all="ignore"):  # the median of two values near the float limit overflows
        entry["min"], entry["median"], entry["max"] = float(ordered[0]), _sorted_median(ordered), float(ordered[-1])
        entry["median_positive"] = _sorted_median(positive) if len(positive) else None
    entry["skewness"] = skewness(finite)
    entry["skewness_log"] = skewness(np.log(positive)) if len(positive) >= 3 else None
    entry["skewness_ihs"] = skewness(np.arcsinh(finite))
    entry["histogram"] = _histogram(ordered)
    if len(distinct) <= 10:
        freq = np.diff(np.r_[starts, len(ordered)])
        order = np.argsort(-freq, kind="stable")[:10]
        entry["top_values"] = [{"value": _plain(float(distinct[i])), "count": int(freq[i])} for i in order]
    entry["kind"], flags = _numeric_kind(finite, distinct, column, facts, len(finite))
    entry["flags"].extend(flags)
    if boxcox and boxcox_applies(entry):
        entry["boxcox"] = _boxcox(ordered)


def boxcox_applies(entry: dict[str, Any]) -> bool:
    """Whether a profiled column gets a Box-Cox λ: an amount or measure, above zero, not two-valued."""
    return (
        entry.get("kind") in ("money", "count", "continuous", "share", "percent", "duration_years")
        and (entry.get("n_distinct") or 0) >= 3
        and entry.get("min") is not None
        and entry["min"] > 0
    )


def column_boxcox(entry: dict[str, Any], series: pd.Series) -> dict[str, Any] | None:
    """The Box-Cox λ of a column profiled with ``boxcox=False`` (as ``profile_table`` would give it):
    the app works it out only for the column it shows, not for every column of a long upload."""
    if not boxcox_applies(entry):
        return None
    values = series.astype(float).to_numpy(dtype=float, na_value=np.nan)
    return _boxcox(np.sort(values[np.isfinite(values)]))


def _sorted_median(ordered: np.ndarray) -> float:
    """The median of values already in ascending order (as ``np.median``: the mean of the middle two)."""
    n = len(ordered)
    return float(np.mean(ordered[[(n - 1) // 2, n // 2]]))


def _numeric_kind(
    finite: np.ndarray, distinct: np.ndarray, column: str, facts: dict[str, Any], n_values: int
) -> tuple[str, list[str]]:
    words = name_words(column)
    lo, hi = float(distinct[0]), float(distinct[-1])
    integer = bool(np.all(distinct == np.round(distinct)))
    flags: list[str] = []
    if len(distinct) == 1:
        flags.append("constant")
    if len(distinct) <= 2 and set(distinct.tolist()) <= {0.0, 1.0}:
        return "binary", flags
    if integer and words & {"year", "yr", "years"} and 1800 <= lo and hi <= 2200:
        return "continuous", [*flags, "calendar_year"]
    if integer and words and words <= _TIME_WORDS | _TIME_FILLER and words & _TIME_WORDS:
        return ("count" if lo >= 0 else "continuous"), [*flags, "time_index"]
    if words & {"date", "dates"}:
        return ("count" if integer and lo >= 0 else "continuous"), [*flags, "time_index"]  # e.g. 1947.01
    if integer and _id_name(words):
        unique_rows = len(distinct) == n_values
        if unique_rows or len(distinct) > IDENTIFIER_MIN_DISTINCT:
            return "identifier", flags
        if len(distinct) >= 3 and not words & _ID_WORDS:
            return "category", [*flags, "group_codes"]  # a few numbered groups: labels, not amounts
    if (
        integer
        and re.fullmatch(r"column_\d+|unnamed: ?\d+", column.lower())
        and len(distinct) == n_values
        and hi - lo == n_values - 1
    ):
        return "identifier", [*flags, "row_number"]  # a saved row index, e.g. from pandas' to_csv
    if facts.get("percent"):
        return "percent", [*flags, "percent_strings"]
    if words & _PERCENT_WORDS or "%" in column:
        return "percent", flags
    if words & _SHARE_WORDS and lo >= 0:
        if hi <= 1:
            return "share", flags
        if hi <= 100:
            return "percent", flags
    if facts.get("currency") or _money_name(column, words):
        return "money", [*flags, "currency_symbols"] if facts.get("currency") else flags
    if words & _DURATION_WORDS and lo >= 0 and hi <= 100:
        return "duration_years", flags
    if lo >= 0 and hi <= 1 and not integer:
        return "share", flags
    if integer and lo >= 0 and len(distinct) >= 3:
        return "count", flags
    if integer and len(distinct) == 2:
        return "category", [*flags, "numeric_codes"]
    return "continuous", flags


def _text_profile(entry: dict[str, Any], series: pd.Series, column: str, facts: dict[str, Any]) -> None:
    present = series.dropna()
    texts = present.astype(str).str.strip() if len(present) else present.astype(object)
    counts = texts.value_counts(sort=True)
    entry["n_distinct"] = int(len(counts))
    entry["top_values"] = [{"value": str(v), "count": int(c)} for v, c in counts.head(10).items()]
    if len(texts) == 0:
        entry["flags"].append("empty")
        return
    numeric = pd.to_numeric(pd.Series(counts.index), errors="coerce")
    numeric_share = float((numeric.notna().to_numpy() * counts.to_numpy()).sum() / counts.sum())
    if facts.get("mixed_rows") or numeric_share >= 0.5:
        entry["kind"] = "text"
        entry["flags"].append("mixed_text")
        entry["text_rows"] = list(facts.get("mixed_rows") or [])
        return
    date = _date_format([str(v) for v in counts.index[:5000]])
    if date:
        entry["kind"] = "date"
        entry["flags"].append(f"date_{date[0]}")
        entry["first"], entry["last"] = date[1], date[2]
        return
    words = name_words(column)
    n_values = int(counts.sum())
    if len(counts) == n_values and n_values >= 3:
        entry["kind"] = "identifier"
    elif words & _ID_WORDS and len(counts) > IDENTIFIER_MIN_DISTINCT:
        entry["kind"] = "identifier"
    elif len(counts) == 1:
        entry["kind"] = "category"
        entry["flags"].append("constant")
    elif len(counts) <= CATEGORY_MAX_LEVELS or len(counts) <= 0.05 * n_values:
        entry["kind"] = "category"
    else:
        entry["kind"] = "text"
        entry["flags"].append("free_text")


def _date_format(values: list[str]) -> tuple[str, str | None, str | None] | None:
    """('iso' | 'day_first' | 'month_first' | ..., first, last) when the values are dates."""
    if not values:
        return None
    hits: dict[str, int] = {}
    day_first = month_first = False
    for value in values:
        for label, pattern in _DATE_PATTERNS.items():
            match = pattern.fullmatch(value)
            if match:
                hits[label] = hits.get(label, 0) + 1
                if label == "slashed":
                    a, b = int(match.group(1)), int(match.group(2))
                    day_first |= a > 12
                    month_first |= b > 12
                break
    if not hits or sum(hits.values()) < DATE_SHARE * len(values):
        return None
    label = max(hits, key=lambda k: hits[k])
    if label == "slashed":
        if day_first and month_first:
            return None  # 31/01 and 01/31 together: not one date format
        label = "day_first" if day_first else "month_first" if month_first else "day_or_month_first"
    parsed = _parse_dates(values, label)
    if parsed is None or parsed.notna().sum() == 0:
        return label, None, None
    return label, str(parsed.min().date()), str(parsed.max().date())


def _parse_dates(values: list[str], label: str) -> pd.Series | None:
    text = pd.Series(values, dtype=object)
    try:
        if label in ("iso", "ymd", "month"):
            return pd.to_datetime(text.str.replace("/", "-", regex=False), errors="coerce", format="ISO8601")
        if label in ("day_first", "month_first", "day_or_month_first"):
            order = "%m/%d" if label == "month_first" else "%d/%m"
            unified = text.str.replace(r"[.-]", "/", regex=True).str.split(" ").str[0]
            long_year = pd.to_datetime(unified, errors="coerce", format=f"{order}/%Y")
            short_year = pd.to_datetime(unified, errors="coerce", format=f"{order}/%y")
            return long_year.fillna(short_year)
        return pd.to_datetime(text, errors="coerce", format="mixed")
    except (ValueError, TypeError, OverflowError):
        return None


# --- small helpers ------------------------------------------------------------------------------
def _id_name(words: set[str]) -> bool:
    """Whether the name reads as an identifier or a group code: 'id', 'distid', 'dcode', 'county'."""
    if words & (_ID_WORDS | _GROUP_WORDS):
        return True
    for word in words:
        if len(word) > 4 and word.endswith(("code", "fips")):
            return True
        if word.endswith("id") and word[:-2] in _ID_STEMS:
            return True
    return False


def _money_name(column: str, words: set[str]) -> bool:
    if any(mark in column for mark in _CURRENCY_MARKS) or words & _MONEY_WORDS:
        return True
    return any(w.startswith(stem) for w in words for stem in _MONEY_STEMS)


def _histogram(ordered: np.ndarray) -> dict[str, list[float] | list[int]] | None:
    """Twenty equal bins over the finite values, given in ascending order: numpy.histogram's
    edges and counts (bins closed on the left, the last also on the right), the counts read off
    the order by binary search instead of a pass over every value. None when the range
    overflows a float."""
    try:
        with np.errstate(all="ignore"):
            edges = np.histogram_bin_edges(ordered[[0, -1]], bins=HISTOGRAM_BINS)
    except ValueError:
        return None
    if not np.isfinite(edges).all():
        return None
    counts = np.diff(np.r_[0, np.searchsorted(ordered, edges[1:-1], side="left"), len(ordered)])
    return {"edges": [float(e) for e in edges], "counts": [int(c) for c in counts]}


def _boxcox(values: np.ndarray) -> dict[str, Any] | None:
    """Box-Cox λ of the column alone (no regressors) with its 95 % profile-likelihood interval,
    from ``scipy.stats.boxcox`` (maximum likelihood); None when scipy finds no λ or |λ| >= 10.

    A long column is represented by BOXCOX_SAMPLE evenly spaced order statistics, so λ̂ keeps
    its value while the interval is that of the smaller sample (wider, on the safe side).
    ``values`` are in ascending order (the profile has sorted them already).
    """
    sample = values
    if len(sample) > BOXCOX_SAMPLE:
        sample = sample[np.linspace(0, len(sample) - 1, BOXCOX_SAMPLE).astype(int)]
    # Box-Cox is scale-equivariant in λ; dividing by the geometric mean keeps the transformed
    # values in range for data near the float limits.
    with np.errstate(all="ignore"):
        centre = float(np.exp(np.mean(np.log(sample))))
    if not math.isfinite(centre) or centre <= 0:
        return None
    try:
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            _, lam, (low, high) = stats.boxcox(sample / centre, alpha=0.05)
    except (ValueError, ArithmeticError, RuntimeError, np.linalg.LinAlgError):
        return None
    if not (math.isfinite(lam) and -10 < lam < 10):
        return None
    return {k: (float(v) if math.isfinite(v) else None) for k, v in (("lambda", lam), ("ci_low", low), ("ci_high", high))}


def _plain(value: float) -> float | int:
    return int(value) if float(value).is_integer() and abs(value) < 2**53 else value
