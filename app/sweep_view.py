"""The "Forms" view: the focus effect under every combination of plausible transforms
(core.inference.sweep), what moves it, the models ranked by original-scale AIC, and a control
that loads a chosen model into the grid."""

from __future__ import annotations

from typing import Any

import pandas as pd
import streamlit as st

from app import exports, history, keys
from app.charts.sweep import sweep_figure
from app.context import Context, chart
from app.gridspec import spec_to_grid
from core.output import tables as core_tables
from core.output.escape import plain
from core.output.numbers import sig


def _model_spec(spec: dict[str, Any], sweep: dict[str, Any], transforms: dict[str, str]) -> dict[str, Any]:
    """The plain spec of one model of the sweep (its transforms, the focus change named)."""
    out = {k: v for k, v in spec.items() if k != "sweep"}
    out["outcome"] = {**spec["outcome"], "transform": transforms[spec["outcome"]["column"]]}
    out["regressors"] = [
        {
            **r,
            "transform": transforms[r["column"]],
            **({"change": sweep["focus"]["change"]} if r["column"] == sweep["focus"]["column"] else {}),
        }
        for r in spec.get("regressors", [])
    ]
    return out


def _forms(transforms: dict[str, str], varying: list[str]) -> str:
    return ", ".join(f"{c}: {transforms[c]}" for c in varying)


def _ranked(sweep: dict[str, Any], varying: list[str]) -> pd.DataFrame:
    return pd.DataFrame(
        [
            {
                "Rank": i + 1,
                "Forms": _forms(m["transforms"], varying),
                "Effect, %": sig(m["percent"]),
                "95 % interval, %": f"{sig(m['percent_ci_low'])} to {sig(m['percent_ci_high'])}",
                "ΔAIC": sig(m["delta_aic"]),
                "AIC": sig(m["aic_original_scale"]),
                "R² (original scale)": sig(m["r2_original_scale"]),
            }
            for i, m in enumerate(sweep["models"])
        ]
    )


def _moves(sweep: dict[str, Any], varying: list[str]) -> pd.DataFrame:
    rows = []
    for entry in sweep["by_choice"]:
        if entry["column"] in varying:
            rows.append(
                {
                    "Variable": entry["column"],
                    "Form": entry["transform"],
                    "Models": entry["n_models"],
                    "Median effect, %": sig(entry["median_percent"]),
                    "Range, %": f"{sig(entry['min_percent'])} to {sig(entry['max_percent'])}",
                }
            )
    return pd.DataFrame(rows)


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
    with st.spinner("Fitting every combination of plausible forms on the same rows…"):
        sweep = ctx.analyze({"sweep"}, spec)["sweep"]
    models = sweep["models"]
    varying = [c for c in models[0]["transforms"] if len({m["transforms"][c] for m in models}) > 1]
    current = {ctx.outcome: ctx.result["outcome"]["transform"], **ctx.transforms}
    low, high = min(m["percent"] for m in models), max(m["percent"] for m in models)
    focus = sweep["focus"]
    st.markdown(
        plain(
            f"Across {len(models)} combinations of forms, the effect of {focus['change']} in {focus['column']} on the "
            f"expected outcome runs from {sig(low)} % to {sig(high)} %; the best model by AIC gives {sig(models[0]['percent'])} %."
        )
    )
    if sweep["n_left_out"]:
        st.caption(plain(f"{sweep['n_left_out']} row(s) left out so that every form can take every row."))
    chart(sweep_figure(sweep, current, varying), "sweep_chart")
    st.markdown("**What moves the answer** — the effect under each form of each variable")
    st.dataframe(_moves(sweep, varying), hide_index=True, use_container_width=True)
    st.markdown("**Models ranked by AIC on the original scale**")
    ranked = _ranked(sweep, varying)
    st.dataframe(ranked, hide_index=True, use_container_width=True, height=320)
    exports.table_downloads(core_tables.from_frame("Forms sweep ranked by AIC", ranked), "forms_sweep", "sweep_table")
    pick = st.selectbox("Model to load", ranked["Rank"].tolist(), format_func=lambda r: f"{r}. {ranked['Forms'][r - 1]}")
    if st.button("Load this model into the grid", key="sweep_load"):
        _load(ctx, _model_spec(ctx.spec, sweep, models[int(pick) - 1]["transforms"]))
        st.rerun()
