"""The Streamlit app: the screen through AppTest, and the pure logic behind it.

The app tests drive the variables grid the way the browser does: a data_editor's edits are
session state ({"edited_rows", "added_rows", "deleted_rows"}) under the editor's key, which
the app keeps in ``session_state["grid_key"]``.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hst
from streamlit.testing.v1 import AppTest

import core
from app import charts
from app.gridspec import GridError, describe_column, grid_to_spec, resolve_outcome, spec_to_grid
from core.inference.choices import suggest_cluster
from core.intake.profile import profile_table
from core.model.transforms import variable_label
from core.output import display
from core.output.numbers import DASH, interval, p_value, sig
from core.output.text import fit_sentence, model_sentence, rows_sentence
from tests.app_support import edit_grid, show, start
from tests.helpers import shown, shown_table

ROOT = Path(__file__).resolve().parent.parent
MAIN = str(ROOT / "app" / "main.py")
DEMO_SPEC = json.loads((ROOT / "demo_data" / "default_spec.json").read_text(encoding="utf-8"))
TIMEOUT = 90


# --- helpers ---------------------------------------------------------------------------------------


def table_with(at: AppTest, column: str) -> pd.DataFrame:
    found = [shown_table(t.value) for t in at.table if column in shown_table(t.value).columns]
    assert found, f"no table with a column {column!r}"
    return found[0]


def coefficients(at: AppTest) -> pd.DataFrame:
    return table_with(at, "What it means")


def texts(at: AppTest) -> str:
    return shown("\n".join(m.value for m in at.markdown))


# --- the screen --------------------------------------------------------------------------------------
def test_opens_on_the_demo_with_coefficients_effects_and_chart() -> None:
    at = start()
    assert not at.error
    table = coefficients(at)
    assert list(table.columns) == ["Term", "Estimate", "Std. error", "95 % interval", "p-value", "What it means"]
    assert "log of drink_price" in set(table["Term"])
    assert "region = Inland (vs Coast)" in set(table["Term"])
    # The app shows core's numbers for the demo's default spec, rounded for reading.
    expected = core.analyze(at.session_state["data"]["frame"], DEMO_SPEC)
    slope = next(t for t in expected["terms"] if t["name"] == "log(drink_price)")
    shown = table.loc[table["Term"] == "log of drink_price", "Estimate"].item()
    assert shown == sig(slope["estimate"])
    assert "1,500 rows used, 0 dropped" in texts(at)
    show(at, "Effects of changes")
    effects = table_with(at, "First-order approximation")
    assert {"Exact", "95 % interval (exact)", "Gap (approx. − exact)", "Small-sample adjusted", "Measured as"} <= set(
        effects.columns
    )
    assert set(effects["Measured as"]) == {"% change in weekly_revenue"}
    show(at, "Approximation check")
    assert at.get("plotly_chart"), "the approximation check chart is missing"
    assert at.segmented_control(key="view").options[:3] == ["Coefficients", "Effects", "Approx."]  # as shown


def test_changing_a_transform_in_the_grid_refits() -> None:
    at = start()
    before = coefficients(at)
    edit_grid(at, {"drink_price": {"transform": "level"}})
    after = coefficients(at)
    assert not at.error
    assert "log of drink_price" in set(before["Term"]) and "log of drink_price" not in set(after["Term"])
    assert "drink_price" in set(after["Term"])
    assert not before.equals(after)


def test_an_error_keeps_the_last_good_results_on_screen() -> None:
    at = start()
    good = coefficients(at)
    at.checkbox(key="unlock_locked").check().run()  # kiosk_id is an identifier, locked out by default
    edit_grid(at, {"kiosk_id": {"role": "regressor", "transform": "level"}})
    assert at.error, "a text column used as a number must show an error"
    assert "kiosk_id" in shown(at.error[0].value)
    assert any("previous valid model" in i.value for i in at.info)
    pd.testing.assert_frame_equal(coefficients(at), good)
    # Undoing the edit brings the live results back without the note.
    edit_grid(at, {"kiosk_id": {"role": "not used"}})
    assert not at.error
    assert not any("previous valid model" in i.value for i in at.info)


def test_no_outcome_is_an_error_not_a_crash() -> None:
    at = start()
    edit_grid(at, {"weekly_revenue": {"role": "not used"}})
    assert at.error and "no outcome" in shown(at.error[0].value).lower()
    assert coefficients(at) is not None


def test_choosing_a_second_outcome_replaces_the_first() -> None:
    at = start()
    edit_grid(at, {"foot_traffic": {"role": "outcome"}})
    grid = at.session_state["grid_base"]
    roles = dict(zip(grid["column"], grid["role"], strict=True))
    assert roles["foot_traffic"] == "outcome" and roles["weekly_revenue"] == "not used"
    assert not at.error
    assert "of foot_traffic explained by" in texts(at)


def test_log_outcome_with_zeros_drops_rows_and_says_so() -> None:
    at = start()
    edit_grid(at, {"weekly_revenue": {"role": "not used"}, "catering_orders": {"role": "outcome", "transform": "log"}})
    assert not at.error
    assert any("dropped" in shown(w.value) and "catering_orders" in shown(w.value) for w in at.warning)
    assert "955 dropped" in texts(at)


def test_extrapolated_effects_are_marked() -> None:
    at = start()
    edit_grid(at, {"drink_price": {"change": "+300%"}})
    show(at, "Effects of changes")
    effects = table_with(at, "Note")
    row = effects.loc[effects["Variable"] == "log of drink_price"]
    assert row["Note"].item() == display.EXTRAPOLATED


def test_standard_error_choice_reaches_the_model() -> None:
    at = start()
    at.selectbox(key="covariance").set_value("HC3").run()
    assert "robust (HC3)" in texts(at)
    at.selectbox(key="covariance").set_value("cluster").run()
    assert not at.exception
    assert at.selectbox(key="cluster_column").value == "kiosk_id"
    assert "clustered by kiosk_id" in texts(at)
    # The group picker's state is dropped while hidden; coming back must still work.
    at.selectbox(key="covariance").set_value("HC1").run()
    at.selectbox(key="covariance").set_value("cluster").run()
    assert not at.exception and not at.error
    assert "clustered by kiosk_id" in texts(at)


def test_a_bad_upload_keeps_the_current_data() -> None:
    at = start()
    good = coefficients(at)
    at.file_uploader[0].set_value(("broken.xlsx", b"this is not a workbook", "application/octet-stream")).run()
    assert not at.exception
    assert any("broken.xlsx" in shown(e.value) for e in at.sidebar.error)
    assert at.session_state["data"]["id"].startswith("demo:")
    pd.testing.assert_frame_equal(coefficients(at), good)


def test_an_upload_gets_a_default_model_and_the_demo_can_come_back() -> None:
    rng = np.random.default_rng(7)
    n = 80
    price = rng.uniform(2, 6, n)
    frame = pd.DataFrame(
        {
            "store_id": np.arange(1, n + 1),
            "sales": np.exp(3 - 0.8 * np.log(price) + rng.normal(0, 0.2, n)),
            "price": price,
            "area": rng.choice(["North", "South"], n),
        }
    )
    at = start()
    at.file_uploader[0].set_value(("shops.csv", frame.to_csv(index=False).encode(), "text/csv")).run()
    assert not at.exception and not at.error
    assert at.session_state["data"]["name"] == "shops.csv"
    assert "sales explained by" in texts(at)
    assert "store_id" not in " ".join(coefficients(at)["Term"])
    at.sidebar.button[0].click().run()  # back to the demo data
    assert at.session_state["data"]["id"].startswith("demo:")
    assert "log of drink_price" in set(coefficients(at)["Term"])


# --- app/py: grid <-> spec ------------------------------------------------------------------------
@pytest.fixture
def demo_frame() -> pd.DataFrame:
    return pd.read_csv(ROOT / "demo_data" / "kiosks.csv")


def test_demo_spec_round_trips_through_the_grid(demo_frame: pd.DataFrame) -> None:
    grid = spec_to_grid(DEMO_SPEC, demo_frame)
    assert len(grid) == demo_frame.shape[1]
    assert list(grid["column"][:8]) == ["weekly_revenue"] + [r["column"] for r in DEMO_SPEC["regressors"]]
    spec, notes = grid_to_spec(grid, DEMO_SPEC["covariance"], None, DEMO_SPEC["at"])
    assert notes == []
    assert spec["outcome"] == DEMO_SPEC["outcome"]
    assert spec["regressors"] == DEMO_SPEC["regressors"]
    assert spec["covariance"] == "HC1" and spec["cluster"] is None


def test_unused_rows_carry_a_suggested_transform(demo_frame: pd.DataFrame) -> None:
    grid = spec_to_grid(DEMO_SPEC, demo_frame, profile_table(demo_frame)).set_index("column")
    assert grid.at["kiosk_id", "role"] == "not used"
    assert grid.at["kiosk_id", "transform"] == "category"
    assert grid.at["catering_orders", "transform"] == "level"  # a small count with zeros: the advisor keeps levels
    assert grid.at["ad_spend", "about"].endswith("647 zeros")


def grid_of(rows: list[tuple[str, str, str, str, str]]) -> pd.DataFrame:
    return pd.DataFrame(
        [{"column": c, "about": "", "role": r, "transform": t, "change": ch, "reference": ref} for c, r, t, ch, ref in rows]
    )


def test_grid_needs_exactly_one_outcome() -> None:
    with pytest.raises(GridError, match="no outcome"):
        grid_to_spec(grid_of([("y", "not used", "log", "", ""), ("x", "regressor", "level", "", "")]))
    with pytest.raises(GridError, match="more than one outcome"):
        grid_to_spec(grid_of([("y", "outcome", "log", "", ""), ("x", "outcome", "level", "", "")]))
    with pytest.raises(GridError, match="cannot be 'category'"):
        grid_to_spec(grid_of([("y", "outcome", "category", "", "")]))


def test_grid_cells_become_spec_entries() -> None:
    grid = grid_of(
        [
            ("y", "outcome", "log", "+5%", "ignored"),
            ("price", "regressor", "log", " +10% ", "ignored"),
            ("promo", "regressor", "category", "0->1", ""),
            ("region", "regressor", "category", "Coast->Inland", "Coast"),
            ("id", "not used", "level", "", ""),
            ("size", "regressor", "quadratic", None, None),
        ]
    )
    spec, notes = grid_to_spec(grid, "cluster", "region", at={"price": 4.0, "id": 3})
    assert spec["outcome"] == {"column": "y", "transform": "log"}
    assert spec["regressors"] == [
        {"column": "price", "transform": "log", "change": "+10%"},
        {"column": "promo", "transform": "category"},
        {"column": "region", "transform": "category", "reference": "Coast", "change": "Coast->Inland"},
        {"column": "size", "transform": "quadratic"},
    ]
    assert spec["cluster"] == "region" and spec["at"] == {"price": 4.0}
    assert len(notes) == 1 and "promo" in notes[0]
    spec, _ = grid_to_spec(grid, "HC1", "region")
    assert spec["cluster"] is None


def test_a_new_outcome_replaces_the_old_one() -> None:
    previous = grid_of([("y", "outcome", "log", "", ""), ("x", "regressor", "quadratic", "", "")])
    edited = grid_of([("y", "outcome", "log", "", ""), ("x", "outcome", "quadratic", "", "")])
    resolved = resolve_outcome(edited, previous)
    assert list(resolved["role"]) == ["not used", "outcome"]
    assert resolved.at[1, "transform"] == "level"  # quadratic is for regressors only
    assert resolve_outcome(previous, previous) is previous


def test_default_spec_for_a_new_file() -> None:
    rng = np.random.default_rng(1)
    n = 200
    frame = pd.DataFrame(
        {
            "row": np.arange(1, n + 1),  # a counter: neither outcome nor regressor
            "week": rng.integers(1, 10, n),  # a time index by name
            "revenue": rng.lognormal(8, 1, n),  # first positive column: the outcome, logged (skewed)
            "visits": rng.lognormal(5, 1, n),  # positive and skewed: log
            "spend": np.where(rng.random(n) < 0.3, 0.0, rng.lognormal(3, 1.2, n)),  # zeros and skew: IHS
            "share": rng.uniform(0, 1, n),  # level
            "promo": rng.integers(0, 2, n),  # 0/1: level
            "region": rng.choice(["A", "B", "C"], n),  # a few levels: category
            "customer": [f"c{i}" for i in range(n)],  # an identifier: left out
            "constant": 1.0,  # no variation: left out
        }
    )
    spec = core.suggest(frame)
    assert spec["outcome"] == {"column": "revenue", "transform": "log"}
    assert {r["column"]: r["transform"] for r in spec["regressors"]} == {
        "visits": "log",
        "spend": "ihs",
        "share": "level",
        "promo": "level",
        "region": "category",
    }
    result = core.analyze(frame, spec)
    assert result["n_obs"] == n
    with pytest.raises(core.DataError):
        core.suggest(pd.DataFrame({"name": ["a", "b", "c"], "town": ["x", "y", "z"]}))


def test_cluster_suggestion_and_column_words(demo_frame: pd.DataFrame) -> None:
    assert suggest_cluster(demo_frame) == "kiosk_id"
    assert describe_column(demo_frame["promo"]) == "0/1"
    assert describe_column(demo_frame["region"]) == "text, 3 levels"
    assert describe_column(pd.Series([1.0, None, -2.0, 0.0])) == "-2 to 1, 1 zero, 1 negative, 1 missing"


def _column_words_elementwise(series: pd.Series) -> str:
    """describe_column as first written, every count over every value: the reference below."""
    from app.gridspec import compact

    missing = int(series.isna().sum())
    tail = f", {missing} missing" if missing else ""
    finite = series.astype(float).to_numpy(dtype=float, na_value=np.nan)
    finite = finite[~np.isnan(finite)]
    if not len(finite):
        return f"empty{tail}"
    if bool(np.all((finite == 0) | (finite == 1))):
        return f"0/1{tail}"
    parts = [f"{compact(float(finite.min()))} to {compact(float(finite.max()))}"]
    zeros, negatives = int((finite == 0).sum()), int((finite < 0).sum())
    if zeros:
        parts.append(f"{zeros:,} zero{'s' if zeros != 1 else ''}")
    if negatives:
        parts.append(f"{negatives:,} negative")
    return ", ".join(parts) + tail


@settings(max_examples=200, deadline=None)
@given(
    hst.lists(
        hst.sampled_from([0.0, -0.0, 1.0, 0.5, -3.0, 2.0, np.nan, np.inf, -np.inf]) | hst.floats(-1e9, 1e9, allow_nan=False),
        max_size=60,
    )
)
def test_column_words_from_the_range_equal_the_words_from_every_value(values: list[float]) -> None:
    series = pd.Series(values, dtype=float)
    assert describe_column(series) == _column_words_elementwise(series)


def test_plain_words_for_the_model() -> None:
    assert variable_label("price", "log") == "log of price"
    assert variable_label("visits", "shifted_log:1") == "log(visits + 1)"
    assert variable_label("region", "category") == "region (categories)"
    assert variable_label("age", "level") == "age"
    result = {
        "outcome": {"column": "y", "transform": "log"},
        "terms": [
            {"column": None, "transform": None},
            {"column": "price", "transform": "log"},
            {"column": "region", "transform": "category"},
            {"column": "region", "transform": "category"},
        ],
        "n_obs": 1500,
        "n_dropped": 3,
        "fit": {"r2": 0.5, "r2_original_scale": 0.4},
    }
    assert model_sentence(result) == "log of y explained by log of price and region (categories)"
    assert rows_sentence(result) == "1,500 rows used, 3 dropped"
    assert fit_sentence(result) == " · R² 0.500 for log of y, 0.400 for y itself"


# --- app/tables.py and app/charts.py ---------------------------------------------------------------------
def test_numbers_read_well() -> None:
    assert sig(-0.7547843722) == "\u22120.7548"
    assert sig(6.2196294720) == "6.220"
    assert sig(10360.97) == "10,361"
    assert sig(0.0000123) == "1.230e-05"
    assert sig(2.5, signed=True) == "+2.500"
    assert sig(None) == DASH
    assert p_value(8e-48) == "< 0.001" and p_value(0.0214) == "0.021"
    assert interval(-0.853, -0.656) == "\u22120.853 to \u22120.656"


def synthetic_curve() -> dict:
    # A log-log pair: exact 100*((1+s/100)^b - 1) against the approximation b*s, b = -0.75.
    sizes = np.linspace(-50, 100, 61)
    exact = 100 * ((1 + sizes / 100) ** -0.75 - 1)
    approx = -0.75 * sizes
    keep = sizes != 0
    return {
        "column": "price",
        "kind": "percent",
        "units": "percent",
        "from": 4.5,
        "chosen": 10.0,
        "sizes": sizes[keep].tolist(),
        "approximate": approx[keep].tolist(),
        "exact": exact[keep].tolist(),
    }


def test_tolerance_regions_bracket_a_safe_range() -> None:
    curve = synthetic_curve()
    sizes, approx, exact = (np.array(curve[k]) for k in ("sizes", "approximate", "exact"))
    regions = charts.tolerance_regions(sizes, approx, exact, 0.10)
    assert len(regions) == 2
    low, high = charts.safe_range(sizes, regions)
    assert -20 < low < 0 < high < 20
    # At the edges the relative error equals the tolerance (up to the linear interpolation).
    for edge in (low, high):
        s = edge / 100
        exact_edge = 100 * ((1 + s) ** -0.75 - 1)
        assert abs(abs(-0.75 * edge - exact_edge) / abs(exact_edge) - 0.10) < 0.01
    assert charts.tolerance_regions(sizes, approx, exact, 5.0) == []


def test_gap_figure_marks_change_gap_and_tolerance() -> None:
    curve = synthetic_curve()
    fig = charts.gap_figure(curve, 10, "log of price", "log of sales", "sales")
    names = [t.name for t in fig.data]
    assert "Exact effect" in names and "First-order approximation" in names
    assert any(name and "off by more than 10 %" in name for name in names)
    assert sum(1 for s in fig.layout.shapes if s.type == "rect") == 2
    assert any(s.type == "line" and s.x0 == 10.0 for s in fig.layout.shapes)
    assert fig.layout.xaxis.title.text == "Change in price (%)"
    assert sum(0 if t.x is None else len(t.x) for t in fig.data) < 20_000
    summary = charts.curve_summary(curve, 10)
    assert "+10 %" in summary and "stays within 10 %" in summary
