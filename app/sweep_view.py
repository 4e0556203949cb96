"""The "Forms" view: the focus effect under every combination of plausible transforms
(core.inference.sweep), what moves it, the models ranked by original-scale AIC, and a control
that loads a chosen model into the grid."""

from __future__ import annotations

from typing import Any

import streamlit as st

from app import exports, history, keys
from app.charts.sweep import sweep_figure
from app.context import Context, chart
from app.gridspec import spec_to_grid
from core.inference.sweep import spec_of_model
from core.output import forms
from core.output import tables as core_tables
from core.output.escape import plain


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
    spec = {**ctx.spec, "sweep": ctx.spec.get("sweep") or {}}
    result = ctx.analyze_long({"sweep"}, "forms", "Fitting every combination of plausible forms on the same rows", spec)
    if result is None:
        return
    sweep = result["sweep"]
    models = sweep["models"]
    varying = forms.varying(sweep)
    current = {ctx.outcome: ctx.result["outcome"]["transform"], **ctx.transforms}
    st.markdown(plain(forms.summary_sentence(sweep)))
    if sweep["n_left_out"]:
        st.caption(plain(f"{sweep['n_left_out']} row(s) left out so that every form can take every row."))
    chart(sweep_figure(sweep, current, varying), "sweep_chart")
    st.markdown("**What moves the answer** — the effect under each form of each variable")
    st.dataframe(forms.moves_table(sweep, varying), hide_index=True, use_container_width=True)
    st.markdown("**Models ranked by AIC on the original scale**")
    ranked = forms.ranked_table(sweep, varying)
    st.dataframe(ranked, hide_index=True, use_container_width=True, height=320)
    exports.table_downloads(core_tables.from_frame("Forms sweep ranked by AIC", ranked), "forms_sweep", "sweep_table")
    pick = st.selectbox("Model to load", ranked["Rank"].tolist(), format_func=lambda r: f"{r}. {ranked['Forms'][r - 1]}")
    if st.button("Load this model into the grid", key="sweep_load"):
        _load(ctx, spec_of_model(ctx.spec, sweep, models[int(pick) - 1]["transforms"]))
        st.rerun()
