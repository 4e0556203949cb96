"""Bad specs and bad data get a clear error naming the offending part (docs/contract.md §2, §3, §6).

The data is the project's invented demo data (demo_data/kiosks.csv) with its default spec,
bent one way at a time.
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest

import core
from tests.helpers import effect

QUICK = {"terms", "fit", "effects"}


def _raises(kind, data, spec, *fragments):
    with pytest.raises(kind) as caught:
        core.analyze(data, spec, parts=QUICK)
    message = str(caught.value)
    for fragment in fragments:
        assert fragment in message, f"{fragment!r} not in message: {message}"
    return message


def test_default_spec_runs(kiosks, default_spec):
    """The baseline every case below bends: it must itself be valid."""
    result = core.analyze(kiosks, default_spec, parts=QUICK)
    assert result["n_obs"] == len(kiosks)
    assert result["dropped"] == []


# --- spec errors ----------------------------------------------------------------------------


def test_unknown_top_level_key(kiosks, default_spec):
    default_spec["colour"] = "blue"
    _raises(core.SpecError, kiosks, default_spec, "colour")


def test_unknown_key_in_a_regressor(kiosks, default_spec):
    default_spec["regressors"][1]["tranform"] = "log"
    _raises(core.SpecError, kiosks, default_spec, "tranform", "regressors[1]")


def test_unknown_transform(kiosks, default_spec):
    default_spec["regressors"][0]["transform"] = "cuberoot"
    _raises(core.SpecError, kiosks, default_spec, "cuberoot", "drink_price")


def test_unknown_outcome_transform(kiosks, default_spec):
    default_spec["outcome"]["transform"] = "log10"
    _raises(core.SpecError, kiosks, default_spec, "log10", "outcome")


def test_missing_regressor_column(kiosks, default_spec):
    default_spec["regressors"][0]["column"] = "drink_prize"
    _raises(core.SpecError, kiosks, default_spec, "drink_prize")


def test_missing_outcome_column(kiosks, default_spec):
    default_spec["outcome"]["column"] = "revenue"
    _raises(core.SpecError, kiosks, default_spec, "revenue", "outcome")


def test_outcome_also_a_regressor(kiosks, default_spec):
    default_spec["regressors"].append({"column": "weekly_revenue", "transform": "level"})
    _raises(core.SpecError, kiosks, default_spec, "weekly_revenue", "outcome")


# docs/contract.md §2 names signed forms only ("+10%", "-0.5", "A->B"); unsigned text such as "10" is
# ambiguous (percent or units?) and is refused.
@pytest.mark.parametrize("text", ["ten percent", "+10%%", "10", "*2", "->", "+0%", "+0", "4.5->4.5"])
def test_bad_change_text(kiosks, default_spec, text):
    default_spec["regressors"][0]["change"] = text
    _raises(core.SpecError, kiosks, default_spec, "drink_price")


def test_change_of_minus_100_percent_or_more(kiosks, default_spec):
    default_spec["regressors"][0]["change"] = "-100%"
    _raises(core.SpecError, kiosks, default_spec, "drink_price", "-100%")


def test_boxcox_on_a_regressor(kiosks, default_spec):
    default_spec["regressors"][0]["transform"] = "boxcox:0.5"
    _raises(core.SpecError, kiosks, default_spec, "boxcox", "drink_price")


def test_quadratic_on_the_outcome(kiosks, default_spec):
    default_spec["outcome"]["transform"] = "quadratic"
    _raises(core.SpecError, kiosks, default_spec, "quadratic", "outcome")


def test_category_on_the_outcome(kiosks, default_spec):
    default_spec["outcome"]["transform"] = "category"
    _raises(core.SpecError, kiosks, default_spec, "category", "outcome")


def test_cluster_covariance_without_cluster_column(kiosks, default_spec):
    default_spec["covariance"] = "cluster"
    default_spec["cluster"] = None
    _raises(core.SpecError, kiosks, default_spec, "cluster")


def test_cluster_column_that_does_not_exist(kiosks, default_spec):
    default_spec["covariance"] = "cluster"
    default_spec["cluster"] = "store"
    _raises(core.SpecError, kiosks, default_spec, "store", "cluster")


def test_unknown_covariance(kiosks, default_spec):
    default_spec["covariance"] = "HC9"
    _raises(core.SpecError, kiosks, default_spec, "HC9", "covariance")


def test_at_naming_a_non_regressor(kiosks, default_spec):
    default_spec["at"] = {"week": 3}
    _raises(core.SpecError, kiosks, default_spec, "week", "at")


def test_unknown_category_reference(kiosks, default_spec):
    default_spec["regressors"][6]["reference"] = "Desert"
    _raises(core.FormwiseError, kiosks, default_spec, "Desert", "region")


def test_spec_that_is_not_an_object(kiosks):
    with pytest.raises(core.SpecError):
        core.analyze(kiosks, ["outcome", "weekly_revenue"])


# --- data errors ----------------------------------------------------------------------------


def test_text_column_used_as_a_number(kiosks, default_spec):
    default_spec["regressors"].append({"column": "kiosk_id", "transform": "level"})
    _raises(core.DataError, kiosks, default_spec, "kiosk_id", "K001")


def test_constant_regressor(kiosks, default_spec):
    kiosks["chain_size"] = 60.0
    default_spec["regressors"].append({"column": "chain_size", "transform": "level"})
    _raises(core.DataError, kiosks, default_spec, "chain_size")


def test_perfectly_collinear_regressors_are_named(kiosks, default_spec):
    # price in cents: log(100·p) = log(100) + log(p), an exact combination with the intercept
    kiosks["price_cents"] = 100.0 * kiosks["drink_price"]
    default_spec["regressors"].append({"column": "price_cents", "transform": "log"})
    message = _raises(core.DataError, kiosks, default_spec, "price_cents", "drink_price")
    assert "collinear" in message


def test_collinear_level_regressors_are_named(kiosks, default_spec):
    kiosks["years_open_months"] = 12.0 * kiosks["years_open"]
    default_spec["regressors"].append({"column": "years_open_months", "transform": "level"})
    _raises(core.DataError, kiosks, default_spec, "years_open_months", "years_open")


@pytest.mark.parametrize("rows", [3, 4])
def test_fewer_rows_than_coefficients(kiosks, rows):
    # four regressors and the intercept: five coefficients
    spec = {
        "outcome": {"column": "weekly_revenue", "transform": "log"},
        "regressors": [
            {"column": c, "transform": "level"} for c in ("drink_price", "foot_traffic", "ad_spend", "app_order_share")
        ],
    }
    core.analyze(kiosks.head(10), spec, parts=QUICK)  # enough rows: fits
    _raises(core.DataError, kiosks.head(rows), spec, "5 coefficients", str(rows))


def test_log_of_a_column_with_zeros_drops_and_counts_rows(kiosks, default_spec):
    zeros = int((kiosks["ad_spend"] == 0).sum())
    assert zeros > 0  # the demo's ad spend is zero in about 40 % of weeks (demo_data/make_demo.py)
    default_spec["regressors"][2]["transform"] = "log"
    result = core.analyze(kiosks, default_spec, parts=QUICK)
    assert result["n_obs"] == len(kiosks) - zeros
    assert result["n_dropped"] == zeros
    assert [(d["column"], d["count"]) for d in result["dropped"]] == [("ad_spend", zeros)]
    assert "log" in result["dropped"][0]["reason"]
    notes = [w for w in result["warnings"] if "ad_spend" in w]
    assert len(notes) == 1
    assert str(zeros) in notes[0]
    assert "ihs" in notes[0].lower() or "inverse hyperbolic sine" in notes[0].lower()
    assert "level" in notes[0].lower()


def test_missing_cells_are_dropped_and_counted(kiosks, default_spec):
    kiosks.loc[[3, 10, 11], "years_open"] = np.nan
    result = core.analyze(kiosks, default_spec, parts=QUICK)
    assert result["n_dropped"] == 3
    assert {"column": "years_open", "reason": "missing value", "count": 3} in result["dropped"]


def test_ihs_keeps_the_zero_rows(kiosks, default_spec):
    result = core.analyze(kiosks, default_spec, parts=QUICK)  # ad_spend is ihs in the default spec
    assert result["n_dropped"] == 0


# --- the result contract --------------------------------------------------------------------


def test_result_is_strict_json(kiosks, default_spec):
    result = core.analyze(kiosks, default_spec)
    text = json.dumps(result, allow_nan=False)
    assert json.loads(text) == result


def test_non_finite_numbers_become_null():
    """docs/contract.md §1: the result is plain JSON data; NaN and inf become null, numpy scalars plain Python."""
    from core.analysis import json_safe

    raw = {"a": float("nan"), "b": np.inf, "c": [np.float64(-np.inf), np.float32(1.5)], "d": np.int64(3), "e": np.bool_(True)}
    safe = json_safe(raw)
    assert safe == {"a": None, "b": None, "c": [None, 1.5], "d": 3, "e": True}
    assert type(safe["d"]) is int and type(safe["e"]) is bool
    json.dumps(safe, allow_nan=False)


def test_constant_outcome_is_a_clear_error_or_null_statistics(kiosks):
    """Whether residuals come out exactly zero depends on rounding, so several fits are tried."""
    kiosks["flat"] = 5.0
    for rows in (16, 40, 200, len(kiosks)):
        for transform in ("level", "log"):
            spec = {
                "outcome": {"column": "flat", "transform": "level"},
                "regressors": [{"column": "drink_price", "transform": transform}],
            }
            try:
                result = core.analyze(kiosks.head(rows), spec)
            except core.FormwiseError as error:
                assert "flat" in str(error)
            else:
                json.dumps(result, allow_nan=False)


def test_parts_limits_the_sections(kiosks, default_spec):
    full = core.analyze(kiosks, default_spec)
    assert "gap_curves" in full
    quick = core.analyze(kiosks, default_spec, parts={"terms", "fit", "effects"})
    for key in ("terms", "fit", "effects", "n_obs", "n_dropped", "dropped", "outcome", "covariance", "warnings"):
        assert key in quick, key
    assert "gap_curves" not in quick
    assert quick["terms"] == full["terms"]
    assert quick["effects"] == full["effects"]


def test_contract_keys(kiosks, default_spec):
    result = core.analyze(kiosks, default_spec, parts=QUICK)
    assert result["outcome"] == {"column": "weekly_revenue", "transform": "log"}
    assert result["covariance"] == "HC1"
    term_keys = {"name", "column", "transform", "level", "power", "estimate", "std_error", "statistic", "p_value"}
    term_keys |= {"ci_low", "ci_high"}
    for row in result["terms"]:
        assert term_keys <= set(row)
    effect_keys = {"column", "change", "units", "approximate", "exact", "ci_low", "ci_high", "adjusted", "average", "reference"}
    for row in result["effects"]:
        assert effect_keys <= set(row)
    assert {"r2", "adj_r2", "loglik", "sigma"} <= set(result["fit"])
    promo = effect(result, "promo")
    assert promo["adjusted"] is not None  # a 0/1 dummy in a log model (Kennedy 1981)
    assert effect(result, "years_open")["adjusted"] is None


@pytest.mark.parametrize(
    "changes",
    [
        {2: "sqrt", 1: "shifted_log:1"},  # ad_spend has zeros, where sqrt' is infinite; shifted log runs the units check
        {2: "sqrt"},
        {0: "quadratic", 2: "shifted_log:1"},
    ],
)
def test_analyze_emits_no_numpy_warnings(kiosks, default_spec, changes):
    """Numerical edge cases (zeros under sqrt, refits in the units check) stay inside core."""
    for index, transform in changes.items():
        default_spec["regressors"][index]["transform"] = transform
        default_spec["regressors"][index].pop("change", None)
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        core.analyze(kiosks, default_spec)
