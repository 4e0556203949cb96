"""The app's result views (effect curves, units check, residual checks, compare, predict, the
PPML offer) through AppTest, and the pure logic and figures behind them.

Values from outside the project name their source beside them; the residual and influence
cross-checks use statsmodels as the reference library.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import streamlit as st
from streamlit.testing.v1 import AppTest

import core
from app import charts, context, views
from app.gridspec import grid_to_spec, spec_to_grid
from core.inference.choices import zero_note
from core.inference.compare import best_by_aic
from core.inference.residuals import MAX_POINTS, residual_sample, variable_distributions
from core.model.fitted import fit_model
from core.model.spec import parse_spec
from core.output import display
from core.output.numbers import p_text, sig
from core.output.text import (
    boxcox_headline,
    boxcox_sentence,
    check_sentences,
    check_verdicts,
    factor_words,
    skew_words,
    units_warning,
)
from tests.app_support import edit_grid, start
from tests.helpers import shown, shown_table

ROOT = Path(__file__).resolve().parent.parent
MAIN = str(ROOT / "app" / "main.py")
DEMO_SPEC = json.loads((ROOT / "demo_data" / "default_spec.json").read_text(encoding="utf-8"))
TIMEOUT = 120


# --- helpers ---------------------------------------------------------------------------------------


def show(at: AppTest, view: str) -> AppTest:
    at.segmented_control(key="view").set_value(view).run()
    assert not at.exception, at.exception
    assert not at.error, [e.value for e in at.error]
    return at


def texts(at: AppTest) -> str:
    return shown("\n".join(m.value for m in at.markdown) + "\n" + "\n".join(c.value for c in at.caption))


def table_with(at: AppTest, column: str) -> pd.DataFrame:
    found = [shown_table(t.value) for t in at.table if column in shown_table(t.value).columns]
    assert found, f"no table with a column {column!r}"
    return found[0]


def figures(at: AppTest) -> list[dict[str, Any]]:
    return [json.loads(el.proto.spec) for el in at.get("plotly_chart")]


def figure_points(figure: dict[str, Any]) -> int:
    return sum(len(trace.get("x") or []) for trace in figure["data"])


def trace_names(figure: dict[str, Any]) -> set[str]:
    return {trace.get("name") for trace in figure["data"] if trace.get("name")}


@pytest.fixture
def demo_frame() -> pd.DataFrame:
    return pd.read_csv(ROOT / "demo_data" / "kiosks.csv")


# --- lazy parts ------------------------------------------------------------------------------------------
def test_slow_sections_run_only_in_their_views(monkeypatch: pytest.MonkeyPatch) -> None:
    asked: list[frozenset[str]] = []
    real = core.analyze

    caches: list[Any] = []

    def recording(data: pd.DataFrame, spec: dict, parts: Any = None, columns: Any = None) -> dict:
        asked.append(frozenset(parts or ()))
        caches.append(columns)
        return real(data, spec, parts=parts, columns=columns)

    monkeypatch.setattr(core, "analyze", recording)
    st.cache_data.clear()
    at = start()
    slow = {"units_check", "diagnostics", "boxcox", "curves", "predictions"}
    assert asked and all(not (parts & slow) for parts in asked), asked
    hits = caches[-1].hits
    edit_grid(at, {"drink_price": {"transform": "level"}})
    assert all(not (parts & slow) for parts in asked), "a refit with the views closed asked for a slow section"
    # Every fit of the loaded table shares one column cache, and the toggle reused its columns.
    assert all(isinstance(c, core.ColumnCache) for c in caches) and len({id(c) for c in caches}) == 1
    assert caches[-1].hits > hits
    show(at, "Effects of changes")
    assert any("units_check" in parts for parts in asked)
    assert not any("diagnostics" in parts for parts in asked)
    show(at, "Residual checks")
    assert any("diagnostics" in parts for parts in asked)
    st.cache_data.clear()


# --- effect curves ------------------------------------------------------------------------------------------
def test_effect_curves_show_both_retransforms_the_band_and_the_data() -> None:
    at = show(start(), "Effect curves")
    (figure,) = figures(at)
    names = trace_names(figure)
    assert charts.SMEARING_NAME in names and charts.NAIVE_NAME in names
    assert "95 % confidence band" in names and "Data rows" in names
    assert figure["layout"]["title"]["text"] == "Predicted weekly_revenue as drink_price varies"
    assert "log of weekly_revenue on log of drink_price" in figure["layout"]["title"]["subtitle"]["text"]
    # The demo's price range is widened on both sides of the data: two shaded strips, named once.
    assert len([shape for shape in figure["layout"]["shapes"] if shape.get("type") == "rect"]) == 2
    assert charts.BEYOND_NAME in names
    assert figure_points(figure) <= MAX_POINTS
    words = texts(at)
    assert "showing all 1,500 rows" in words
    assert "expected weekly_revenue falls from" in words


def test_effect_curves_overlay_another_transform_and_draw_categories() -> None:
    at = show(start(), "Effect curves")
    assert "drink_price in levels" in at.selectbox(key="curve_overlay").options
    at.selectbox(key="curve_overlay").set_value("level").run()
    assert not at.exception and not at.error
    (figure,) = figures(at)
    assert "With drink_price in levels instead: expected value" in trace_names(figure)
    at.selectbox(key="curve_pick").set_value("region").run()
    (figure,) = figures(at)
    assert figure["layout"]["title"]["text"] == "Predicted weekly_revenue by region"
    assert figure["layout"]["xaxis"]["ticktext"] == ["Coast (reference)", "Inland", "Mountain"]
    assert any(t.get("error_y") for t in figure["data"]), "category predictions need their intervals"


def test_curve_figure_budget_and_labels() -> None:
    curve = {
        "column": "price",
        "kind": "continuous",
        "x": list(np.linspace(-1, 11, 50)),
        "observed_min": 1.0,
        "observed_max": 10.0,
        "outside": [],
        "naive": list(np.linspace(5, 1, 50)),
        "smearing": list(np.linspace(5.5, 1.1, 50)),
        "ci_low": list(np.linspace(5, 1, 50)),
        "ci_high": list(np.linspace(6, 1.2, 50)),
    }
    rng = np.random.default_rng(0)
    points = {"x": rng.uniform(1, 10, 2000).tolist(), "y": rng.uniform(0, 6, 2000).tolist(), "shown": 2000, "total": 90_000}
    fig = charts.curve_figure(
        curve, regressor_label="log of price", outcome_column="sales", outcome_label="log of sales", points=points
    )
    # A variable that is never negative is not drawn below zero.
    assert min(x for t in fig.data if t.x is not None for x in t.x if x is not None) >= 0
    assert "Data rows (a sample)" in {t.name for t in fig.data}
    assert charts.point_count(fig) <= MAX_POINTS
    assert fig.layout.yaxis.title.text == "sales (original units)"
    # Column names are shown as text, never read as Plotly's HTML-like markup.
    fig = charts.curve_figure(
        {**curve, "column": "<a href='x'>p</a>"}, regressor_label="p", outcome_column="<b>y</b>", outcome_label="y"
    )
    assert "<b>" not in fig.layout.title.text and "&lt;b&gt;y&lt;/b&gt;" in fig.layout.title.text
    assert "<a" not in fig.layout.title.text


# --- units check -----------------------------------------------------------------------------------------
def test_units_check_sits_beside_the_ihs_effect() -> None:
    at = show(start(), "Effects of changes")
    units = table_with(at, "Units")
    assert list(units["Units"]) == ["÷1000", "÷100", "÷10", "as recorded", "×10", "×100", "×1000"]
    assert units.loc[0, "Meaning"] == "ad_spend measured in thousands"
    assert "Exact effect of +100%" in units.columns and "Elasticity at the reference point" in units.columns
    assert any("changes by up to" in shown(w.value) and "ad_spend" in shown(w.value) for w in at.warning)
    figure = next(f for f in figures(at) if "by units" in f["layout"]["title"]["text"])
    assert figure["layout"]["xaxis"]["type"] == "log"
    assert figure["layout"]["xaxis"]["ticktext"][0] == "÷1000"


def test_units_check_waits_to_be_asked_on_large_data(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(views, "UNITS_CHECK_AUTO_ROWS", 1_000)  # the demo's 1,500 rows count as large here
    at = show(start(), "Effects of changes")
    assert not [t for t in at.table if "Units" in shown_table(t.value).columns]
    at.toggle(key="units_check_on").set_value(True).run()
    assert not at.exception
    assert list(table_with(at, "Units")["Units"])[0] == "÷1000"


def test_unit_words() -> None:
    assert factor_words(0.001) == ("÷1000", "in thousands")
    assert factor_words(1000.0) == ("×1000", "in thousandths")
    check = {"column": "spend", "moves": True, "max_relative_move": 0.5}
    assert "50 %" in units_warning(check, "ihs")
    assert units_warning({**check, "moves": False}, "ihs") is None


# --- residual checks ----------------------------------------------------------------------------------------
def test_residual_checks_view_reads_the_tests_in_plain_words() -> None:
    at = show(start(), "Residual checks")
    words = texts(at)
    result = core.analyze(at.session_state["data"]["frame"], DEMO_SPEC, parts={"diagnostics"})
    bp = result["diagnostics"]["breusch_pagan"]["p_value"]
    assert (
        f"No sign that the spread of residuals changes with the regressors (Breusch–Pagan, Koenker form: {p_text(bp)})" in words
    )
    assert "RESET" in words and "Jarque–Bera" in words and "White" in words
    assert "A log of weekly_revenue (λ = 0) is consistent with the data" in words
    assert "showing all 1,500 rows" in words
    vif = table_with(at, "Variance inflation (VIF)")
    assert "log of drink_price" in set(vif["Term"])
    influence = table_with(at, "Cook's distance")
    assert {"Sheet row", "Leverage", "weekly_revenue", "region"} <= set(influence.columns)
    for question in ("Is the spread even?", "Are the residuals shaped like a bell?", "Is a curve missing?"):
        assert question in words
    assert "Is the transform of weekly_revenue right?" in words
    # Each check's chart is titled with its verdict, the words beside it.
    residuals = core.analyze(at.session_state["data"]["frame"], DEMO_SPEC, parts={"residuals"})["residuals"]
    verdicts = check_verdicts(result["diagnostics"], "HC1", residuals)
    titles = [f["layout"]["title"]["text"].replace("<br>", " ") for f in figures(at)]  # wrapped to fit
    for expected in [v["headline"] for v in verdicts] + ["Which power of weekly_revenue fits best (Box-Cox)"]:
        assert expected in titles
    # The variables' own distributions are drawn when asked for.
    assert "weekly_revenue (outcome)" not in titles
    at.toggle(key="show_distributions").set_value(True).run()
    titles = [f["layout"]["title"]["text"].replace("<br>", " ") for f in figures(at)]
    assert "weekly_revenue (outcome)" in titles
    # No chart of the standard four-panel kind: no Q-Q, no histogram of residuals, no scale-location.
    assert not any("Q–Q" in t or "normal curve" in t or "√" in t for t in titles)
    boxcox = next(f for f in figures(at) if "Box-Cox" in f["layout"]["title"]["text"])
    labels = [a["text"] for a in boxcox["layout"]["annotations"]]
    assert {"log", "level"} <= set(labels) and any(label.startswith("best ") for label in labels)
    assert all(figure_points(f) <= MAX_POINTS for f in figures(at))


def test_check_verdicts_in_plain_words() -> None:
    diagnostics = {
        "breusch_pagan": {"p_value": 0.003},
        "white": {"p_value": 0.92},
        "jarque_bera": {"p_value": 0.0001, "skewness": 0.1, "kurtosis": 6.0},
        "reset": {"p_value": 0.5},
    }
    residuals = {
        "spread_bands": [{"n": 150, "q25": -1.0, "q75": 1.0}, {"n": 150, "q25": -2.0, "q75": 2.0}],
        "tails": [
            {"point": 2.0, "side": "above", "count": 30, "share": 0.02, "normal_share": 0.02275013},
            {"point": 2.0, "side": "below", "count": 45, "share": 0.03, "normal_share": 0.02275013},
        ],
        "mean_bands": [{"low": 0.1, "high": 0.3}] + [{"low": -0.1, "high": 0.1}] * 19,
    }
    spread, shape, curve = check_verdicts(diagnostics, "HC1", residuals)
    assert (spread["question"], spread["concern"], spread["headline"]) == (
        "Is the spread even?", True, "The spread of the residuals changes"
    )  # fmt: skip
    assert spread["sentences"][0].startswith("The spread of residuals changes with the regressors (Breusch–Pagan")
    assert "(White: p = 0.92)" in spread["sentences"][1]
    assert spread["sentences"][2].endswith(
        "the middle half of the residuals is 2.0 times as wide in the widest band as in the narrowest."
    )
    assert shape["headline"] == "The residuals have heavier tails than a bell curve"
    assert (
        shape["sentences"][-1] == "75 rows (5.0 %) lie more than 2 standard deviations from zero, where a bell curve puts 4.6 %."
    )
    assert (curve["concern"], curve["headline"]) == (False, "No sign of a missing curve")
    assert curve["sentences"][-1].startswith(
        "1 of 20 bands of fitted values have a mean residual whose 95 % interval misses zero"
    )
    assert check_verdicts({}, "HC1")[0]["headline"] == "Not tested for this model"
    assert boxcox_headline({"lambda": 0.02, "ci_low": -0.1, "ci_high": 0.1}, "y") == "A log of y fits the data"
    assert boxcox_headline({"lambda": 0.5, "ci_low": -0.2, "ci_high": 1.2}, "y") == "A log or levels of y: the data cannot choose"


def test_check_sentences() -> None:
    diagnostics = {
        "breusch_pagan": {"p_value": 0.003},
        "white": {"p_value": 0.92},
        "jarque_bera": {"p_value": 0.0001, "skewness": 1.2, "kurtosis": 6.0},
        "reset": {"p_value": 0.5},
    }
    sentences = check_sentences(diagnostics, "HC1")
    assert sentences[0] == (
        True,
        "The spread of residuals changes with the regressors (Breusch–Pagan, Koenker form: p = 0.003). "
        "The robust standard errors chosen in the sidebar allow for this.",
    )
    assert sentences[1][0] is False and "(White: p = 0.92)" in sentences[1][1]
    assert sentences[2][0] is True and sentences[2][1].startswith("The residuals don't look normal (Jarque–Bera: p < 0.001")
    assert sentences[3] == (False, "No sign of missing curvature in the functional form (RESET: p = 0.50).")
    assert "choose robust" in check_sentences(diagnostics, "classical")[0][1]


def test_boxcox_sentences() -> None:
    assert "a log of y (λ = 0) is consistent" in boxcox_sentence({"lambda": 0.02, "ci_low": -0.1, "ci_high": 0.1}, "y").lower()
    assert "in levels (λ = 1) is consistent" in boxcox_sentence({"lambda": 0.9, "ci_low": 0.8, "ci_high": 1.1}, "y")
    assert "square root" in boxcox_sentence({"lambda": 0.45, "ci_low": 0.35, "ci_high": 0.55}, "y")
    assert "stronger transform than a log" in boxcox_sentence({"lambda": -0.5, "ci_low": -0.7, "ci_high": -0.3}, "y")


def test_residuals_match_statsmodels(demo_frame: pd.DataFrame) -> None:
    # statsmodels as reference library: OLSInfluence.resid_studentized_internal is eᵢ / (s·sqrt(1 − hᵢ)).
    import statsmodels.api as sm
    from statsmodels.stats.outliers_influence import OLSInfluence

    spec = {
        "outcome": {"column": "weekly_revenue", "transform": "log"},
        "regressors": [{"column": "drink_price", "transform": "log"}, {"column": "years_open", "transform": "level"}],
    }
    data = residual_sample(*_fitted(demo_frame, spec), limit=10**6)
    X = sm.add_constant(np.column_stack([np.log(demo_frame["drink_price"]), demo_frame["years_open"]]))
    fit = sm.OLS(np.log(demo_frame["weekly_revenue"]), X).fit()
    np.testing.assert_allclose(data["resid"], fit.resid, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(data["fitted"], fit.fittedvalues, rtol=1e-12)
    studentized = np.asarray(OLSInfluence(fit).resid_studentized_internal)
    for tail in data["tails"]:
        beyond = studentized > tail["point"] if tail["side"] == "above" else studentized < -tail["point"]
        assert tail["count"] == int(beyond.sum()) and tail["share"] == pytest.approx(beyond.mean())
        assert tail["low"] <= tail["share"] <= tail["high"]
    # Every row is counted once in the bands, which run from the lowest fitted value to the highest.
    order = np.argsort(fit.fittedvalues.to_numpy(), kind="stable")
    resid = fit.resid.to_numpy()[order]
    assert sum(b["n"] for b in data["spread_bands"]) == sum(b["n"] for b in data["mean_bands"]) == len(demo_frame)
    start = 0
    for band in data["mean_bands"]:
        rows = resid[start : start + band["n"]]
        assert band["mean"] == pytest.approx(rows.mean(), abs=1e-12)
        assert band["low"] < band["mean"] < band["high"]
        start += band["n"]
    first = resid[: data["spread_bands"][0]["n"]]
    assert data["spread_bands"][0]["q25"] == pytest.approx(np.percentile(first, 25))


def test_wilson_interval_of_a_tail_share() -> None:
    # Wilson 1927 score interval; 2 of 100 at 95 %: 0.0055 to 0.0700 (Newcombe 1998, Statistics
    # in Medicine 17, 857-872, Table I, method 3, as recalled from memory).
    from core.inference.residuals import _tails

    tails = _tails(np.array([2.5, 3.5] + [0.0] * 98))
    above_two = next(t for t in tails if t["side"] == "above" and t["point"] == 2.0)
    assert above_two["count"] == 2
    assert above_two["low"] == pytest.approx(0.0055, abs=5e-5) and above_two["high"] == pytest.approx(0.0700, abs=5e-5)


def test_residual_charts_stay_within_the_point_budget(demo_frame: pd.DataFrame) -> None:
    data = residual_sample(*_fitted(demo_frame, DEMO_SPEC), limit=600)
    assert data["n"] == 1500 and data["shown"] <= 600
    verdicts = check_verdicts({}, "HC1", data)
    for fig in charts.check_figures(data, verdicts, "log of weekly_revenue").values():
        assert charts.point_count(fig) <= 600
    ppml = {**DEMO_SPEC, "estimator": "ppml", "outcome": {"column": "catering_orders", "transform": "level"}}
    assert core.analyze(demo_frame, ppml, parts={"residuals"})["residuals"] is None


def test_distributions_raw_and_transformed(demo_frame: pd.DataFrame) -> None:
    items = {i["column"]: i for i in variable_distributions(demo_frame, DEMO_SPEC)}
    assert set(items) == {"weekly_revenue", "drink_price", "foot_traffic", "ad_spend", "years_open", "app_order_share"}
    revenue = items["weekly_revenue"]
    assert revenue["skew_raw"] == pytest.approx(demo_frame["weekly_revenue"].skew())
    assert revenue["skew_transformed"] == pytest.approx(np.log(demo_frame["weekly_revenue"]).skew())
    assert items["years_open"]["transformed"] is None
    assert items["ad_spend"]["zeros"] == 647
    assert "spike at 0" in skew_words(5.5, -0.1, 647)
    fig = charts.distribution_figure(revenue)
    assert len(fig.data) == 2


# --- compare models ------------------------------------------------------------------------------------------
def save_as(at: AppTest, name: str) -> AppTest:
    at.text_input(key="save_name").set_value(name)
    at.button(key="save_model").click().run()
    assert not at.exception, at.exception
    return at


def test_compare_ranks_the_log_model_above_the_level_model_by_aic() -> None:
    at = show(start(), "Compare models")
    save_as(at, "log outcome")
    edit_grid(at, {"weekly_revenue": {"transform": "level"}})
    save_as(at, "level outcome")
    assert not at.error
    table = table_with(at, "AIC rank").set_index("Model")
    assert list(table.index) == ["log outcome", "level outcome"]
    assert table.at["log outcome", "AIC rank"] == "★ best"
    assert table.at["level outcome", "AIC rank"].endswith("worse")
    assert table.at["log outcome", "Outcome as fitted"] == "log of weekly_revenue"
    frame = at.session_state["data"]["frame"]
    log_fit = core.analyze(frame, DEMO_SPEC, parts={"fit"})["fit"]
    assert table.at["log outcome", "AIC (original scale)"] == sig(log_fit["aic_original_scale"], 6)
    assert table.at["log outcome", display.RAW_R2] == sig(log_fit["r2"], 3)
    assert "not comparable across different outcome transforms" in texts(at)
    effects = table_with(at, "level outcome")
    assert effects.iloc[0].tolist() == [
        "Effects measured as",
        "% change in weekly_revenue",
        "change in weekly_revenue (its own units)",
    ]
    # Removing a saved model takes it out of the table.
    at.selectbox(key="remove_pick").set_value("level outcome")
    at.button(key="remove_model").click().run()
    table = table_with(at, "AIC rank")
    assert "level outcome" not in set(table["Model"])


def test_ppml_is_not_ranked_against_least_squares() -> None:
    rows = [
        {"name": "a", "data_id": "d", "n_obs": 10, "aic": 5.0, "ppml": False},
        {"name": "b", "data_id": "d", "n_obs": 10, "aic": 3.0, "ppml": False},
        {"name": "c", "data_id": "d", "n_obs": 8, "aic": 1.0, "ppml": False},  # other rows: not comparable
        {"name": "p", "data_id": "d", "n_obs": 10, "aic": None, "ppml": True},
    ]
    assert best_by_aic(rows) == {"b"}
    full = [
        {
            **r,
            "outcome_label": "y",
            "r2_original": 0.5,
            "loglik": None if r["ppml"] else -1.0,
            "bic": None,
            "bp_p": 0.5,
            "r2_raw": 0.4,
        }
        for r in rows
    ]
    table = display.compare_table(full, {"b"}).set_index("Model")
    assert table.at["p", "AIC (original scale)"] == display.NOT_COMPARABLE
    assert table.at["p", "Log-likelihood (original scale)"] == display.NOT_COMPARABLE
    assert table.at["c", "AIC rank"] == "not ranked (other rows)"
    assert table.at["a", "AIC rank"] == "+2.000 worse"


# --- predict ---------------------------------------------------------------------------------------------------
def test_predict_shows_three_retransforms_and_both_intervals() -> None:
    at = show(start(), "Predict")
    table = table_with(at, "Retransform")
    assert list(table["Retransform"]) == ["Smearing (Duan)", "Normal theory", "Naive back-transform", "One new observation"]
    frame = at.session_state["data"]["frame"]
    values = {
        "drink_price": 4.559,
        "foot_traffic": 6383.0,
        "ad_spend": 170.6,
        "years_open": 6.197,
        "app_order_share": 0.3127,
        "promo": 0.0,
        "region": "Coast",
    }
    expected = core.analyze(frame, {**DEMO_SPEC, "predict": [values]}, parts={"predictions"})["predictions"][0]
    predicted = table.set_index("Retransform")["Predicted weekly_revenue"]
    assert predicted["Smearing (Duan)"] == sig(expected["smearing"], 4)
    assert predicted["Normal theory"] == sig(expected["normal"], 4)
    assert predicted["Naive back-transform"] == sig(expected["naive"], 4)
    assert expected["naive"] < expected["normal"] < expected["smearing"] * 1.01
    intervals = table.set_index("Retransform")["95 % interval"]
    assert intervals["Smearing (Duan)"].endswith("(for the expected value)")
    assert intervals["One new observation"].endswith("(prediction interval)")
    assert not at.warning
    at.number_input(key="predict_drink_price").set_value(8.0).run()
    assert any("drink_price = 8 is outside the values in the data" in shown(w.value) for w in at.warning)


# --- the PPML offer ------------------------------------------------------------------------------------------------
def test_ppml_toggle_switches_the_estimator_for_catering_orders() -> None:
    at = start()
    assert not at.toggle, "no PPML offer for an outcome without zeros"
    edit_grid(at, {"weekly_revenue": {"role": "not used"}, "catering_orders": {"role": "outcome", "transform": "log"}})
    assert "a log of catering_orders would drop 955 rows" in texts(at)
    assert at.session_state["last_good"]["spec"]["estimator"] == "ols"
    at.toggle(key="ppml").set_value(True).run()
    assert not at.exception and not at.error
    spec = at.session_state["last_good"]["spec"]
    assert spec["estimator"] == "ppml" and spec["outcome"] == {"column": "catering_orders", "transform": "level"}
    grid = at.session_state["grid_base"].set_index("column")
    assert grid.at["catering_orders", "transform"] == "level"
    assert "estimated by Poisson pseudo-maximum likelihood" in texts(at)
    assert "1,500 rows used, 0 dropped" in texts(at)
    show(at, "Effects of changes")
    assert set(table_with(at, "Measured as")["Measured as"]) == {"% change in catering_orders"}
    for view in ("Effect curves", "Residual checks", "Compare models", "Predict"):
        show(at, view)
    assert "PPML" in table_with(at, "Retransform")["95 % interval"].iloc[-1]
    at.toggle(key="ppml").set_value(False).run()
    assert at.session_state["last_good"]["spec"]["estimator"] == "ols"


def test_zero_note_and_ppml_spec(demo_frame: pd.DataFrame) -> None:
    note = zero_note(demo_frame, "catering_orders")
    assert note["zeros"] == 955 and note["ppml_possible"]
    assert zero_note(demo_frame, "weekly_revenue") is None
    grid = spec_to_grid({**DEMO_SPEC, "outcome": {"column": "catering_orders", "transform": "log"}}, demo_frame)
    spec, notes = grid_to_spec(grid, estimator="ppml")
    assert spec["estimator"] == "ppml" and spec["outcome"]["transform"] == "level"
    assert notes and "set aside" in notes[0]
    assert core.analyze(demo_frame, spec, parts={"fit"})["n_obs"] == 1500


def test_gap_chart_subtitle_names_the_effect_on_the_outcome_itself() -> None:
    curve = {
        "column": "price",
        "kind": "percent",
        "units": "percent",
        "chosen": 10.0,
        "sizes": [-20.0, 10.0, 20.0],
        "approximate": [15.0, -7.5, -15.0],
        "exact": [18.2, -6.9, -12.8],
    }
    fig = charts.gap_figure(curve, 10, "log of price", "log of sales", "sales")
    # Long subtitles are broken into lines (<br>) that fit the narrowest slide export.
    assert fig.layout.title.subtitle.text.replace("<br>", " ") == (
        "Effect as % change in sales (model of log of sales), other regressors held at their reference values"
    )
    fig = charts.gap_figure({**curve, "units": "outcome"}, 10, "price", "sales", "sales")
    assert fig.layout.title.subtitle.text.replace("<br>", " ").startswith("Effect as change in sales (its own units), other")


def test_view_parts_keep_slow_sections_out_of_the_refit() -> None:
    assert not context.BASE_PARTS & {"units_check", "diagnostics", "boxcox", "curves", "predictions"}
    assert views.VIEWS[:3] == ["Coefficients", "Effects of changes", "Approximation check"]


def _fitted(frame: pd.DataFrame, spec: dict) -> tuple:
    design, fit, _ = fit_model(frame, parse_spec(spec, frame))
    return design, fit
