"""Fits, covariances and residual checks that pass over the rows in chunks, on data spanning
several chunks (core.model.ols.CHUNK_ROWS), against statsmodels as the reference library."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.stats import diagnostic as smd

import core
from core.model.fitted import fit_model
from core.model.ols import CHUNK_ROWS
from core.model.spec import parse_spec
from tests.helpers import rel_err, term

N = 2 * CHUNK_ROWS + 12_345  # two whole chunks and a part


@pytest.fixture(scope="module")
def data() -> pd.DataFrame:
    rng = np.random.default_rng(11)
    price = rng.lognormal(1.0, 0.5, N)
    age = rng.uniform(0, 40, N)
    promo = (rng.random(N) < 0.3).astype(float)
    region = rng.choice(["Coast", "Inland", "North"], N, p=[0.5, 0.3, 0.2])
    noise = rng.normal(0, 0.2 + 0.3 * promo + 0.01 * age, N)
    y = np.exp(1.0 - 0.7 * np.log(price) + 0.01 * age + 0.2 * promo + (region == "North") * 0.1 + noise)
    return pd.DataFrame(
        {
            "y": y,
            "price": price,
            "age": age,
            "promo": promo,
            "region": region,
            "w": rng.uniform(0.5, 2.0, N),
            "grp": rng.integers(0, 300, N),
        }
    )


def _spec(covariance: str, **extra) -> dict:
    return {
        "outcome": {"column": "y", "transform": "log"},
        "regressors": [
            {"column": "price", "transform": "log"},
            {"column": "age", "transform": "level"},
            {"column": "promo", "transform": "level"},
            {"column": "region", "transform": "category", "reference": "Coast"},
        ],
        "covariance": covariance,
        **extra,
    }


NAMES = ["intercept", "log(price)", "age", "promo", "region[Inland]", "region[North]"]


@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("covariance", ["classical", "HC0", "HC1", "HC2", "HC3", "cluster"])
def test_estimates_and_standard_errors_against_statsmodels(data, covariance, weighted):
    extra = {"weights": "w"} if weighted else {}
    if covariance == "cluster":
        extra["cluster"] = "grp"
    spec = _spec(covariance, **extra)
    result = core.analyze(data, spec, parts={"terms", "fit"})
    design, _, _ = fit_model(data, parse_spec(spec, data))
    model = sm.WLS(design.y, np.asarray(design.X), weights=data["w"].to_numpy()) if weighted else sm.OLS(design.y, design.X)
    cov_type = "nonrobust" if covariance == "classical" else covariance
    kwds = {"groups": data["grp"].to_numpy()} if covariance == "cluster" else None
    ref = model.fit(cov_type=cov_type, cov_kwds=kwds)  # statsmodels as reference library
    for i, name in enumerate(NAMES):
        row = term(result, name)
        assert rel_err(row["estimate"], ref.params[i]) <= 1e-10, name
        assert rel_err(row["std_error"], ref.bse[i]) <= 1e-9, name
    assert rel_err(result["fit"]["r2"], ref.rsquared) <= 1e-10
    assert rel_err(result["fit"]["loglik"], ref.llf) <= 1e-10


@pytest.mark.filterwarnings("ignore:The design matrix is rank-deficient")
def test_residual_checks_against_statsmodels(data):
    spec = _spec("HC1")
    result = core.analyze(data, spec, parts={"diagnostics"})["diagnostics"]
    design, _, _ = fit_model(data, parse_spec(spec, data))
    reference = sm.OLS(design.y, design.X).fit()
    # statsmodels as reference library; promo^2 = promo and region dummies' products are 0,
    # so White's auxiliary design is rank deficient and its df is the rank less one.
    bp = smd.het_breuschpagan(reference.resid, design.X, robust=True)
    assert result["breusch_pagan"]["statistic"] == pytest.approx(bp[0], rel=1e-8)
    white = smd.het_white(reference.resid, design.X)
    assert result["white"]["statistic"] == pytest.approx(white[0], rel=1e-8)
    assert result["white"]["p_value"] == pytest.approx(white[1], rel=1e-8, abs=1e-300)
    i0, i1 = np.triu_indices(design.X.shape[1])
    assert result["white"]["df"] == np.linalg.matrix_rank(design.X[:, i0] * design.X[:, i1]) - 1
    z = (reference.fittedvalues - reference.fittedvalues.mean()) / reference.fittedvalues.std()
    full = sm.OLS(design.y, np.column_stack([design.X, z**2, z**3])).fit()
    f_value, _, _ = full.compare_f_test(reference)
    assert result["reset"]["statistic"] == pytest.approx(f_value, rel=1e-8)


def _lstsq_r2(v: np.ndarray, Z: np.ndarray) -> float:
    """R² = 1 - SSR/SST (SST centred) of v on Z by numpy's SVD least squares."""
    coef = np.linalg.lstsq(Z, v, rcond=None)[0]
    resid = v - Z @ coef
    return 1.0 - float(resid @ resid) / float(((v - v.mean()) ** 2).sum())


@pytest.mark.parametrize("weighted", [False, True])
def test_white_with_a_quadratic_and_weights_matches_a_direct_least_squares(data, weighted):
    """age and age² give products that repeat others exactly (age·age = 1·age²); the df is the
    rank of the auxiliary design less one, the statistic n·R² of the direct fit."""
    spec = _spec("HC1", **({"weights": "w"} if weighted else {}))
    spec["regressors"][1]["transform"] = "quadratic"
    small = data.iloc[:30_000]
    result = core.analyze(small, spec, parts={"diagnostics"})["diagnostics"]
    design, fit, _ = fit_model(small, parse_spec(spec, small))
    root = np.sqrt(fit.weights) if weighted else np.ones(len(fit.resid))
    u, Xw = fit.resid * root, np.asarray(design.X) * root[:, None]
    i0, i1 = np.triu_indices(Xw.shape[1])
    Z = Xw[:, i0] * Xw[:, i1]
    assert result["white"]["df"] == np.linalg.matrix_rank(Z) - 1
    assert result["white"]["statistic"] == pytest.approx(len(u) * _lstsq_r2(u * u, Z), rel=1e-8)
    assert result["breusch_pagan"]["statistic"] == pytest.approx(len(u) * _lstsq_r2(u * u, Xw), rel=1e-8)
