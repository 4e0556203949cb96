"""The result views under the model header. One view is shown at a time (a selector, not tabs:
Streamlit runs every tab's code), and each view asks ``core.analyze`` only for the sections it
draws, cached by (data id, spec JSON, parts). So the slow sections (residual checks, units check)
never run on a refit while their view is closed.

Rules and wording live in ``app.gridspec`` (the grid) and ``core.output.text`` (sentences), tables in ``app.tables`` and figures in ``app.charts``;
this module only places them on the screen.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from typing import Any

import pandas as pd
import streamlit as st

import core
from app import charts, exports, intake, tables
from app.gridspec import spec_json
from core.inference.choices import (
    overlay_options,
    predict_inputs,
    predict_spec,
    retransforms_differ,
    sample_points,
    switch_transform,
)
from core.inference.compare import COMPARE_PARTS, best_by_aic, compare_row, unique_name
from core.model.transforms import phrase, variable_label
from core.output import tables as core_tables
from core.output.escape import plain
from core.output.numbers import compact, sig
from core.output.text import (
    boxcox_sentence,
    check_sentences,
    curve_sentence,
    factor_words,
    join_words,
    outside_words,
    sentence_case,
    showing_words,
    skew_words,
    units_warning,
)

VIEWS = [
    "Coefficients",
    "Effects of changes",
    "Approximation check",
    "Effect curves",
    "Residual checks",
    "Compare models",
    "Predict",
    "Column profiles",
]
# What every refit computes: the header, the coefficients, the effects and the gap curves.
BASE_PARTS = frozenset({"terms", "fit", "effects", "gap_curves"})
CHECK_PARTS = frozenset({"terms", "diagnostics", "boxcox"})
# Above this many rows the units check (six refits per IHS or shifted-log variable) runs on request.
UNITS_CHECK_AUTO_ROWS = 200_000


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


def show(ctx: Context) -> None:
    """The view selector and the chosen view."""
    ss = st.session_state
    exports.set_chart_caption(ctx.data_id, ctx.data_name, ctx.spec, ctx.result)
    if ss.get("view") not in VIEWS:
        ss.view = VIEWS[0]
    view = st.segmented_control("Show", VIEWS, key="view", required=True, label_visibility="collapsed")
    try:
        {
            "Coefficients": coefficients_view,
            "Effects of changes": effects_view,
            "Approximation check": approximation_view,
            "Effect curves": curves_view,
            "Residual checks": checks_view,
            "Compare models": compare_view,
            "Predict": predict_view,
            "Column profiles": intake.profiles_view,
        }[view or VIEWS[0]](ctx)
    except Exception as exc:  # a core bug must not become a traceback on screen
        failed(exc)


# --- coefficients and effects ------------------------------------------------------------------------
def coefficients_view(ctx: Context) -> None:
    st.table(tables.styled(tables.coefficient_table(ctx.result, ctx.spec)), hide_index=True)
    exports.table_downloads(core_tables.coefficient_table(ctx.result), "estimates", "estimates")


def effects_view(ctx: Context) -> None:
    result, spec = ctx.result, ctx.spec
    table = tables.effects_table(result, spec)
    if table.empty:
        st.info("Add a regressor to see the effect of changing it.")
        return
    st.caption(
        "Each row moves one variable by the change in the grid, every other regressor held at its reference "
        "value (sample mean; most frequent level for categories). The interval is for the exact effect. "
        "“Small-sample adjusted” applies to 0/1 and category effects in log models; “Average over rows” "
        "applies the change to every row and averages, where that differs from the effect at the reference."
        + (" The model is fitted by PPML, so effects read as % changes in the mean of the outcome." if ctx.ppml else "")
    )
    st.table(tables.styled(table, tables.extrapolated_rows(result)), hide_index=True)
    exports.table_downloads(core_tables.effects_table(result), "effects", "effects")
    point = result.get("reference_point") or {}
    if point:
        st.caption(
            plain("Reference values: " + ", ".join(f"{k} = {sig(v, 4) if isinstance(v, float) else v}" for k, v in point.items()))
        )
    units_view(ctx)


def units_view(ctx: Context) -> None:
    """Beside IHS and shifted-log effects: does the effect depend on the variable's units?"""
    unit_bound = [c for c, t in ctx.transforms.items() if t == "ihs" or t.startswith("shifted_log")]
    if not unit_bound:
        return
    if ctx.result.get("n_obs", 0) > UNITS_CHECK_AUTO_ROWS:
        # Six refits per variable take seconds at this size: run them when asked, not on every refit.
        st.markdown(f"##### Does the effect of {plain(join_words(unit_bound))} depend on the units?")
        if not st.toggle(
            f"Check it (refits the model {6 * len(unit_bound)} times on {ctx.result['n_obs']:,} rows)", key="units_check_on"
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
            tables.styled(tables.units_table(check, words), numbers_in=[f"Exact effect of {check['change']}"]),
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
    names = [c["column"] for c in curves]
    left, right = st.columns([2, 3])
    with left:
        pick = regressor_pick(ctx, names, "gap_pick")
    with right:
        tolerance = st.slider(
            "Tolerance: largest acceptable relative error (%)",
            min_value=1,
            max_value=50,
            value=10,
            key="gap_tolerance",
            help="Marks the change sizes where |approximation − exact| / |exact| exceeds this share.",
        )
    curve = curves[names.index(pick)]
    outcome = result["outcome"]
    figure = charts.gap_figure(
        curve,
        tolerance,
        regressor_label=variable_label(pick, ctx.transforms.get(pick)),
        outcome_label=variable_label(outcome["column"], outcome["transform"], "outcome"),
        outcome_column=outcome["column"],
    )
    chart(figure, key="gap_chart")
    st.markdown(plain(charts.curve_summary(curve, tolerance)))


# --- effect curves ----------------------------------------------------------------------------------------
def curves_view(ctx: Context) -> None:
    ss = st.session_state
    with st.spinner("Drawing the curves…"):
        curves = ctx.analyze({"curves"}).get("curves") or []
    if not curves:
        st.info("Add a regressor to see how the predicted outcome moves with it.")
        return
    transforms = ctx.transforms
    names = [c["column"] for c in curves]
    left, right = st.columns([2, 3])
    with left:
        pick = regressor_pick(ctx, names, "curve_pick")
    curve = curves[names.index(pick)]
    current = transforms.get(pick, "level")
    overlay, overlay_label = None, None
    with right:
        options = overlay_options(ctx.frame, pick, current) if curve["kind"] == "continuous" else []
        if options:
            choices = ["none", *options]
            if ss.get("curve_overlay") not in choices:
                ss.curve_overlay = "none"
            other = st.selectbox(
                f"Compare with another transform of {plain(pick)}",
                choices,
                key="curve_overlay",
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
    )
    chart(figure, key="curve_chart")
    st.markdown(plain(curve_sentence(curve, ctx.outcome, show_naive)))
    notes = [f"Grey dots: the data, {showing_words(points['shown'], points['total'])}."]
    if curve["kind"] == "continuous":
        notes.append("Shaded at the sides: values of the regressor beyond those in the data (extrapolation).")
    if show_naive:
        notes.append(
            "The smearing curve (Duan 1983) averages the back-transform over the model's residuals and estimates the "
            "expected value; the naive curve undoes the transform of the prediction alone."
        )
    elif not ctx.ppml and ctx.result["outcome"]["transform"] == "level":
        notes.append(f"{ctx.outcome} is modelled in levels, so no back-transform is needed.")
    st.caption(plain(" ".join(notes)))


# --- residual checks ----------------------------------------------------------------------------------------
def checks_view(ctx: Context) -> None:
    spec = ctx.spec
    if ctx.ppml:
        st.info(
            "These checks test the assumptions of least squares (constant spread, normal residuals). PPML does not "
            "rely on them: it needs only the mean to be right, and its robust standard errors allow any spread. "
            "The distributions of the variables are shown below."
        )
        distributions_section(ctx)
        return
    with st.spinner("Running the residual checks…"):
        result = ctx.analyze(CHECK_PARTS)
        residuals = ctx.analyze({"residuals"}).get("residuals")
    st.markdown("##### What the tests say")
    for concern, sentence in check_sentences(result.get("diagnostics") or {}, result.get("covariance", "HC1")):
        st.markdown(f"{':orange[**⚠**]' if concern else ':green[**✓**]'} {plain(sentence)}")
    if result.get("diagnostics"):
        exports.table_downloads(core_tables.diagnostics_table(result), "checks", "checks")
    if residuals is not None:
        st.markdown("##### The residuals")
        st.caption(
            plain(
                f"Residuals are on the scale of {ctx.outcome_label}. "
                f"Dots: {showing_words(residuals['shown'], residuals['n'])}; lines and bars use every row."
            )
        )
        fitted_label = ctx.outcome_label
        top = st.columns(2)
        with top[0]:
            chart(charts.residuals_figure(residuals, fitted_label), key="resid_fitted", screen_width=HALF_COLUMN)
        with top[1]:
            chart(charts.qq_figure(residuals), key="resid_qq", screen_width=HALF_COLUMN)
        bottom = st.columns(2)
        with bottom[0]:
            chart(charts.residual_histogram(residuals), key="resid_hist", screen_width=HALF_COLUMN)
        with bottom[1]:
            chart(charts.scale_location_figure(residuals, fitted_label), key="resid_scale", screen_width=HALF_COLUMN)

    st.markdown(f"##### Is the transform of {plain(ctx.outcome)} right?")
    boxcox = result.get("boxcox")
    if boxcox:
        chart(charts.boxcox_figure(boxcox, ctx.outcome), key="boxcox_chart")
        st.markdown(plain(boxcox_sentence(boxcox, ctx.outcome)))
    else:
        st.info(
            plain(
                f"The Box-Cox profile needs {ctx.outcome} above zero in every row used; it is not, so only the "
                "transforms that accept zeros (levels, IHS, log(x + 1), PPML) apply."
            )
        )
    distributions_section(ctx)

    st.markdown("##### Regressors that move together")
    vif = tables.vif_table(result, spec)
    if vif.empty:
        st.caption("With a single regressor there is nothing to be entangled with.")
    else:
        left, right = st.columns([1.2, 1])
        with left:
            st.table(tables.styled(vif if vif["Note"].astype(bool).any() else vif.drop(columns="Note")), hide_index=True)
        with right:
            st.caption(
                "The variance inflation factor says how much a coefficient's variance grows because its regressor "
                "is explained by the others; above 10 (a common rule of thumb) the coefficient is hard to pin down "
                "on its own. A quadratic's two terms always move together; that is expected."
            )

    st.markdown("##### Rows with the most pull on the fit")
    influence = (result.get("diagnostics") or {}).get("influence") or {}
    columns = [ctx.outcome] + [r["column"] for r in spec.get("regressors") or []]
    table = tables.influence_table(result, ctx.frame, columns)
    if table.empty:
        st.caption("No row has a Cook's distance above 4/n.")
    else:
        st.caption(
            f"{influence.get('n_above_cutoff', 0):,} rows have a Cook's distance above 4/n = "
            f"{sig(influence.get('cooks_cutoff'), 2)} (a common rule of thumb); the {len(table)} largest are listed, "
            "numbered as in the spreadsheet (the header is row 1). Leverage measures how unusual a row's regressors "
            f"are ({influence.get('n_high_leverage', 0):,} rows above 2k/n = {sig(influence.get('high_leverage_cutoff'), 2)})."
        )
        st.table(tables.styled(table, numbers_in=columns), hide_index=True)


def distributions_section(ctx: Context) -> None:
    items = ctx.analyze({"distributions"}).get("distributions") or []
    if not items:
        return
    st.markdown("##### Each variable, as recorded and as transformed")
    st.caption(
        "Skewness near 0 means a symmetric spread. A transform that brings it close to 0 has tamed a long tail; "
        "variables in levels are shown as recorded only. Categories and 0/1 variables are left out."
    )
    for start in range(0, len(items), 2):
        cols = st.columns(2)
        for col, item in zip(cols, items[start : start + 2], strict=False):
            with col:
                chart(charts.distribution_figure(item), key=f"dist_{item['column']}")
                extra = f" · {item['n_left_out']:,} rows the transform cannot take left out" if item["n_left_out"] else ""
                words = skew_words(item["skew_raw"], item["skew_transformed"], item.get("zeros", 0))
                st.caption(plain(f"{item['label']}: {words}{extra}"))


# --- compare models ----------------------------------------------------------------------------------------
def _save_model(spec: dict[str, Any], data_id: str, suggestion: str) -> None:
    ss = st.session_state
    saved = ss.setdefault("saved_models", [])
    name = (ss.get("save_name") or "").strip() or suggestion
    replaced = [m for m in saved if m["name"] == name and m["data_id"] == data_id]
    for old in replaced:
        saved.remove(old)
    saved.append({"name": name, "spec": {**spec, "name": name}, "data_id": data_id})
    ss.save_message = f"Replaced the saved model “{name}”." if replaced else f"Saved as “{name}”."
    ss.save_name = ""


def _remove_model(data_id: str) -> None:
    ss = st.session_state
    name = ss.get("remove_pick")
    ss.saved_models = [m for m in ss.get("saved_models", []) if not (m["name"] == name and m["data_id"] == data_id)]
    ss.save_message = f"Removed “{name}”."


def compare_view(ctx: Context) -> None:
    ss = st.session_state
    saved_all = ss.get("saved_models", [])
    saved = [m for m in saved_all if m["data_id"] == ctx.data_id]
    taken = [m["name"] for m in saved]
    outcome = ctx.result["outcome"]
    suggestion = unique_name(
        f"{variable_label(outcome['column'], outcome['transform'], 'outcome')}" + (" (PPML)" if ctx.ppml else ""), taken
    )
    name_col, save_col, _, pick_col, remove_col = st.columns([2.6, 1, 0.3, 2, 1], vertical_alignment="bottom")
    with name_col:
        st.text_input("Save this model as…", key="save_name", placeholder=suggestion, max_chars=60)
    with save_col:
        st.button("Save model", key="save_model", on_click=_save_model, args=(ctx.spec, ctx.data_id, suggestion), width="stretch")
    if saved:
        with pick_col:
            st.selectbox("Saved models", taken, key="remove_pick")
        with remove_col:
            st.button("Remove", key="remove_model", on_click=_remove_model, args=(ctx.data_id,), width="stretch")
    if ss.get("save_message"):
        st.caption(plain(ss.pop("save_message")))

    entries = [(m["name"], m["spec"]) for m in saved]
    current_json = spec_json(ctx.spec)
    if not any(spec_json(spec) == current_json for _, spec in entries):
        entries.append(("current model (not saved)", ctx.spec))
    if len(saved_all) > len(saved):
        st.caption(f"{len(saved_all) - len(saved)} saved model(s) belong to another data set and are not shown.")
    rows = []
    fitted: dict[str, dict[str, Any]] = {}
    with st.spinner("Fitting the saved models…"):
        for name, spec in entries:
            try:
                result = ctx.analyze(set(COMPARE_PARTS), spec)
            except core.FormwiseError as exc:
                st.warning(plain(f"“{name}” could not be fitted on this data: {exc}"))
                continue
            rows.append(compare_row(name, spec, result, ctx.data_id))
            fitted[name] = result
    if not rows:
        return
    best = best_by_aic(rows)
    st.markdown("##### Fit, on measures that compare across outcome transforms")
    table = tables.compare_table(rows, best)
    best_rows = [i for i, r in enumerate(rows) if r["name"] in best]
    st.table(tables.styled(table, best_rows), hide_index=True)
    notes = [
        "Original-scale measures put every model on the scale of the outcome as recorded: the log-likelihood adds "
        "the Jacobian of the outcome's transform, so AIC and BIC compare log, IHS, square-root and level outcomes "
        "fairly (lower is better). AIC compares models fitted to the same rows only.",
        "¹ R² as fitted is measured on each model's own outcome scale (for a log outcome, how well log y is "
        "explained), so it is **not comparable across different outcome transforms**; use R² (original scale).",
    ]
    if any(r["ppml"] for r in rows):
        notes.append("PPML maximises a Poisson pseudo-likelihood, which is not comparable with the least-squares likelihoods.")
    if len(rows) == 1:
        notes.append("Save this model, change the grid (say the outcome's transform) and save again to compare.")
    for note in notes:
        st.caption(note)
    st.markdown("##### The same changes under each model (exact effects)")
    names = [r["name"] for r in rows]
    st.table(tables.styled(tables.compare_effects_table(rows), numbers_in=names), hide_index=True)
    st.caption("⚠ marks changes that reach beyond the observed data.")
    exports.table_downloads(core_tables.comparison_table(fitted), "comparison", "comparison")


# --- predict ----------------------------------------------------------------------------------------------------
def _reset_inputs(columns: list[str]) -> None:
    for column in columns:
        st.session_state.pop(f"predict_{column}", None)


def _number_format(value: float) -> str:
    if value == 0 or not math.isfinite(value):
        return "%.2f"
    decimals = max(0, 3 - math.floor(math.log10(abs(value))))
    return f"%.{min(decimals, 6)}f"


def predict_view(ctx: Context) -> None:
    spec = ctx.spec
    reference = json.dumps(ctx.result.get("reference_point") or {}, sort_keys=True)
    inputs = prediction_inputs(ctx.data_id, spec_json(spec), reference, ctx.frame)
    if not inputs:
        st.info("Add a regressor to predict the outcome for chosen values.")
        return
    st.caption(
        "Enter the values to predict for; they start at the reference point (sample means, most frequent levels). "
        f"The prediction is on the scale of {plain(ctx.outcome)} as recorded."
    )
    values: dict[str, Any] = {}
    per_row = 4
    for start in range(0, len(inputs), per_row):
        cols = st.columns(per_row)
        for col, item in zip(cols, inputs[start : start + per_row], strict=False):
            column = item["column"]
            key = f"predict_{column}"
            with col:
                if item["kind"] == "choice":
                    options = item["options"]
                    if st.session_state.get(key) not in options:
                        st.session_state.pop(key, None)
                    default = options.index(item["default"]) if item["default"] in options else 0
                    values[column] = st.selectbox(
                        plain(column),
                        options,
                        index=default,
                        key=key,
                        format_func=lambda v: f"{v:g}" if isinstance(v, float) else str(v),
                    )
                else:
                    values[column] = st.number_input(
                        plain(column),
                        value=float(item["default"]),
                        step=float(item["step"]),
                        format=_number_format(float(item["default"])),
                        key=key,
                        help=f"Observed from {compact(item['low'])} to {compact(item['high'])}.",
                    )
    st.button("Back to the reference point", key="predict_reset", on_click=_reset_inputs, args=([i["column"] for i in inputs],))
    with st.spinner("Predicting…"):
        result = ctx.analyze({"predictions"}, predict_spec(spec, values))
    prediction = (result.get("predictions") or [None])[0]
    if prediction is None:
        st.info("No prediction could be made for these values.")
        return
    outside = outside_words(prediction, inputs)
    headline = sig(prediction.get("smearing"), 4)
    st.markdown(f"#### Expected {plain(ctx.outcome)}: {plain(headline)}" + (" ⚠" if outside else ""))
    st.table(
        tables.styled(tables.prediction_table(prediction, ctx.outcome, ctx.ppml), numbers_in=[f"Predicted {ctx.outcome}"]),
        hide_index=True,
    )
    if outside:
        st.warning(
            plain("Beyond the data: " + "; ".join(outside) + ". The prediction extrapolates the fitted curve and may be far off.")
        )
    transform = ctx.result["outcome"]["transform"]
    if ctx.ppml:
        st.caption(
            "PPML models the mean of the outcome directly, so the three retransforms coincide. The interval is for the "
            "expected value; PPML says nothing about the spread of a single new observation."
        )
    elif transform == "level":
        st.caption(f"{plain(ctx.outcome)} is modelled in levels, so the three retransforms coincide.")
    else:
        st.caption(
            f"The model predicts {plain(ctx.outcome_label)}; turning that back into {plain(ctx.outcome)} needs a "
            "retransform. The naive one "
            "undoes the transform of the prediction alone; smearing (Duan 1983) averages over the model's residuals; "
            "normal theory assumes the residuals are normal. The prediction interval is for one new row and is wider "
            "than the interval for the expected value."
        )
