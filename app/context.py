"""The model on screen and the work behind every view: fits cached by (data id, spec JSON, parts),
so a view computes only the sections it draws and a closed view costs nothing on a refit."""

from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Any

import pandas as pd
import streamlit as st

import core
from app import exports, gridspec, jobs
from app.gridspec import spec_json
from core.inference.choices import (
    predict_inputs,
    sample_points,
)
from core.model.transforms import variable_label
from core.output.escape import plain
from core.output.text import (
    sentence_case,
)

# What every refit computes: the header, the coefficients, the effects and the gap curves.
BASE_PARTS = frozenset({"terms", "fit", "effects", "gap_curves"})


CHECK_PARTS = frozenset({"terms", "diagnostics", "boxcox"})


# --- cached work ----------------------------------------------------------------------------------
@st.cache_resource(max_entries=4, show_spinner=False)
def column_cache(data_id: str) -> core.ColumnCache:
    """Converted and transformed columns of one loaded table, shared by its refits: a toggle
    recomputes only the column it changed. The loaded frame is never edited in place."""
    return core.ColumnCache()


@st.cache_data(max_entries=64, show_spinner=False)
def run_model(data_id: str, spec_json: str, parts: tuple[str, ...], _frame: pd.DataFrame) -> dict[str, Any]:
    """Fit once per (data, spec, parts): the frame itself is not hashed, its identity is."""
    return core.analyze(_frame, json.loads(spec_json), parts=set(parts), columns=column_cache(data_id))


@st.cache_data(max_entries=16, show_spinner=False)
def level_names(data_id: str, column: str, _frame: pd.DataFrame) -> list[str]:
    """The distinct level names of an identifier column, in numeric-then-text order."""
    names = pd.unique(_frame[column].dropna().astype(str))
    return sorted((str(n) for n in names), key=lambda n: (0, float(n), n) if _is_number(n) else (1, 0.0, n))


CATEGORY_LEVELS_SHOWN = 12  # levels named under the grid per category regressor


@st.cache_data(max_entries=32, show_spinner=False)
def frequent_levels(data_id: str, column: str, _frame: pd.DataFrame) -> list[str]:
    """``gridspec.frequent_levels`` once per table and column: on every rerun it would count a
    million text cells again (40 ms)."""
    return gridspec.frequent_levels(_frame[column], CATEGORY_LEVELS_SHOWN)


def levels_caption(data: dict[str, Any], grid: pd.DataFrame) -> None:
    """Under the grid: the levels of each category regressor, so a reference can be typed."""
    frame = data["frame"]
    levels = gridspec.category_levels(
        frame, grid, CATEGORY_LEVELS_SHOWN, lambda column: frequent_levels(data["id"], column, frame)
    )
    if levels:
        st.caption(
            "Category levels (most frequent first; blank reference = the most frequent): "
            + " · ".join(f"**{plain(col)}**: {', '.join(map(plain, vals))}" for col, vals in levels.items())
        )


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def fixed_effect_spec(ctx: Context, key: str) -> tuple[dict[str, Any], str | None]:
    """With absorbed fixed effects, a chooser of the one curves and predictions read: the rows'
    average, or one level of the first absorbed identifier (docs/contract.md §2.15). The spec to
    analyse and a sentence saying which (None without absorbed effects)."""
    absorbed = (ctx.result.get("absorb") or {}).get("columns") or []
    if not absorbed:
        return ctx.spec, None
    column = absorbed[0]
    options = ["average", *level_names(ctx.data_id, column, ctx.frame)]
    if st.session_state.get(key) not in options:
        st.session_state[key] = "average"
    choice = st.selectbox(
        f"Fixed effect of {column}",
        options,
        key=key,
        format_func=lambda v: "average over the rows" if v == "average" else f"{column} = {v}",
        help="The absorbed fixed effects are not shown as coefficients; pick the one the prediction uses.",
    )
    words = " and ".join(absorbed)
    if choice == "average":
        return ctx.spec, f"The fixed effects of {words} are at their average over the rows."
    spec = {**ctx.spec, "at": {**(ctx.spec.get("at") or {}), column: choice}}
    return spec, (
        f"The fixed effect is that of {column} = {choice} (the average absorbed effect of its rows); the band treats it as known."
    )


@st.cache_data(max_entries=32, show_spinner=False)
def point_sample(data_id: str, x_column: str, y_column: str, _frame: pd.DataFrame) -> dict[str, Any]:
    return sample_points(_frame, x_column, y_column)


@st.cache_data(max_entries=16, show_spinner=False)
def prediction_inputs(data_id: str, spec_json: str, reference_json: str, _frame: pd.DataFrame) -> list[dict[str, Any]]:
    return predict_inputs(_frame, json.loads(spec_json), json.loads(reference_json))


@dataclass
class Context:
    """The model on screen: its base result, spec and the data it was fitted to."""

    result: dict[str, Any]
    spec: dict[str, Any]
    frame: pd.DataFrame
    data_id: str
    data_name: str

    def analyze(self, parts: frozenset[str] | set[str], spec: dict[str, Any] | None = None) -> dict[str, Any]:
        chosen = self.spec if spec is None else spec
        return run_model(self.data_id, spec_json(chosen), tuple(sorted(parts)), self.frame)

    def analyze_long(
        self, parts: frozenset[str] | set[str], name: str, what: str, spec: dict[str, Any] | None = None
    ) -> dict[str, Any] | None:
        """``analyze`` for a view's heavy sections: on a long table (``jobs.JOB_MIN_ROWS``) on a
        worker thread with a progress box and a Stop button, returning None until it is done;
        on a short one at once (with a spinner), through the same cache."""
        chosen = self.spec if spec is None else spec
        if self.result.get("n_obs", 0) < jobs.JOB_MIN_ROWS:
            with st.spinner(f"{what}…"):
                return self.analyze(parts, chosen)
        frame, columns, wanted = self.frame, column_cache(self.data_id), set(parts)

        def work(progress: jobs.Progress) -> dict[str, Any]:
            return core.analyze(frame, chosen, parts=wanted, columns=columns, progress=lambda share: progress(share, ""))

        return jobs.view_result(name, (self.data_id, spec_json(chosen), tuple(sorted(wanted))), work, what)

    @property
    def ppml(self) -> bool:
        return (self.spec.get("estimator") or "ols") == "ppml"

    @property
    def transforms(self) -> dict[str, str]:
        return {r["column"]: r.get("transform", "level") for r in self.spec.get("regressors", [])}

    @property
    def outcome(self) -> str:
        return self.result["outcome"]["column"]

    @property
    def outcome_label(self) -> str:
        outcome = self.result["outcome"]
        return variable_label(outcome["column"], outcome["transform"], "outcome")


# Width of a chart in one of two side-by-side columns at a 1440 px window: its text is
# wrapped to fit that column.
HALF_COLUMN = 500


def chart(figure: Any, key: str, screen_width: int | None = None) -> None:
    exports.chart(figure, key, screen_width)


def failed(exc: Exception) -> None:
    """A view's own computation failed: say so in the view, keep the rest of the page."""
    if isinstance(exc, core.FormwiseError):
        st.error(plain(sentence_case(str(exc))))
    else:
        st.error(plain(f"Formwise could not compute this view because of an internal problem ({type(exc).__name__}: {exc})."))
