"""The result views under the model header. One view is shown at a time (a selector, not tabs:
Streamlit runs every tab's code), and each view asks ``core.analyze`` only for the sections it
draws, cached by (data id, spec JSON, parts). So the slow sections (residual checks, units check)
never run on a refit while their view is closed.

Rules and wording live in ``app.gridspec`` (the grid) and ``core.output.text`` (sentences), tables in ``app.tables`` and figures in ``app.charts``;
this module only places them on the screen.
"""

from __future__ import annotations

import streamlit as st

import core
from app import charts, exports, keys, profiles_view, tables
from app.checks_view import checks_view
from app.compare_view import compare_view, predict_view
from app.context import Context, chart, failed, fixed_effect_spec, point_sample
from app.scenarios_view import scenarios_view
from app.sweep_view import sweep_view
from core.inference.choices import (
    overlay_options,
    retransforms_differ,
    switch_transform,
)
from core.model.transforms import IDENTITY, lookup, phrase, variable_label
from core.output import display
from core.output import tables as core_tables
from core.output.escape import plain
from core.output.numbers import sig
from core.output.text import (
    curve_sentence,
    factor_words,
    join_words,
    showing_words,
    units_warning,
)
from core.output.unit_words import units_of

VIEWS = [
    "Coefficients",
    "Effects of changes",
    "Approximation check",
    "Effect curves",
    "Residual checks",
    "Compare models",
    "Predict",
    "Scenarios",
    "Column profiles",
    "Forms",
]
# Shorter words on the selector, so it stays on one line at 1280 px.
SHORT = {
    "Effects of changes": "Effects",
    "Approximation check": "Approx.",
    "Effect curves": "Curves",
    "Residual checks": "Checks",
    "Compare models": "Compare",
    "Column profiles": "Columns",
}
# Above this many rows the units check (six refits per IHS or shifted-log variable) runs on request.
UNITS_CHECK_AUTO_ROWS = 200_000


def show(ctx: Context) -> None:
    """The view selector and the chosen view."""
    ss = st.session_state
    exports.set_chart_caption(ctx.data_id, ctx.data_name, ctx.spec, ctx.result)
    if ss.get(keys.VIEW) not in VIEWS:
        ss[keys.VIEW] = VIEWS[0]
    view = st.segmented_control(
        "Show", VIEWS, key=keys.VIEW, required=True, label_visibility="collapsed", format_func=lambda v: SHORT.get(v, v)
    )
    try:
        {
            "Coefficients": coefficients_view,
            "Effects of changes": effects_view,
            "Approximation check": approximation_view,
            "Effect curves": curves_view,
            "Residual checks": checks_view,
            "Compare models": compare_view,
            "Predict": predict_view,
            "Scenarios": scenarios_view,
            "Column profiles": profiles_view.profiles_view,
            "Forms": sweep_view,
        }[view or VIEWS[0]](ctx)
    except Exception as exc:  # a core bug must not become a traceback on screen
        failed(exc)


# --- coefficients and effects ------------------------------------------------------------------------
def coefficients_view(ctx: Context) -> None:
    st.table(tables.styled(display.coefficient_table(ctx.result, ctx.spec)), hide_index=True)
    exports.table_downloads(core_tables.coefficient_table(ctx.result, ctx.spec), "estimates", "estimates")


def effects_view(ctx: Context) -> None:
    result, spec = ctx.result, ctx.spec
    table = display.effects_table(result, spec)
    if table.empty:
        st.info("Add a regressor to see the effect of changing it.")
        return
    st.caption(
        "Each row moves one variable by the change in the grid, every other regressor held at its reference "
        "value (sample mean; most frequent level for categories). The interval is for the exact effect. "
        "“Small-sample adjusted” applies to 0/1 and category effects in log models; “Average over rows” "
        "applies the change to every row and averages, where that differs from the effect at the reference."
        + (" The model is fitted by PPML, so effects read as % changes in the mean of the outcome." if ctx.ppml else "")
        + (
            " A regressor whose effect varies by another has a row per value of that one (“Read at”: every level, "
            "or the quartiles of a number), the moderator held there."
            if any(e.get("group") for e in result.get("effects") or [])
            else ""
        )
    )
    st.table(tables.styled(table, display.extrapolated_rows(result)), hide_index=True)
    for line in core_tables.slope_test_lines(result, spec):
        st.markdown(plain(line))
    exports.table_downloads(core_tables.effects_table(result, spec), "effects", "effects")
    point = result.get("reference_point") or {}
    if point:
        st.caption(
            plain("Reference values: " + ", ".join(f"{k} = {sig(v, 4) if isinstance(v, float) else v}" for k, v in point.items()))
        )
    units_view(ctx)


def units_view(ctx: Context) -> None:
    """Beside IHS and shifted-log effects: does the effect depend on the variable's units?"""
    unit_bound = [c for c, t in ctx.transforms.items() if not (lookup(t) or IDENTITY).unit_invariant]
    if not unit_bound:
        return
    if ctx.result.get("n_obs", 0) > UNITS_CHECK_AUTO_ROWS:
        # Six refits per variable take seconds at this size: run them when asked, not on every refit.
        st.markdown(f"##### Does the effect of {plain(join_words(unit_bound))} depend on the units?")
        if not st.toggle(
            f"Check it (refits the model {6 * len(unit_bound)} times on {ctx.result['n_obs']:,} rows)", key=keys.UNITS_CHECK_ON
        ):
            return
    with st.spinner("Refitting with the variable in other units…"):
        checks = ctx.analyze({"units_check"}).get("units_check") or []
    for check in checks:
        column = check["column"]
        st.markdown(f"##### Does the effect of {plain(column)} depend on its units?")
        st.caption(
            plain(
                f"With {variable_label(column, ctx.transforms.get(column))}, the fitted effect can change when "
                f"{column} is recorded in other units (say thousands instead of units), although the data mean the same. "
                "Here the model is refitted with the variable rescaled and the same real change asked each time."
            )
        )
        warning = units_warning(check, ctx.transforms.get(column))
        if warning:
            st.warning(plain(warning))
        words = [factor_words(r["factor"]) for r in check["rows"]]
        st.table(
            tables.styled(display.units_table(check, words), numbers_in=[f"Exact effect of {check['change']}"]),
            hide_index=True,
        )
        ticks = ["×1" if w[0] == "as recorded" else w[0] for w in words]
        chart(charts.units_figure(check, ctx.outcome, ticks), key=f"units_{column}")


def regressor_pick(ctx: Context, names: list[str], key: str) -> str:
    """A regressor chooser, named with its transform, that keeps its choice while the column
    stays in the model and falls back to the first one otherwise."""
    if st.session_state.get(key) not in names:
        st.session_state[key] = names[0]
    transforms = ctx.transforms
    return st.selectbox("Regressor", names, key=key, format_func=lambda c: variable_label(c, transforms.get(c)))


def approximation_view(ctx: Context) -> None:
    result = ctx.result
    curves = result.get("gap_curves") or []
    if not curves:
        st.info(
            "No continuous regressor in this model: 0/1 and category effects are single moves, so there is no "
            "range of change sizes to compare. Their exact and approximate effects are in the effects table."
        )
        return
    names = list(dict.fromkeys(c["column"] for c in curves))
    left, right = st.columns([2, 3])
    with left:
        pick = regressor_pick(ctx, names, "gap_pick")
        curve = group_pick([c for c in curves if c["column"] == pick], "gap_group")
    with right:
        tolerance = st.slider(
            "Tolerance: largest acceptable relative error (%)",
            min_value=1,
            max_value=50,
            value=10,
            key=keys.GAP_TOLERANCE,
            help="Marks the change sizes where |approximation − exact| / |exact| exceeds this share.",
        )
    outcome = result["outcome"]
    figure = charts.gap_figure(
        curve,
        tolerance,
        regressor_label=variable_label(pick, ctx.transforms.get(pick))
        + (f" at {display.group_text(curve['group'])}" if curve.get("group") else ""),
        outcome_label=variable_label(outcome["column"], outcome["transform"], "outcome"),
        outcome_column=outcome["column"],
        units=units_of(ctx.result, ctx.spec),
    )
    chart(figure, key="gap_chart")
    st.markdown(plain(charts.curve_summary(curve, tolerance)))


# --- effect curves ----------------------------------------------------------------------------------------
def curves_view(ctx: Context) -> None:
    ss = st.session_state
    spec, fixed_effect = fixed_effect_spec(ctx, "curve_fixed_effect")
    with st.spinner("Drawing the curves…"):
        try:
            curves = ctx.analyze({"curves"}, spec).get("curves") or []
        except core.FormwiseError as exc:  # a level the fit did not keep (all its rows dropped)
            st.warning(plain(f"{exc} The curves read the average fixed effect instead."))
            curves, fixed_effect = ctx.analyze({"curves"}).get("curves") or [], None
    if not curves:
        st.info("Add a regressor to see how the predicted outcome moves with it.")
        return
    transforms = ctx.transforms
    names = list(dict.fromkeys(c["column"] for c in curves))
    left, right = st.columns([2, 3])
    with left:
        pick = regressor_pick(ctx, names, "curve_pick")
    picked = [c for c in curves if c["column"] == pick]
    if picked[0].get("group"):
        group_curves_view(ctx, picked, fixed_effect)
        return
    curve = picked[0]
    current = transforms.get(pick, "level")
    overlay, overlay_label = None, None
    with right:
        options = overlay_options(ctx.frame, pick, current) if curve["kind"] == "continuous" else []
        if options:
            choices = ["none", *options]
            if ss.get(keys.CURVE_OVERLAY) not in choices:
                ss[keys.CURVE_OVERLAY] = "none"
            other = st.selectbox(
                f"Compare with another transform of {plain(pick)}",
                choices,
                key=keys.CURVE_OVERLAY,
                format_func=lambda t: "no comparison" if t == "none" else phrase(pick, t),
                help="Refits the model with only this regressor's transform changed and draws its expected-value curve.",
            )
            if other != "none":
                try:
                    with st.spinner("Refitting with the other transform…"):
                        found = ctx.analyze({"curves"}, switch_transform(ctx.spec, pick, other))["curves"]
                    overlay = next(c for c in found if c["column"] == pick)
                    overlay_label = f"With {phrase(pick, other)} instead: expected value"
                except core.FormwiseError as exc:
                    st.warning(plain(f"The model with {pick} as {other} could not be fitted: {exc}"))
    show_naive = retransforms_differ(curve) and not ctx.ppml
    points = point_sample(ctx.data_id, pick, ctx.outcome, ctx.frame)
    figure = charts.curve_figure(
        curve,
        regressor_label=variable_label(pick, current),
        outcome_column=ctx.outcome,
        outcome_label=ctx.outcome_label,
        points=points,
        show_naive=show_naive,
        overlay=overlay,
        overlay_label=overlay_label,
        ppml=ctx.ppml,
        units=units_of(ctx.result, ctx.spec),
    )
    chart(figure, key="curve_chart")
    st.markdown(plain(curve_sentence(curve, ctx.outcome, show_naive, units_of(ctx.result, ctx.spec))))
    notes = [f"Grey dots: the data, {showing_words(points['shown'], points['total'])}."]
    below, above, top = charts.rows_off_the_axis(figure, points)
    if below or above:
        parts = [f"{above:,} above it (up to {sig(top)})" if above else "", f"{below:,} below it" if below else ""]
        notes.append(
            f"So that the curve stays readable the axis stops short of the most extreme rows: {' and '.join(p for p in parts if p)}."
        )
    if curve["kind"] == "continuous":
        notes.append("Shaded at the sides: values of the regressor beyond those in the data (extrapolation).")
    if fixed_effect:
        notes.append(fixed_effect)
    if show_naive:
        notes.append(
            "The smearing curve (Duan 1983) averages the back-transform over the model's residuals and estimates the "
            "expected value; the naive curve undoes the transform of the prediction alone."
        )
    elif not ctx.ppml and ctx.result["outcome"]["transform"] == "level":
        notes.append(f"{ctx.outcome} is modelled in levels, so no back-transform is needed.")
    st.caption(plain(" ".join(notes)))


def group_pick(curves: list[dict], key: str) -> dict:
    """The one curve of an unmoderated regressor, or a chooser of the moderator's value."""
    if len(curves) == 1:
        return curves[0]
    names = [display.group_text(c["group"]) for c in curves]
    if st.session_state.get(key) not in names:
        st.session_state[key] = names[len(names) // 2]
    return curves[names.index(st.selectbox("Read at", names, key=key))]


def group_curves_view(ctx: Context, curves: list[dict], fixed_effect: str | None = None) -> None:
    """A regressor crossed with a moderator: one expected-value curve per value of it."""
    column = curves[0]["column"]
    moderator = next(iter(curves[0]["group"]))
    names = [display.group_text(c["group"]) for c in curves]
    figure = charts.group_curves_figure(
        curves,
        names,
        regressor_label=variable_label(column, ctx.transforms.get(column)),
        moderator=moderator,
        outcome_column=ctx.outcome,
        outcome_label=ctx.outcome_label,
        ppml=ctx.ppml,
        units=units_of(ctx.result, ctx.spec),
    )
    chart(figure, key="group_curve_chart")
    notes = [
        f"Each curve holds {moderator} at one value and moves {column} alone; the gaps between the curves are the "
        f"differences the model's products with {moderator} allow.",
        "The expected value is the smearing mean (Duan 1983) where the outcome is transformed."
        if ctx.result["outcome"]["transform"] != "level" and not ctx.ppml
        else "",
    ]
    if curves[0]["kind"] == "continuous":
        notes.append("Shaded at the sides: values of the regressor beyond those in the data (extrapolation).")
    notes.append(fixed_effect or "")
    st.caption(plain(" ".join(n for n in notes if n)))
