"""The units check reuses the fitted design and redoes only the rescaled regressor's columns; its
rows are exactly those of refitting from the rescaled data (the design built afresh)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import core.inference.units as analysis
from core.model.fitted import fit_model
from core.model.spec import parse_spec


@pytest.fixture(scope="module")
def data() -> pd.DataFrame:
    rng = np.random.default_rng(9)
    n = 20_000
    spend = rng.lognormal(2.0, 1.0, n) * (rng.random(n) > 0.3)
    signed = rng.normal(0.0, 5.0, n)
    price = rng.lognormal(1.0, 0.4, n)
    region = rng.choice(["a", "b", "c"], n)
    y = np.exp(1.0 + 0.05 * np.arcsinh(spend) - 0.5 * np.log(price) + 0.01 * signed + rng.normal(0, 0.3, n))
    return pd.DataFrame({"y": y, "spend": spend, "signed": signed, "price": price, "region": region, "w": rng.uniform(0.5, 2, n)})


SPECS = {
    "ihs": {"regressors": [{"column": "spend", "transform": "ihs"}]},
    "ihs weighted, at": {
        "regressors": [{"column": "spend", "transform": "ihs", "change": "+5"}],
        "weights": "w",
        "at": {"spend": 3},
    },
    "shifted log, rows kept": {"regressors": [{"column": "signed", "transform": "shifted_log:40"}]},
    "shifted log, rows change": {"regressors": [{"column": "signed", "transform": "shifted_log:12"}]},
    "ppml": {
        "regressors": [{"column": "spend", "transform": "ihs"}],
        "estimator": "ppml",
        "outcome": {"column": "y", "transform": "level"},
    },
}


@pytest.mark.parametrize("name", list(SPECS))
def test_reused_design_gives_the_rows_of_a_fresh_refit(data, name, monkeypatch):
    extra = dict(SPECS[name])
    regressors = [
        *extra.pop("regressors"),
        {"column": "price", "transform": "log"},
        {"column": "region", "transform": "category"},
    ]
    spec = {"outcome": {"column": "y", "transform": "log"}, "regressors": regressors, "covariance": "HC1", **extra}
    model_spec = parse_spec(spec, data)
    column = regressors[0]["column"]
    reused = analysis.units_check(data, model_spec, column, fit_model(data, model_spec))
    monkeypatch.setattr(analysis, "rescaled_design", lambda *args, **kwargs: None)
    fresh = analysis.units_check(data, model_spec, column)
    assert reused == fresh
