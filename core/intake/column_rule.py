"""The advisor's rule for one column: a transform for a profiled column, with its reasons in
plain words (``core.intake.profile.profile_table`` attaches it to every column's profile; the
starting model of a whole table is ``core.intake.advisor``). Rules of thumb: common practice in
applied work, no single source; effects of IHS and of logs with zeros depend on the units of
measurement (Aihounton & Henningsen 2021, Econometrics Journal 24(2); Chen & Roth 2024, QJE
139(2)), which is why a zero-heavy amount gets IHS with that caution attached."""

from __future__ import annotations

import re
from typing import Any

# Thresholds of the column rule (common practice, no source).
SKEWED = 1.0  # |skewness| above this reads as clearly skewed
STRONGLY_SKEWED = 2.0  # shares and percentages leave levels only beyond this
LARGE_COUNT_MEDIAN = 10.0  # counts whose positive values have a median this large behave like amounts


def name_words(column: str) -> set[str]:
    """The words of a column name, split at non-letters and camelCase, in lower case."""
    spaced = re.sub(r"([a-z0-9])([A-Z])", r"\1 \2", column)
    return {w for w in re.split(r"[^0-9a-zA-Z]+", spaced.lower()) if w}


# --- one column -----------------------------------------------------------------------------------
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
    Returns (transform name as in docs/contract.md §2 or None, reasons).
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
        if "group_codes" in flags:
            reasons.append("whole numbers named like groups (a county, a district) read as labels, not amounts")
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
