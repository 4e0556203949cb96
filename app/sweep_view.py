"""The "Forms" view: the focus effect under every combination of plausible transforms
(core.inference.sweep), the choice of the variables whose forms vary, what moves the effect, the
models ranked by original-scale AIC, and a control that loads a chosen model into the grid."""

from __future__ import annotations

import math
from typing import Any

import streamlit as st

from app import exports, history, keys, tables
from app.charts.sweep import sweep_figure
from app.context import Context, chart
from app.gridspec import spec_to_grid, with_sweep
from core.inference.sweep import MAX_MODELS, spec_of_model
from core.output import forms
from core.output import tables as core_tables
from core.output.escape import plain

# The ranked models listed on screen; the table downloads hold every one. A static table reads
# like the report and draws at once; a scrolling grid of 512 rows held the view back.
RANKED_SHOWN = 15


def _load(ctx: Context, spec: dict[str, Any]) -> None:
    """The chosen model into the grid, as an edit Undo can take back (what app.main's
    restart_grid does, through the session-state keys)."""
    ss = st.session_state
    grid = spec_to_grid(spec, ctx.frame, (ss.get(keys.DATA) or {}).get("profile"))
    history.record(ss.get(keys.PREVIOUS_GRID), grid)
    ss[keys.GRID_BASE] = grid
    ss[keys.GRID_VERSION] = ss.get(keys.GRID_VERSION, 0) + 1
    ss[keys.GRID_KEY] = f"variables_{ss[keys.GRID_VERSION]}"
    ss[keys.PREVIOUS_GRID] = grid


def sweep_view(ctx: Context) -> None:
    if ctx.ppml:
        st.info("The forms sweep compares least-squares models; switch PPML off to use it.")
        return
    spec = with_sweep(ctx.spec, st.session_state.get(keys.SWEEP_VARY), st.session_state.get(keys.SWEEP_FOCUS))
    result = ctx.analyze_long({"sweep"}, "forms", "Fitting every combination of plausible forms on the same rows", spec)
    if result is None:
        return
    sweep = result["sweep"]
    models = sweep["models"]
    varying = forms.varying(sweep)
    current = {ctx.outcome: ctx.result["outcome"]["transform"], **ctx.transforms}
    _vary_control(sweep)
    left, right = st.columns([1, 2.6], vertical_alignment="center")
    with left:
        _focus_control(sweep, [r["column"] for r in ctx.spec.get("regressors") or []])
    with right:
        _held_caption(sweep)
    st.markdown(plain(forms.summary_sentence(sweep)))
    if sweep["n_left_out"]:
        st.caption(plain(f"{sweep['n_left_out']} row(s) left out so that every form can take every row."))
    chart(sweep_figure(sweep, current, varying), "sweep_chart")
    st.markdown("**What moves the answer** — the effect under each form of each variable")
    moves = forms.moves_table(sweep, varying)
    st.table(tables.styled(moves, numbers_in=list(moves.columns[2:])), hide_index=True)
    ranked = forms.ranked_table(sweep, varying)
    shown = ranked.head(RANKED_SHOWN)
    best = f"the {len(shown)} best of {len(ranked):,}" if len(ranked) > len(shown) else f"all {len(ranked):,}"
    st.markdown(f"**Models ranked by AIC on the original scale** — {best}")
    st.table(tables.styled(shown, numbers_in=list(ranked.columns[2:])), hide_index=True)
    if len(ranked) > len(shown):
        st.caption(f"The downloads below hold all {len(ranked):,} models; any of them can be loaded into the grid.")
    exports.table_downloads(core_tables.from_frame("Forms sweep ranked by AIC", ranked), "forms_sweep", "sweep_table")
    pick = st.selectbox("Model to load", ranked["Rank"].tolist(), format_func=lambda r: f"{r}. {ranked['Forms'][r - 1]}")
    if st.button("Load this model into the grid", key="sweep_load"):
        _load(ctx, spec_of_model(ctx.spec, sweep, models[int(pick) - 1]["transforms"]))
        st.rerun()


def _focus_control(sweep: dict[str, Any], regressors: list[str]) -> None:
    """The regressor whose effect every model states."""
    ss = st.session_state
    key = f"sweep_focus_{'|'.join(regressors)}"  # a new set of regressors starts from the sweep's focus
    if key not in ss:
        ss[key] = sweep["focus"]["column"]

    def chosen() -> None:
        ss[keys.SWEEP_FOCUS] = ss[key]

    st.selectbox(
        "Effect of",
        regressors,
        key=key,
        on_change=chosen,
        help="The regressor whose effect each model states, for the change set in the grid's Change column.",
    )


def _vary_control(sweep: dict[str, Any]) -> None:
    """Which variables' forms the sweep tries (the others keep the model's own form), with the
    number of models a choice makes; a choice beyond the sweep's cap is not taken, and says why."""
    ss = st.session_state
    choosable = [c for c, found in sweep["forms"].items() if len(found) > 1]
    if not choosable:
        return
    key = f"sweep_vary_{'|'.join(choosable)}"  # a new set of variables starts from the sweep's own choice
    if key not in ss:
        ss[key] = [c for c in choosable if c not in sweep["held"]]

    def chosen() -> None:
        picked = ss[key]
        count = _models(sweep, picked)
        if not picked:
            ss[keys.SWEEP_NOTE] = "Choose at least one variable whose forms to try."
        elif count > MAX_MODELS:
            ss[keys.SWEEP_NOTE] = (
                f"Trying the forms of all {len(picked)} would make {count:,} models; the sweep fits at most "
                f"{MAX_MODELS:,}. Take one out first."
            )
        else:
            ss[keys.SWEEP_VARY], ss[keys.SWEEP_NOTE] = list(picked), None
            return
        ss[key] = [c for c in choosable if c not in sweep["held"]]  # back to the models on screen

    st.multiselect(
        "Try the forms of",
        choosable,
        key=key,
        on_change=chosen,
        format_func=lambda c: f"{c} ({', '.join(sweep['forms'][c])})",
        help="Each variable chosen takes each of its plausible forms; the others keep the form they have in the grid.",
    )
    if ss.get(keys.SWEEP_NOTE):
        st.warning(plain(ss[keys.SWEEP_NOTE]))


def _held_caption(sweep: dict[str, Any]) -> None:
    """The variables that keep their form in the grid, and why."""
    held = forms.held_sentence(sweep)
    if held:
        st.caption(plain(f"{held} Choose above which variables' forms to try."))


def _models(sweep: dict[str, Any], columns: list[str]) -> int:
    """How many models varying ``columns`` makes: the product of their numbers of forms."""
    return math.prod(len(sweep["forms"][c]) for c in columns)
