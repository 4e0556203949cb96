"""Saving and comparing models, and predicting the outcome for chosen values."""

from __future__ import annotations

import json
import math
from typing import Any

import streamlit as st

import core
from app import exports, keys, tables
from app.context import Context, fixed_effect_spec, prediction_inputs
from app.gridspec import spec_json
from core.inference.choices import (
    predict_spec,
)
from core.inference.compare import COMPARE_PARTS, best_by_aic, compare_row, unique_name
from core.model.transforms import variable_label
from core.output import display
from core.output import tables as core_tables
from core.output.escape import plain
from core.output.numbers import compact, sig
from core.output.text import (
    outside_words,
    sentence_case,
)


# --- compare models ----------------------------------------------------------------------------------------
def _save_model(spec: dict[str, Any], data_id: str, suggestion: str) -> None:
    ss = st.session_state
    saved = ss.setdefault(keys.SAVED_MODELS, [])
    name = (ss.get(keys.SAVE_NAME) or "").strip() or suggestion
    same = next((m for m in saved if m["data_id"] == data_id and spec_json(m["spec"]) == spec_json(spec)), None)
    if same is not None:
        ss[keys.SAVE_MESSAGE] = f"This model is already saved as “{same['name']}”; nothing was added."
        ss[keys.SAVE_NAME] = ""
        return
    replaced = [m for m in saved if m["name"] == name and m["data_id"] == data_id]
    for old in replaced:
        saved.remove(old)
    saved.append({"name": name, "spec": {**spec, "name": name}, "data_id": data_id})
    ss[keys.SAVE_MESSAGE] = f"Replaced the saved model “{name}”." if replaced else f"Saved as “{name}”."
    ss[keys.SAVE_NAME] = ""


def _remove_model(data_id: str) -> None:
    ss = st.session_state
    name = ss.get(keys.REMOVE_PICK)
    ss[keys.SAVED_MODELS] = [m for m in ss.get(keys.SAVED_MODELS, []) if not (m["name"] == name and m["data_id"] == data_id)]
    ss[keys.SAVE_MESSAGE] = f"Removed “{name}”."


def compare_view(ctx: Context) -> None:
    ss = st.session_state
    saved_all = ss.get(keys.SAVED_MODELS, [])
    saved = [m for m in saved_all if m["data_id"] == ctx.data_id]
    taken = [m["name"] for m in saved]
    outcome = ctx.result["outcome"]
    suggestion = unique_name(
        f"{variable_label(outcome['column'], outcome['transform'], 'outcome')}" + (" (PPML)" if ctx.ppml else ""), taken
    )
    name_col, save_col, _, pick_col, remove_col = st.columns([2.6, 1, 0.3, 2, 1], vertical_alignment="bottom")
    with name_col:
        st.text_input("Save this model as…", key=keys.SAVE_NAME, placeholder=suggestion, max_chars=60)
    with save_col:
        st.button("Save model", key="save_model", on_click=_save_model, args=(ctx.spec, ctx.data_id, suggestion), width="stretch")
    if saved:
        with pick_col:
            st.selectbox("Saved models", taken, key=keys.REMOVE_PICK)
        with remove_col:
            st.button("Remove", key="remove_model", on_click=_remove_model, args=(ctx.data_id,), width="stretch")
    if ss.get(keys.SAVE_MESSAGE):
        st.caption(plain(ss.pop(keys.SAVE_MESSAGE)))

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
    table = display.compare_table(rows, best)
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
    st.table(tables.styled(display.compare_effects_table(rows), numbers_in=names), hide_index=True)
    st.caption("⚠ marks changes that reach beyond the observed data.")
    note = [
        "Original-scale measures compare models with different outcome transforms; AIC compares models on the same rows only."
    ]
    exports.table_downloads(core_tables.from_frame("Models compared", table, note), "comparison", "comparison")


# --- predict ----------------------------------------------------------------------------------------------------
def _reset_inputs(columns: list[str]) -> None:
    for column in columns:
        st.session_state.pop(f"predict_{column}", None)


def _number_format(value: float) -> str:
    if value == 0 or not math.isfinite(value):
        return "%.2f"
    decimals = max(0, 3 - math.floor(math.log10(abs(value))))
    return f"%.{min(decimals, 6)}f"


def _predicted(ctx: Context, values: dict[str, Any]) -> tuple[dict[str, Any], str | None]:
    """The prediction at ``values`` with the fixed effect chosen (absorbed models), and which."""
    chosen, fixed_effect = fixed_effect_spec(ctx, "predict_fixed_effect")
    with st.spinner("Predicting…"):
        try:
            return ctx.analyze({"predictions"}, predict_spec(chosen, values)), fixed_effect
        except core.FormwiseError as exc:  # a level the fit did not keep (all its rows dropped)
            st.warning(plain(f"{exc} The prediction reads the average fixed effect instead."))
            return ctx.analyze({"predictions"}, predict_spec(ctx.spec, values)), None


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
    result, fixed_effect = _predicted(ctx, values)
    prediction = (result.get("predictions") or [None])[0]
    if prediction is None:
        st.info("No prediction could be made for these values.")
        return
    # What this prediction adds to the model's warnings (a value beyond floating point, say).
    for warning in result.get("warnings") or []:
        if warning not in (ctx.result.get("warnings") or []):
            st.warning(plain(sentence_case(warning)))
    outside = outside_words(prediction, inputs)
    headline = sig(prediction.get("smearing"), 4)
    st.markdown(f"#### Expected {plain(ctx.outcome)}: {plain(headline)}" + (" ⚠" if outside else ""))
    st.table(
        tables.styled(display.prediction_table(prediction, ctx.outcome, ctx.ppml), numbers_in=[f"Predicted {ctx.outcome}"]),
        hide_index=True,
    )
    if outside:
        st.warning(
            plain("Beyond the data: " + "; ".join(outside) + ". The prediction extrapolates the fitted curve and may be far off.")
        )
    if fixed_effect:
        st.caption(plain(fixed_effect))
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
