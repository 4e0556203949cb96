"""Scenarios: several changes at once (docs/contract.md §2.11, §3.14). The exact combined effect is
the change in the model's own expected outcome, recomputed here from the estimates without core's
transforms (written out in tests/test_properties.py); a single-change scenario is the effects
table's entry; the combined effect under a log outcome is not the sum of the single ones."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import core
from tests.helpers import effect
from tests.test_properties import OUTCOMES, REGRESSORS, invented

PARTS = {"terms", "effects", "scenarios"}


def _own_expected_outcome(data, result, y_t: str, x_t: str, points: list[tuple[float, float]]) -> list[float]:
    """E[y | x] at each (x1, x2) from the model's estimates and residuals: the index for a level
    outcome, exp(η)·mean(exp ê) for a log outcome, the smearing mean otherwise (Duan 1983)."""
    forward, inverse = OUTCOMES[y_t]
    b = np.array([t["estimate"] for t in result["terms"]])

    def rows(x1, x2):
        x1 = np.atleast_1d(np.asarray(x1, dtype=float))
        return np.column_stack([np.ones_like(x1), REGRESSORS[x_t](x1), np.broadcast_to(x2, x1.shape)])

    resid = forward(data["y"].to_numpy()) - rows(data["x1"].to_numpy(), data["x2"].to_numpy()) @ b
    out = []
    for x1, x2 in points:
        eta = float((rows(x1, x2) @ b)[0])
        out.append(eta if y_t == "level" else float(np.mean(inverse(eta + resid))))
    return out


@pytest.mark.parametrize("x_t", list(REGRESSORS))
@pytest.mark.parametrize("y_t", list(OUTCOMES))
@settings(max_examples=8, deadline=None, database=None)
@given(
    seed=st.integers(min_value=0, max_value=2**32 - 1),
    percent=st.sampled_from([-30, -10, 10, 50]),
    units=st.sampled_from([-1.0, 0.5, 2.0]),
)
def test_scenario_exact_is_the_models_own_prediction_change(y_t, x_t, seed, percent, units):
    data = invented(seed)
    spec = {
        "outcome": {"column": "y", "transform": y_t},
        "regressors": [{"column": "x1", "transform": x_t, "change": f"{percent:+d}%"}, {"column": "x2", "change": f"{units:+g}"}],
        "scenarios": [{"name": "both", "changes": {"x1": f"{percent:+d}%", "x2": f"{units:+g}"}}],
    }
    result = core.analyze(data, spec, parts=PARTS)
    scenario = result["scenarios"][0]
    x1, x2 = data["x1"].mean(), data["x2"].mean()  # the reference point: sample means (§2.8)
    before, after = _own_expected_outcome(data, result, y_t, x_t, [(x1, x2), (x1 * (1 + percent / 100), x2 + units)])
    expected = after - before if y_t == "level" else 100.0 * (after / before - 1.0)
    assert math.isclose(scenario["exact"], expected, rel_tol=1e-8, abs_tol=1e-10)
    assert math.isclose(scenario["before"], before, rel_tol=1e-9) and math.isclose(scenario["after"], after, rel_tol=1e-9)
    assert scenario["ci_low"] <= scenario["exact"] <= scenario["ci_high"]
    singles = sum(effect(result, c)["approximate"] for c in ("x1", "x2"))  # the same changes, one at a time
    assert math.isclose(scenario["sum_of_approximate"], singles, rel_tol=1e-9, abs_tol=1e-12)


SINGLES = [
    ("drink_price", "+10%"),
    ("foot_traffic", "+25%"),
    ("ad_spend", "+100%"),
    ("years_open", "+1"),
    ("app_order_share", "+0.1"),
    ("promo", "0->1"),
    ("region", "Coast->Inland"),
]


@pytest.mark.parametrize("outcome", ["log", "ihs", "level"])
def test_a_single_change_scenario_is_the_effects_table_entry(kiosks, default_spec, outcome):
    """The demo (invented kiosks) with its changes from demo_data/default_spec.json, one per scenario."""
    default_spec["outcome"]["transform"] = outcome
    default_spec["scenarios"] = [{"name": column, "changes": {column: change}} for column, change in SINGLES]
    result = core.analyze(kiosks, default_spec, parts=PARTS)
    for scenario in result["scenarios"]:
        column = scenario["name"]
        row = next(e for e in result["effects"] if e["column"] == column and e["change"] == dict(SINGLES)[column])
        for key in ("exact", "ci_low", "ci_high"):
            assert math.isclose(scenario[key], row[key], rel_tol=1e-12, abs_tol=1e-12), (column, key)
        assert math.isclose(scenario["sum_of_approximate"], row["approximate"], rel_tol=1e-12, abs_tol=1e-12)
        assert scenario["units"] == row["units"]


def test_a_combined_change_under_a_log_outcome_is_not_the_sum(kiosks, default_spec):
    """Price +10 %, the promotion on and a move inland (the demo's invented kiosks): under the log
    outcome 100·(exp(Δη₁ + Δη₂ + Δη₃) - 1) differs from the sum of the single effects."""
    changes = {"drink_price": "+10%", "promo": "0->1", "region": "Coast->Inland"}
    default_spec["scenarios"] = [{"name": "price, promotion, inland", "changes": changes}]
    result = core.analyze(kiosks, default_spec, parts=PARTS)
    scenario = result["scenarios"][0]
    singles = [next(e for e in result["effects"] if e["column"] == c and e["change"] == t)["exact"] for c, t in changes.items()]
    combined = 100.0 * (np.prod([1 + s / 100 for s in singles]) - 1)
    assert math.isclose(scenario["exact"], combined, rel_tol=1e-10)
    assert abs(scenario["exact"] - sum(singles)) > 0.1
    assert math.isclose(scenario["after"] / scenario["before"], 1 + scenario["exact"] / 100, rel_tol=1e-12)
    assert [c["from"] for c in scenario["changes"]][1:] == [0.0, "Coast"]


@pytest.mark.parametrize(
    ("scenarios", "fragment"),
    [
        ({"name": "x"}, "spec.scenarios[0].changes"),
        ([{"name": "", "changes": {"promo": "0->1"}}], "'name'"),
        ([{"name": "a", "changes": {"kiosk_id": "+1"}}], "not a regressor"),
        ([{"name": "a", "changes": {"region": "+1"}}], "category"),
        ([{"name": "a", "changes": {"promo": "0->1"}}, {"name": "a", "changes": {"promo": "0->1"}}], "another scenario"),
        ([{"name": "a", "changes": {"promo": "sideways"}}], "cannot read the change"),
        ([{"name": "a", "changes": {"region": "Coast->Moon"}}], "not a level"),
    ],
)
def test_scenario_specs_are_checked(kiosks, default_spec, scenarios, fragment):
    default_spec["scenarios"] = scenarios if isinstance(scenarios, list) else [scenarios]
    with pytest.raises(core.SpecError) as caught:
        core.analyze(kiosks, default_spec, parts=PARTS)
    assert fragment in str(caught.value)


def test_no_scenarios_gives_an_empty_list(kiosks, default_spec):
    assert core.analyze(kiosks, default_spec, parts={"scenarios"})["scenarios"] == []
