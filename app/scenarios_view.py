"""The "Scenarios" view: several changes at once, named and priced by the fitted model
(``core.inference.scenarios``). A scenario is built from the model's regressors, its effect is
shown before it is saved, and saved scenarios go into the spec's "scenarios" (so into the spec
file, and back when one is loaded); their table is exported like every table."""

from __future__ import annotations

from typing import Any

import streamlit as st

import core
from app import exports, keys, tables
from app.context import Context
from core.model.transforms import variable_label
from core.output import display
from core.output import tables as core_tables
from core.output.escape import plain
from core.output.numbers import interval, sig
from core.output.text import sentence_case

CHANGE_HELP = "+10% (relative), +1 (in the variable's units), 0->1 or Coast->Inland (from one value to another)."


def _default_change(ctx: Context, column: str) -> str:
    """The change the effects table uses for ``column`` (the grid's, else the default one)."""
    found = next((e["change"] for e in ctx.result.get("effects") or [] if e["column"] == column), None)
    return str(found) if found else "+1"


def effect_sentence(entry: dict[str, Any], outcome: str) -> str:
    """What a priced scenario says, in one sentence of plain words."""
    percent = entry["units"] == "percent"
    unit = " %" if percent else ""
    digits = 3 if percent else 4
    if entry.get("exact") is None:
        return "A change in this scenario leaves the values its variable's transform accepts, so it has no effect to show."
    text = (
        f"Together these changes move the expected {outcome} from {sig(entry['before'], 5)} to {sig(entry['after'], 5)}: "
        f"{sig(entry['exact'], digits, signed=True)}{unit}{' change' if percent else ''} "
        f"(95 % interval {interval(entry['ci_low'], entry['ci_high'], digits, unit)}). "
        f"The single changes' first-order effects add up to {sig(entry['sum_of_approximate'], digits, signed=True)}{unit}"
    )
    if percent:
        text += ": under a transformed outcome the combined effect is not the sum of the single ones"
    return text + "."


def _save(scenario: dict[str, Any]) -> None:
    """Add the scenario (replacing one of the same name) to the spec's list."""
    ss = st.session_state
    kept = [s for s in ss.get(keys.SCENARIOS) or [] if s["name"] != scenario["name"]]
    ss[keys.SCENARIOS] = [*kept, scenario]


def builder(ctx: Context) -> None:
    """Pick the variables, their changes and a name; see the effect; save it."""
    names = [r["column"] for r in ctx.spec.get("regressors") or []]
    transforms = ctx.transforms
    st.markdown("##### Build a scenario")
    left, right = st.columns([2, 3])
    with left:
        name = st.text_input("Scenario name", key=keys.SCENARIO_NAME, placeholder="price up, promotion on, inland")
    with right:
        picked = st.multiselect(
            "Variables to change together",
            names,
            key=keys.SCENARIO_PICK,
            format_func=lambda c: variable_label(c, transforms.get(c)),
            placeholder="pick one or more regressors",
        )
    if not picked:
        st.caption("Pick the variables that change together; every other regressor stays at its reference value.")
        return
    changes: dict[str, str] = {}
    for column, box in zip(picked, st.columns(min(len(picked), 4) or 1) * len(picked), strict=False):
        with box:
            changes[column] = st.text_input(
                f"Change of {column}", value=_default_change(ctx, column), key=f"scenario_change_{column}", help=CHANGE_HELP
            )
    draft = {"name": name.strip() or "this scenario", "changes": changes}
    try:
        found = ctx.analyze({"scenarios"}, {**ctx.spec, "scenarios": [draft]})["scenarios"][0]
    except core.FormwiseError as exc:
        st.warning(plain(sentence_case(str(exc))))
        return
    st.markdown(plain(effect_sentence(found, ctx.outcome)))
    if st.button("Save this scenario", key="scenario_save", disabled=not name.strip(), help="Saved in the spec file too."):
        _save({"name": name.strip(), "changes": changes})
        st.rerun()


def saved(ctx: Context) -> None:
    """The saved scenarios priced by the model on screen, their downloads, and removal."""
    ss = st.session_state
    if not ctx.spec.get("scenarios"):
        st.info("No scenario saved yet. Build one above: its effect shows before you save it.")
        return
    with st.spinner("Pricing the scenarios…"):
        result = ctx.analyze({"scenarios"})
    st.markdown("##### Saved scenarios")
    st.table(tables.styled(display.scenarios_table(result)), hide_index=True)
    exports.table_downloads(core_tables.scenarios_table(result), "scenarios", "scenarios")
    st.caption(
        "Exact: the change of the model's expected outcome with all the scenario's changes made together, every "
        "other regressor at its reference value (smearing where the outcome is transformed). Before and after: "
        "the expected outcome on its original scale. Saved scenarios go into the spec file."
    )
    left, right = st.columns([3, 1], vertical_alignment="bottom")
    with left:
        pick = st.selectbox("Scenario", [s["name"] for s in ctx.spec["scenarios"]], key=keys.SCENARIO_REMOVE)
    with right:
        if st.button("Remove it", key="scenario_remove_button", width="stretch"):
            ss[keys.SCENARIOS] = [s for s in ss.get(keys.SCENARIOS) or [] if s["name"] != pick]
            st.rerun()


def scenarios_view(ctx: Context) -> None:
    if not ctx.spec.get("regressors"):
        st.info("Add regressors to build a scenario of several changes.")
        return
    with st.container(border=True):
        builder(ctx)
    saved(ctx)
