"""The Column profiles view: what each column holds, its shape, and the transform the advisor
suggests with its reasons and evidence (the rules live in ``core.intake``)."""

from __future__ import annotations

import math
from typing import Any

import pandas as pd
import streamlit as st

from app import charts, exports, keys
from app.gridspec import _text, outcome_column, profile_entries
from app.intake import transform_words
from core.intake.profile import column_boxcox
from core.output.escape import plain
from core.output.numbers import round_sig, signed
from core.output.text import boxcox_sentence, sentence_case

VIEW_NAME = "Column profiles"


KIND_WORDS = {
    "money": "money amount",
    "count": "count",
    "duration_years": "duration in years",
    "share": "share (0 to 1)",
    "percent": "percentage",
    "binary": "0/1 indicator",
    "category": "categories",
    "continuous": "measurement",
    "identifier": "identifier",
    "date": "dates",
    "text": "free text",
}


# Flags that say more than the kind (checked in this order).
_FLAG_WORDS = (
    ("empty", "empty"),
    ("constant", "constant"),
    ("row_number", "row number"),
    ("time_index", "time index"),
    ("calendar_year", "calendar year"),
    ("mixed_text", "numbers mixed with text"),
)


def arrows(text: str) -> str:
    """The advisor's '2.2 -> 0.2' as '2.2 → 0.2' on screen."""
    return text.replace(" -> ", " → ")


def kind_words(entry: dict[str, Any]) -> str:
    flags = set(entry.get("flags") or [])
    for flag, words in _FLAG_WORDS:
        if flag in flags:
            return words
    return KIND_WORDS.get(entry.get("kind") or "", entry.get("kind") or "")


def _signed(value: float | None, digits: int = 2) -> str:
    return "—" if value is None else signed(value, digits)


def evidence_lines(entry: dict[str, Any], outcome: bool) -> list[str]:
    """The numbers behind a suggestion, in words: skewness before and after a log and an IHS,
    the rows a log would drop and, for the outcome, its Box-Cox power with the interval."""
    lines: list[str] = []
    skew = entry.get("skewness")
    if skew is not None:
        after = []
        if entry.get("skewness_log") is not None:
            after.append(f"{_signed(entry['skewness_log'])} after a log")
        if entry.get("skewness_ihs") is not None:
            after.append(f"{_signed(entry['skewness_ihs'])} after IHS")
        lines.append(f"Skewness {_signed(skew)} as recorded" + (", " + ", ".join(after) if after else "") + " (0 is symmetric).")
    drop = entry.get("log_would_drop") or 0
    if entry.get("min") is not None:
        if drop:
            n_values = max(1, (entry.get("n") or 0) - (entry.get("n_missing") or 0))
            lines.append(f"A log would drop {drop:,} row{'s' if drop != 1 else ''} ({drop / n_values:.0%}) holding zero or less.")
        else:
            lines.append("A log would drop no rows: every value is above zero.")
    boxcox = entry.get("boxcox")
    if outcome and boxcox and boxcox.get("lambda") is not None:
        lines.append(
            boxcox_sentence(boxcox, entry["column"])
            + " (The column on its own; the Residual checks view works λ out given the regressors.)"
        )
    return lines


def _bars(entry: dict[str, Any]) -> list[int] | None:
    """Counts for the small bar chart: the histogram of numbers, level counts of categories."""
    histogram = entry.get("histogram")
    if histogram and histogram.get("counts"):
        return [int(c) for c in histogram["counts"]]
    if entry.get("kind") in ("category", "binary") and entry.get("top_values"):
        return [int(v["count"]) for v in entry["top_values"]]
    return None


def _number(value: Any, digits: int | None = None) -> float | None:
    """A finite float (rounded to ``digits`` significant digits, whole above 1,000) or None."""
    if not isinstance(value, (int, float)) or not math.isfinite(value):
        return None
    if digits is not None:
        value = round(value) if abs(value) >= 1000 else round_sig(float(value), digits)
    return float(value) + 0.0  # no "-0"


def _skew_value(value: Any) -> float | None:
    number = _number(value)
    return None if number is None else round(number, 2) + 0.0


@st.cache_data(max_entries=32, show_spinner=False)
def _column_boxcox(data_id: str | None, column: str, entry: dict[str, Any], _frame: pd.DataFrame) -> dict[str, Any] | None:
    """The outcome column's own Box-Cox λ, once per table and column (the frame is not hashed)."""
    return column_boxcox(entry, _frame[column])


def profile_frame(profile: dict[str, Any], grid: pd.DataFrame | None = None) -> pd.DataFrame:
    """One row per column for the profiles table, in the grid's order when there is a grid
    (numbers stay numbers; blanks where a figure does not apply)."""
    in_grid: dict[str, str] = {}
    entries = list(profile.get("columns") or [])
    if grid is not None:
        order = {_text(c): i for i, c in enumerate(grid["column"])}
        entries.sort(key=lambda e: order.get(str(e["column"]), len(order)))
        for row in grid.to_dict("records"):
            role = _text(row.get("role")) or "not used"
            in_grid[_text(row.get("column"))] = (
                "not used" if role == "not used" else f"{role}: {transform_words(_text(row.get('transform')))}"
            )
    rows = []
    for entry in entries:
        numeric = entry.get("min") is not None
        reasons = entry.get("reasons") or []
        rows.append(
            {
                "Column": entry["column"],
                "Kind": kind_words(entry),
                "Shape": _bars(entry),
                "Suggested": transform_words(entry.get("suggested_transform")),
                "Why": arrows(reasons[0]) if reasons else "",
                "Missing": int(entry.get("n_missing") or 0),
                "Zeros": int(entry.get("n_zero") or 0) if numeric else None,
                "Negative": int(entry.get("n_negative") or 0) if numeric else None,
                "Min": _number(entry.get("min"), 4),
                "Median": _number(entry.get("median"), 4),
                "Max": _number(entry.get("max"), 4),
                "Skewness": _skew_value(entry.get("skewness")),
                "Skew. after log": _skew_value(entry.get("skewness_log")),
                "Skew. after IHS": _skew_value(entry.get("skewness_ihs")),
                "Log drops rows": int(entry.get("log_would_drop") or 0) if numeric else None,
                "In your grid": in_grid.get(entry["column"], ""),
            }
        )
    return pd.DataFrame(rows)


# --- the Column profiles view ---------------------------------------------------------------------------
def profiles_view(ctx: Any = None) -> None:
    """Every column of the current data: kind, counts, range, shape and the advisor's suggestion,
    then the reasons and evidence for one column at a time."""
    ss = st.session_state
    data = ss.get(keys.DATA) or {}
    profile = data.get("profile")
    if not profile:
        st.info("No column profiles for this data.")
        return
    grid = ss.get(keys.PREVIOUS_GRID)
    entries = profile_entries(profile)
    outcome = outcome_column(grid) if grid is not None else None
    st.caption(
        f"**{plain(data.get('name', ''))}**: {profile.get('n_rows', 0):,} rows × {len(entries)} columns. "
        "The suggestions are rules of thumb from each "
        "column's name and values (amounts → log, zeros → IHS or levels, years and shares → levels); change any of "
        "them in the grid, or set them all with “Apply every suggestion” above it. Bars: how the values are spread "
        "(for categories, how often each level occurs)."
    )
    table = profile_frame(profile, grid)
    st.dataframe(
        table,
        hide_index=True,
        width="stretch",
        height=min(38 + 35 * len(table), 560),
        key="profile_table",
        column_config={
            "Column": st.column_config.TextColumn("Column", pinned=True, width=150),
            "Kind": st.column_config.TextColumn("Kind", width=125),
            "Shape": st.column_config.BarChartColumn(
                "Shape", y_min=0, width=100, color=charts.BLUE, help="How the values spread (categories: rows per level)."
            ),
            "Suggested": st.column_config.TextColumn("Suggested", width=115),
            "Why": st.column_config.TextColumn(
                "Why", width=300, help="The advisor's first reason; all reasons and the evidence are below the table."
            ),
            "Missing": st.column_config.NumberColumn("Missing", format="localized", width=70),
            "Zeros": st.column_config.NumberColumn("Zeros", format="localized", width=65),
            "Negative": st.column_config.NumberColumn("Negative", format="localized", width=75),
            "Min": st.column_config.NumberColumn("Min", format="localized", width=75),
            "Median": st.column_config.NumberColumn("Median", format="localized", width=75),
            "Max": st.column_config.NumberColumn("Max", format="localized", width=80),
            "Skewness": st.column_config.NumberColumn(
                "Skewness", format="%.2f", width=80, help="0 is symmetric; above 1, a long right tail."
            ),
            "Skew. after log": st.column_config.NumberColumn("Skew. after log", format="%.2f", width=105),
            "Skew. after IHS": st.column_config.NumberColumn("Skew. after IHS", format="%.2f", width=105),
            "Log drops rows": st.column_config.NumberColumn(
                "Log drops rows", format="localized", width=105, help="Rows at zero or below, which a log cannot take."
            ),
            "In your grid": st.column_config.TextColumn("In your grid", width=170),
        },
        placeholder="–",
    )

    st.markdown("##### Why this suggestion")
    names = list(entries)
    if ss.get(keys.PROFILE_PICK) not in names:
        ss[keys.PROFILE_PICK] = outcome if outcome in names else names[0]
    pick = st.selectbox("Column", names, key=keys.PROFILE_PICK)
    entry = entries[pick]
    with st.container(border=True):
        suggested = transform_words(entry.get("suggested_transform"))
        where = " · the outcome in your grid" if pick == outcome else ""
        st.markdown(f"**Suggested: {suggested}** · {kind_words(entry)}{where}")
        reasons = [sentence_case(arrows(r)) for r in entry.get("reasons") or []]
        if reasons:
            st.markdown("\n".join(f"- {plain(r)}" for r in reasons))
        if pick == outcome and entry.get("boxcox") is None:
            entry = {**entry, "boxcox": _column_boxcox(data.get("id"), pick, entry, data["frame"])}
        lines = evidence_lines(entry, outcome=pick == outcome)
        if lines:
            st.markdown("**Evidence**")
            st.markdown("\n".join(f"- {plain(line)}" for line in lines))
        figure = charts.profile_histogram_figure(entry)
        if figure is not None:
            exports.chart(figure, key="profile_histogram")
