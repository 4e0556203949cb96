"""Column profiles and the transform advisor (SPEC §5 ``profile``, §6 intake and advisor).

``profile_table(frame, notes)`` describes every column — its kind, missing values, zeros,
negatives, range, skewness before and after a log or IHS, a small histogram — and suggests a
transform with reasons in plain words (``suggest_transform``).

Kinds come from the values and the column name together: the name says what a number means
(a price, an age), the values say what a transform can do with it (zeros, negatives, skew).

The advisor's rules are rules of thumb: common practice in applied work, no single source.
They are written out in ``suggest_transform`` so that a user can read and overrule them.
The one published point they lean on: effects of IHS and of logs with zeros depend on the
units of measurement (Aihounton & Henningsen 2021, Econometrics Journal 24(2); Chen & Roth
2024, QJE 139(2)), which is why a zero-heavy amount gets IHS with that caution attached.
"""

from __future__ import annotations

import math
import re
from typing import Any

import numpy as np
import pandas as pd

from core.inference.retransform import boxcox_profile
from core.intake.reader import ATTRS_KEY

KINDS = ("money", "count", "duration_years", "share", "percent", "binary", "category", "continuous", "identifier", "date", "text")
HISTOGRAM_BINS = 20
# Thresholds of the advisor (common practice, no source).
SKEWED = 1.0  # |skewness| above this reads as clearly skewed
STRONGLY_SKEWED = 2.0  # shares and percentages leave levels only beyond this
LARGE_COUNT_MEDIAN = 10.0  # counts whose positive values have a median this large behave like amounts
CATEGORY_MAX_LEVELS = 50  # more distinct text values than this (and not unique) reads as free text
IDENTIFIER_MIN_DISTINCT = 20  # a column named like an id with more distinct values is an identifier
DATE_SHARE = 0.9  # share of distinct text values that must look like dates
BOXCOX_SAMPLE = 5_000  # Box-Cox λ of a long column from this many evenly spaced quantiles

# Name words, matched against the column name split at non-letters and camelCase.
_MONEY_STEMS = (
    "price", "revenue", "cost", "spend", "spent", "income", "wage", "salar", "amount", "sales",
    "expend", "expense", "earning", "profit", "payment", "budget", "turnover", "dollar", "euro",
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
def profile_table(frame: pd.DataFrame, notes: list[str] | None = None) -> dict[str, Any]:
    """Profile every column and suggest a transform for each; plain JSON-able data.

    ``notes`` are the reader's intake notes (``read_table_with_notes``); when left out, the
    notes the reader stored on the frame are used.
    """
    intake = frame.attrs.get(ATTRS_KEY) or {}
    facts = intake.get("columns") or {}
    if notes is None:
        notes = list(intake.get("notes") or [])
    columns = []
    for position, column in enumerate(frame.columns):
        entry = profile_column(frame.iloc[:, position], str(column), facts.get(column) or {})
        entry["suggested_transform"], entry["reasons"] = suggest_transform(entry)
        columns.append(_strict(entry))
    return {"intake": [str(n) for n in notes], "n_rows": int(len(frame)), "columns": columns}


def _strict(value: Any) -> Any:
    """NaN and infinities become None, so the profile is strict JSON (SPEC §2)."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _strict(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_strict(v) for v in value]
    return value


# --- one column ---------------------------------------------------------------------------------
def profile_column(series: pd.Series, column: str, facts: dict[str, Any] | None = None) -> dict[str, Any]:
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
        _numeric_profile(entry, series.astype(float).to_numpy(dtype=float, na_value=np.nan), column, facts)
    elif pd.api.types.is_datetime64_any_dtype(series):
        stamps = series.dropna()
        entry["kind"] = "date"
        entry["n_distinct"] = int(stamps.nunique())
        if len(stamps):
            entry["first"], entry["last"] = str(stamps.min().date()), str(stamps.max().date())
    else:
        _text_profile(entry, series, column, facts)
    return entry


def _numeric_profile(entry: dict[str, Any], values: np.ndarray, column: str, facts: dict[str, Any]) -> None:
    finite = values[np.isfinite(values)]
    entry["n_infinite"] = int(np.isinf(values).sum())
    entry["kind"] = "continuous"
    if len(finite) == 0:
        entry["flags"].append("empty")
        return
    distinct = np.unique(finite)
    entry["n_distinct"] = int(len(distinct))
    entry["n_zero"] = int((finite == 0).sum())
    entry["n_negative"] = int((finite < 0).sum())
    entry["log_would_drop"] = int((finite <= 0).sum())
    positive = finite[finite > 0]
    with np.errstate(all="ignore"):  # the median of two values near the float limit overflows
        entry["min"], entry["median"], entry["max"] = float(finite.min()), float(np.median(finite)), float(finite.max())
        entry["median_positive"] = float(np.median(positive)) if len(positive) else None
    entry["skewness"] = _skew(finite)
    entry["skewness_log"] = _skew(np.log(positive)) if len(positive) >= 3 else None
    entry["skewness_ihs"] = _skew(np.arcsinh(finite))
    entry["histogram"] = _histogram(finite)
    if len(distinct) <= 10:
        labels, freq = np.unique(finite, return_counts=True)
        order = np.argsort(-freq, kind="stable")[:10]
        entry["top_values"] = [{"value": _plain(float(labels[i])), "count": int(freq[i])} for i in order]
    entry["kind"], flags = _numeric_kind(finite, distinct, column, facts, len(finite))
    entry["flags"].extend(flags)
    if (
        entry["kind"] in ("money", "count", "continuous", "share", "percent", "duration_years")
        and len(distinct) >= 3
        and entry["min"] > 0
    ):
        entry["boxcox"] = _boxcox(finite)


def _numeric_kind(
    finite: np.ndarray, distinct: np.ndarray, column: str, facts: dict[str, Any], n_values: int
) -> tuple[str, list[str]]:
    words = _words(column)
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
    if integer and words & _ID_WORDS:
        unique_rows = len(distinct) == n_values
        if unique_rows or len(distinct) > IDENTIFIER_MIN_DISTINCT:
            return "identifier", flags
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
    words = _words(column)
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


# --- the advisor --------------------------------------------------------------------------------
def suggest_transform(entry: dict[str, Any]) -> tuple[str | None, list[str]]:
    """A transform for one profiled column and the reasons for it, in plain words.

    Rules of thumb (common practice, no single source):
    - positive money amounts and large counts -> log (effects read as percent changes);
    - durations in years -> level (the effect of one more year);
    - zeros or negatives -> never log (say how many rows it would drop): IHS for amounts and
      large counts with zeros, level otherwise;
    - shares and percentages -> level, unless strongly skewed and positive;
    - binary -> level; category -> category;
    - identifier, date, text -> not used (None), with the reason.
    Returns (transform name as in SPEC §3 or None, reasons).
    """
    kind = entry.get("kind")
    flags = set(entry.get("flags") or [])
    transform, reasons = _advise(kind, flags, entry)
    extra = []
    if entry.get("n_missing"):
        extra.append(
            f"{_count(entry['n_missing'])} missing value{'s' if entry['n_missing'] != 1 else ''}; a model leaves those rows out"
        )
    if entry.get("n_infinite"):
        extra.append(
            f"{_count(entry['n_infinite'])} infinite value{'s' if entry['n_infinite'] != 1 else ''}; a model leaves those rows out"
        )
    return transform, reasons + (extra if transform is not None else [])


def _advise(kind: str | None, flags: set[str], e: dict[str, Any]) -> tuple[str | None, list[str]]:
    if "empty" in flags:
        return None, ["no values: every cell is blank or missing; not usable"]
    if kind == "identifier":
        example = e["top_values"][0]["value"] if e.get("top_values") else None
        shown = f" such as '{example}'" if example is not None else ""
        what = (
            "a saved row number" if "row_number" in flags else f"an identifier ({_count(e['n_distinct'])} distinct values{shown})"
        )
        return None, [f"{what}; not a variable for the model — it can define clusters for standard errors"]
    if kind == "date":
        span = f" ({e['first']} to {e['last']})" if e.get("first") else ""
        return None, [f"dates{span}; not used directly — derive a trend or period column from them to model time"]
    if kind == "text":
        if "mixed_text" in flags:
            rows = e.get("text_rows") or []
            where = f" (rows {', '.join(map(str, rows[:8]))})" if rows else ""
            return None, [f"mostly numbers, but some cells hold text{where}; fix or blank those cells to use it as a number"]
        return None, [f"free text ({_count(e['n_distinct'])} distinct values); not used in a model"]
    if "constant" in flags:
        value = e["top_values"][0]["value"] if e.get("top_values") else e.get("min")
        return None, [f"the same value ({value}) in every row; it cannot explain anything"]
    if kind == "category":
        levels = e.get("top_values") or []
        shown = ", ".join(f"{lv['value']} {_count(lv['count'])}" for lv in levels[:5])
        more = ", ..." if e["n_distinct"] > 5 else ""
        reasons = [
            f"{_count(e['n_distinct'])} levels ({shown}{more}); one dummy per level, the most frequent is the reference by default"
        ]
        if "numeric_codes" in flags:
            reasons.append("two number codes that are not 0/1 read as labels, not amounts")
        if e["n_distinct"] > 20:
            reasons.append(f"{e['n_distinct']} levels add {e['n_distinct'] - 1} coefficients; consider grouping rare levels")
        return "category", reasons
    if kind == "binary":
        ones = next((v["count"] for v in e.get("top_values") or [] if v["value"] == 1), 0)
        share = ones / max(1, e["n"] - e["n_missing"] - e.get("n_infinite", 0))
        return "level", [f"0/1 indicator ({share:.0%} ones); a dummy enters in levels"]
    span = f"{_short(e['min'])} to {_short(e['max'])}"
    if "time_index" in flags or "calendar_year" in flags:
        if "calendar_year" in flags:
            what, span = "calendar years", f"{e['min']:.0f} to {e['max']:.0f}"
        else:
            what = "a time index"
        return "level", [
            f"{what} ({span}): level fits a linear trend; choose category for a separate effect per period; a log of time makes no sense"
        ]
    if kind == "duration_years":
        return "level", [f"a duration in years ({span}); level gives the effect of one more year"]
    if kind in ("share", "percent"):
        return _advise_share(kind, e, span)
    if kind == "money":
        return _advise_amount("money amounts", e, span, always_log=True)
    if kind == "count":
        if (e.get("median_positive") or 0.0) >= LARGE_COUNT_MEDIAN and e["max"] >= 100:
            return _advise_amount("counts", e, span, always_log=True)
        reasons = [f"small counts ({span}, median {_short(e['median'])}); level keeps every row and reads as one more unit"]
        if e["n_zero"]:
            reasons.append("as the outcome, consider PPML (estimator 'ppml'): it keeps the zeros and reads like a log model")
        return "level", reasons
    return _advise_amount("values", e, span, always_log=False)


def _advise_share(kind: str, e: dict[str, Any], span: str) -> tuple[str | None, list[str]]:
    unit = "shares between 0 and 1" if kind == "share" else "percentages"
    step = "+0.1 reads as ten percentage points" if kind == "share" else "+1 reads as one percentage point"
    skew, after = e.get("skewness"), e.get("skewness_log")
    if e["min"] > 0 and skew is not None and skew > STRONGLY_SKEWED and after is not None and abs(after) < abs(skew) / 2:
        return "log", [
            f"{unit} ({span}) but strongly right-skewed (skewness {skew:.1f} -> {after:.1f} after log); a log reads as percent changes of the {kind}"
        ]
    reasons = [f"{unit} ({span}); level: {step}"]
    if skew is not None and abs(skew) > SKEWED:
        reasons.append(f"skewed (skewness {skew:.1f}), but not enough to leave levels")
    return "level", reasons


def _advise_amount(what: str, e: dict[str, Any], span: str, always_log: bool) -> tuple[str | None, list[str]]:
    skew, skew_log, skew_ihs = e.get("skewness"), e.get("skewness_log"), e.get("skewness_ihs")
    drop = e.get("log_would_drop", 0)
    if drop == 0:
        shape = (
            "right-skewed"
            if skew is not None and skew > 0.5
            else "not much skewed"
            if skew is not None and abs(skew) <= 0.5
            else "left-skewed"
        )
        change = f" (skewness {skew:.1f} -> {skew_log:.1f} after log)" if skew is not None and skew_log is not None else ""
        if always_log:
            return "log", [f"positive {what} ({span}), {shape}{change}; a log reads as percent changes (elasticities)"]
        if skew is not None and skew > SKEWED and skew_log is not None and abs(skew_log) < abs(skew):
            return "log", [f"positive {what} ({span}), right-skewed{change}; a log tames the skew"]
        return "level", [f"positive {what} ({span}), {shape} (skewness {_fmt(skew)}); level is fine"]
    share = drop / max(1, e["n"] - e["n_missing"] - e.get("n_infinite", 0))
    zeros, negatives = e["n_zero"], e["n_negative"]
    held = " and ".join(
        p for p in (f"{_count(zeros)} zeros" if zeros else "", f"{_count(negatives)} negative values" if negatives else "") if p
    )
    lost = f"{held} ({share:.0%} of rows); a log would drop {_count(drop)} row{'s' if drop != 1 else ''}"
    if negatives == 0 and (always_log or (skew is not None and skew > SKEWED)):
        change = f" (skewness {_fmt(skew)} -> {_fmt(skew_ihs)} after IHS)" if skew is not None and skew_ihs is not None else ""
        return "ihs", [
            f"{what} with {lost}",
            f"IHS keeps the zeros and behaves like a log for large values{change}",
            "IHS effects depend on the units of measurement (Aihounton & Henningsen 2021); report the units used",
        ]
    return "level", [f"{what} with {lost}; level keeps every row (skewness {_fmt(skew)})"]


# --- small helpers ------------------------------------------------------------------------------
def _words(column: str) -> set[str]:
    spaced = re.sub(r"([a-z0-9])([A-Z])", r"\1 \2", column)
    return {w for w in re.split(r"[^0-9a-zA-Z]+", spaced.lower()) if w}


def _money_name(column: str, words: set[str]) -> bool:
    if any(mark in column for mark in _CURRENCY_MARKS) or words & _MONEY_WORDS:
        return True
    return any(w.startswith(stem) for w in words for stem in _MONEY_STEMS)


def _skew(values: np.ndarray) -> float | None:
    """Sample skewness, adjusted Fisher-Pearson G1 (as spreadsheets' SKEW); None when undefined.

    G1 = g1·sqrt(n(n-1))/(n-2), g1 = m3/m2^1.5 with central moments m2, m3 (Joanes & Gill 1998,
    The Statistician 47(1)); written out so near-constant data give None, not a warning.
    """
    n = len(values)
    if n < 3 or not np.isfinite(values).all():
        return None
    scale = float(np.max(np.abs(values)))
    if scale == 0:
        return None
    with np.errstate(all="ignore"):
        scaled = values / scale  # skewness is scale-free; this keeps the moments in range
        centred = scaled - scaled.mean()
        squared = centred * centred
        m2 = float(np.mean(squared))
        m3 = float(np.mean(squared * centred))
        # Spread below the rounding noise of the values is no spread at all.
        if not (math.isfinite(m2) and math.isfinite(m3)) or math.sqrt(m2) <= 1e-12:
            return None
        value = m3 / m2**1.5 * math.sqrt(n * (n - 1)) / (n - 2)
    return value if math.isfinite(value) else None


def _histogram(values: np.ndarray) -> dict[str, list[float] | list[int]] | None:
    """Twenty equal bins over the finite values; None when the range overflows a float."""
    try:
        with np.errstate(all="ignore"):
            counts, edges = np.histogram(values, bins=HISTOGRAM_BINS)
    except ValueError:
        return None
    if not np.isfinite(edges).all():
        return None
    return {"edges": [float(e) for e in edges], "counts": [int(c) for c in counts]}


def _boxcox(values: np.ndarray) -> dict[str, Any] | None:
    """Box-Cox λ of the column alone (no regressors), with its 95 % interval.

    A long column is represented by BOXCOX_SAMPLE evenly spaced order statistics, so λ̂ keeps
    its value while the interval is that of the smaller sample (wider, on the safe side).
    """
    sample = np.sort(values)
    if len(sample) > BOXCOX_SAMPLE:
        sample = sample[np.linspace(0, len(sample) - 1, BOXCOX_SAMPLE).astype(int)]
    try:
        with np.errstate(all="ignore"):
            found = boxcox_profile(sample, np.ones((len(sample), 1)))
    except (ValueError, ArithmeticError, RuntimeError, np.linalg.LinAlgError):
        return None
    if not found:
        return None
    return {
        k: (float(found[k]) if found[k] is not None and math.isfinite(found[k]) else None)
        for k in ("lambda", "ci_low", "ci_high")
    }


def _plain(value: float) -> float | int:
    return int(value) if float(value).is_integer() and abs(value) < 2**53 else value


def _count(n: int) -> str:
    return f"{int(n):,}"


def _short(value: float | None) -> str:
    if value is None:
        return "?"
    if float(value).is_integer() and abs(value) < 1e15:
        return f"{int(value):,}"
    if abs(value) >= 1000:
        return f"{value:,.0f}"
    return f"{value:.4g}" if abs(value) >= 1 else f"{value:.3g}"


def _fmt(value: float | None) -> str:
    return "n/a" if value is None else f"{value:.1f}"
