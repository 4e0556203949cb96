"""The Scenarios view and the time-series choices in the app (AppTest, the demo's invented kiosks):
a scenario built of several changes shows its effect, is saved into the spec (and the spec file),
comes back with the spec file, and its table downloads; HAC and Driscoll-Kraay come from the
registry with a time-column picker beside them."""

from __future__ import annotations

import json

import core
from app.gridspec import with_time_and_scenarios
from app.scenarios_view import effect_sentence
from core.output.escape import plain
from tests.app_support import show as open_view
from tests.app_support import start

PRICE_PROMO = {"drink_price": "+10%", "promo": "0->1"}


def _build(at, name: str, changes: dict[str, str]):
    open_view(at, "Scenarios")
    at.text_input(key="scenario_name").set_value(name)
    at.multiselect(key="scenario_pick").set_value(list(changes)).run()
    for column, change in changes.items():
        at.text_input(key=f"scenario_change_{column}").set_value(change)
    at.run()
    assert not at.exception, at.exception
    return at


def test_a_scenario_is_priced_saved_into_the_spec_and_exported(kiosks, default_spec) -> None:
    at = _build(start(), "price and promotion", PRICE_PROMO)
    expected = core.analyze(kiosks, default_spec | {"scenarios": [{"name": "x", "changes": PRICE_PROMO}]}, parts={"scenarios"})
    sentence = plain(effect_sentence(expected["scenarios"][0], "weekly_revenue"))
    assert sentence in [m.value for m in at.markdown]  # the effect shows before it is saved
    at.button(key="scenario_save").click().run()
    assert not at.exception, at.exception
    spec = at.session_state["last_good"]["spec"]
    assert spec["scenarios"] == [{"name": "price and promotion", "changes": PRICE_PROMO}]
    table = at.table[0].value
    assert list(table["Scenario"]) == ["price and promotion"]
    downloads = {b.key for b in at.get("download_button")}
    assert {"download_scenarios_csv", "download_scenarios_markdown", "download_scenarios_latex"} <= downloads


def test_the_time_picker_comes_with_driscoll_kraay_and_its_choice_enters_the_spec(default_spec) -> None:
    """Driscoll-Kraay is in the standard-error menu (from the registry); choosing it shows the
    time-column picker, and the fit uses its column and the saved scenarios."""
    at = start()
    spec = default_spec | {"covariance": "driscoll_kraay", "time": "week", "scenarios": [{"name": "s", "changes": PRICE_PROMO}]}
    at.session_state["scenarios"] = spec["scenarios"]
    at.session_state["time_column"] = "week"
    at.selectbox(key="covariance").set_value("driscoll_kraay").run()
    assert not at.exception, at.exception
    assert at.selectbox(key="time_column").value == "week"
    good = at.session_state["last_good"]
    assert good["spec"]["time"] == "week" and good["result"]["time_series"]["periods"] == 25
    assert good["spec"]["scenarios"] == spec["scenarios"]


def test_scenarios_naming_a_removed_regressor_are_set_aside(default_spec) -> None:
    scenarios = [{"name": "a", "changes": {"promo": "0->1"}}, {"name": "b", "changes": {"foot_traffic": "+5%"}}]
    spec = dict(default_spec, regressors=[r for r in default_spec["regressors"] if r["column"] != "foot_traffic"])
    out, notes = with_time_and_scenarios(spec, "week", None, scenarios)
    assert out["scenarios"] == scenarios[:1] and "foot_traffic" in notes[0]
    assert "time" not in out  # HC1: no time key
    out, _ = with_time_and_scenarios(dict(spec, covariance="HAC"), "week", 3, [])
    assert out["time"] == "week" and out["lags"] == 3 and "scenarios" not in out


def test_the_spec_file_round_trip_keeps_scenarios(kiosks, default_spec) -> None:
    from app.exports import read_spec_upload, spec_file

    spec = default_spec | {"scenarios": [{"name": "s", "changes": PRICE_PROMO}], "covariance": "HAC", "time": "week"}
    current, _ = read_spec_upload(spec_file(spec, {}).encode(), kiosks)
    assert current["scenarios"] == spec["scenarios"] and current["time"] == "week"
    assert json.loads(spec_file(spec, {}))["scenarios"][0]["changes"] == PRICE_PROMO
