"""Exports from the app: charts at slide size, result tables as files, the HTML report and the
spec file (down, up, and through the command line).

The browser-side checks (real download buttons in Chromium) are in tests/test_browser.py.
"""

from __future__ import annotations

import csv
import io
import json
import re
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import plotly.graph_objects as go
import pytest
from streamlit.testing.v1 import AppTest

import core
from app import charts, exports, keys
from core.output import tables as core_tables
from core.output.escape import csv_cell
from core.output.numbers import sig
from core.output.report import CAUTION_REVIEW
from core.output.tables import plain_number
from tests.app_support import cli_analyze, edit_grid, prepare_report, show, start
from tests.helpers import shown, shown_table

ROOT = Path(__file__).resolve().parent.parent
MAIN = str(ROOT / "app" / "main.py")
DEMO_CSV = ROOT / "demo_data" / "kiosks.csv"
DEMO_SPEC = json.loads((ROOT / "demo_data" / "default_spec.json").read_text(encoding="utf-8"))
TIMEOUT = 120


# --- helpers ---------------------------------------------------------------------------------------


def chart_elements(at: AppTest) -> list[tuple[dict[str, Any], dict[str, Any]]]:
    """(figure, config) of every chart on screen."""
    return [(json.loads(el.proto.spec), json.loads(el.proto.config)) for el in at.get("plotly_chart")]


def coefficients(at: AppTest) -> pd.DataFrame:
    found = [shown_table(t.value) for t in at.table if "What it means" in shown_table(t.value).columns]
    assert found, "no coefficient table"
    return found[0]


def upload_spec(at: AppTest, name: str, raw: bytes) -> AppTest:
    key = f"spec_upload_{at.session_state['spec_upload_version'] if 'spec_upload_version' in at.session_state else 0}"
    at.file_uploader(key=key).set_value((name, raw, "application/json")).run()
    assert not at.exception, at.exception
    return at


# --- charts -------------------------------------------------------------------------------------------
def test_export_config_sizes_formats_and_file_names() -> None:
    # A 16:9 slide is 13.33 x 7.5 in; at the CSS 96 px per inch (CSS Values and Units Level 3,
    # section 5.2) that is 1280 x 720 px, and three times that is 3840 x 2160.
    full = charts.export_config("full", "png", "formwise-curve_chart")["toImageButtonOptions"]
    assert full == {"format": "png", "filename": "formwise-curve_chart", "width": 1280, "height": 720, "scale": 3}
    assert charts.export_config("half")["toImageButtonOptions"]["width"] == 640
    assert charts.export_config("square")["toImageButtonOptions"]["height"] == 720
    assert charts.size_label("full") == "Full slide, 16:9 (PNG 3840 × 2160)"
    svg = charts.export_config("full", "svg")
    # An SVG is drawn at the canvas size itself, so the file declares 1280 x 720.
    assert (svg["toImageButtonOptions"]["format"], svg["toImageButtonOptions"]["scale"]) == ("svg", 1)
    # The trimmed toolbar: download, zoom and back to the whole chart, titled in our words.
    assert svg["modeBarButtons"] == [["toImage", "zoom2d", "resetScale2d"]]
    assert svg["locales"]["en-US"]["dictionary"]["Download plot"] == "Download for a slide (SVG)"
    assert charts.file_stem("formwise-dist_![x](http://h/p.png)") == "formwise-dist__x_http_h_p.png"
    assert charts.file_stem("../..") == "chart"


def test_long_titles_wrap_and_the_legend_stays_with_the_plot() -> None:
    text, lines = charts.wrap("a " * 60, 20)
    assert lines > 1 and all(len(line) <= 20 for line in text.split("<br>"))
    fig = charts.curvature_figure(
        {"mean_bands": [{"mid": 1.0, "n": 40, "mean": 0.1, "low": -0.1, "high": 0.3}] * 2},
        "No sign of a missing curve",
        "log of a_very_long_outcome_name_that_goes_on_and_on_for_a_while",
    )
    # Pinned to the plot's top edge and the figure's top edge: they do not drift when the
    # export is taller or wider than the chart on screen.
    assert (fig.layout.legend.yref, fig.layout.legend.y, fig.layout.legend.yanchor) == ("paper", 1.0, "bottom")
    assert (fig.layout.title.yref, fig.layout.title.y, fig.layout.title.yanchor) == ("container", 1.0, "top")
    assert fig.layout.font.size >= 18 and fig.layout.title.font.size >= 22


def test_every_chart_exports_at_the_chosen_slide_size() -> None:
    at = start()
    seen: dict[str, dict[str, Any]] = {}
    for view in at.segmented_control(key="view").options:
        show(at, view)
        if view == "Residual checks":
            at.toggle(key="show_distributions").set_value(True).run()
        for _figure, config in chart_elements(at):
            seen[config["toImageButtonOptions"]["filename"]] = config
    # The approximation check, effect curves, units check, residual checks, Box-Cox profile,
    # variable distributions and the profile histogram.
    assert len(seen) >= 9, sorted(seen)
    for name, config in seen.items():
        assert config["toImageButtonOptions"] == {
            "format": "png",
            "filename": name,
            "width": 1280,
            "height": 720,
            "scale": 3,
        }, name
        assert name.startswith("formwise-") and config["displaylogo"] is False
    at.selectbox(key=keys.EXPORT_SIZE).set_value("half").run()
    at.radio(key=keys.EXPORT_FORMAT).set_value("svg").run()
    show(at, "Approximation check")
    (_, config), *_ = chart_elements(at)
    assert config["toImageButtonOptions"] | {} == {
        "format": "svg",
        "filename": "formwise-gap_chart",
        "width": 640,
        "height": 720,
        "scale": 1,
    }


def _font_sizes(node: Any) -> list[float]:
    """Every font size set anywhere in a figure's JSON."""
    found: list[float] = []
    if isinstance(node, dict):
        for key, value in node.items():
            if key in ("font", "tickfont") and isinstance(value, dict) and "size" in value:
                found.append(float(value["size"]))
            found += _font_sizes(value)
    elif isinstance(node, list):
        for value in node:
            found += _font_sizes(value)
    return found


@pytest.mark.parametrize("size", ["full", "half"])
def test_slide_type_is_readable_and_text_fits_the_canvas(size: str) -> None:
    """On the slide canvas (px x 0.75 = pt), no text in any chart is smaller than 12 pt, tick
    labels and axis titles are at least 15 pt, and no title line is wider than the canvas.
    Floor of 12 pt on slides: common practice, no source."""
    at = start()
    at.selectbox(key=keys.EXPORT_SIZE).set_value(size).run()
    canvas_width = charts.SLIDE_SIZES[size][1]
    checked = 0
    for view in at.segmented_control(key="view").options:
        show(at, view)
        if view == "Residual checks":
            at.toggle(key="show_distributions").set_value(True).run()
        for figure, _ in chart_elements(at):
            layout = figure["layout"]
            assert min(_font_sizes(figure)) * 0.75 >= 12, layout.get("title", {}).get("text")
            assert layout["font"]["size"] * 0.75 >= 13.5  # ticks and axis titles
            title = layout.get("title", {})
            for line in (title.get("text") or "").split("<br>"):
                # about half an em per character of the title's font
                assert len(line) * 0.5 * title["font"]["size"] <= canvas_width, line
            checked += 1
    assert checked >= 9


def test_legend_rows_follow_plotlys_grid_of_equal_columns() -> None:
    """Entries that fit on one row take one row; otherwise Plotly sets them in columns as wide
    as the widest entry, so one long entry on a narrow canvas puts each entry on its own row."""
    names = ["Exact effect", "First-order approximation", "Gap between them", "Off by more than 10 %"]
    fig = go.Figure([go.Scatter(x=[1], y=[1], name=n) for n in names])
    # About 860 px of entries (text widths in Helvetica's metrics, plus the symbols): more than
    # the 660 px a legend may take (the chart on screen at a 1280 px window), so two columns of
    # the widest entry (~260 px) on a full slide, one on a half slide (480 px).
    assert charts.legend_rows(fig, 1280) == 2
    assert charts.legend_rows(fig, 640) == 4
    assert charts.legend_rows(go.Figure([go.Scatter(x=[1], y=[1], name=n) for n in names[:3]]), 1280) == 1
    short = go.Figure([go.Scatter(x=[1], y=[1], name=n) for n in ("a", "b", "c")])
    assert charts.legend_rows(short, 640) == 1


def test_a_title_of_several_lines_is_padded_back_into_view() -> None:
    """Plotly lifts a multi-line title anchored at its top by about 0.7 em (measured in
    rendered PNGs); the padding must make up for it, or the first line is cut off."""
    title = "Predicted weekly revenue of every kiosk in the network as the average drink price varies"

    def figure() -> go.Figure:
        return charts.style(go.Figure(go.Scatter(x=[1, 2], y=[1, 2], name="curve")), title, "subtitle", "x", "y")

    full, half = charts.for_slide(figure(), "full"), charts.for_slide(figure(), "half")
    full_lines, half_lines = (f.layout.title.text.count("<br>") + 1 for f in (full, half))
    assert half_lines > full_lines >= 1
    for laid_out, lines in ((full, full_lines), (half, half_lines)):
        lifted = round(0.7 * laid_out.layout.title.font.size) if lines > 1 else 0
        assert laid_out.layout.title.pad.t == 18 + lifted
        assert laid_out.layout.title.text.replace("<br>", " ") == title
    assert half.layout.margin.t > full.layout.margin.t
    # Laying out again for another size starts from the unwrapped texts, not from the last wrap.
    again = charts.for_slide(half, "full")
    assert again.layout.title.text == full.layout.title.text
    assert (again.layout.margin.t, again.layout.margin.b) == (full.layout.margin.t, full.layout.margin.b)


def test_caption_under_the_charts_names_data_rows_and_model() -> None:
    at = start()
    show(at, "Approximation check")
    (figure, _), *_ = chart_elements(at)
    assert not any("Data:" in (a.get("text") or "") for a in figure["layout"].get("annotations", []))
    at.checkbox(key=keys.EXPORT_CAPTION).check().run()
    (figure, _), *_ = chart_elements(at)
    captions = [a["text"] for a in figure["layout"]["annotations"] if (a.get("text") or "").startswith("Data:")]
    assert len(captions) == 1
    words = captions[0].replace("<br>", " ")
    assert "Data: demo: coffee kiosks (invented) · N = 1,500 · Model: log of weekly_revenue explained by" in words
    # A saved model is named by its saved name.
    show(at, "Compare models")
    at.text_input(key="save_name").set_value("Kiosk model A").run()
    at.button(key="save_model").click().run()
    show(at, "Effect curves")
    (figure, _), *_ = chart_elements(at)
    captions = [a["text"] for a in figure["layout"]["annotations"] if (a.get("text") or "").startswith("Data:")]
    assert captions[0].endswith("Model: Kiosk model A")


# --- tables -------------------------------------------------------------------------------------------
HOSTILE = ['=HYPERLINK("http://example.invalid","go")', "+cmd", "-2+3", "@SUM(A1)"]


def hostile_result() -> dict[str, Any]:
    rng = np.random.default_rng(11)
    n = 120
    frame = pd.DataFrame({"sales": np.exp(3 + rng.normal(0, 0.2, n))})
    for i, name in enumerate(HOSTILE):
        frame[name] = rng.uniform(1 + i, 4 + i, n)
    spec = {
        "outcome": {"column": "sales", "transform": "log"},
        "regressors": [{"column": c, "transform": "level"} for c in HOSTILE],
    }
    return core.analyze(frame, spec)


def test_table_files_neutralise_formula_cells_and_keep_numbers() -> None:
    result = hostile_result()
    built = [core_tables.coefficient_table(result), core_tables.effects_table(result), core_tables.diagnostics_table(result)]
    built.append(core_tables.comparison_table({"=cmd|' /C calc'!A0": result}))
    for table in built:
        rows = list(csv.reader(io.StringIO(exports.table_file(table, "csv"))))
        assert rows[0] == [csv_cell(h) for h in table.header]
        body = rows[1 : 1 + len(table.rows)]
        for written, original in zip(body, table.rows, strict=True):
            for header, cell, value in zip(table.header, written, original, strict=True):
                if header in table.numeric and plain_number(value) != value:
                    assert float(cell) == float(plain_number(value))  # the screen's number, as a number
                elif isinstance(value, str) and value:
                    assert cell[0] not in "=+-@\t\r", cell
                    assert cell.lstrip("'") == value
        assert rows[1 + len(table.rows) :][1:] == [[csv_cell(line)] for line in table.footer]  # the model footer
    coefficients_csv = exports.table_file(built[0], "csv")
    assert "'=HYPERLINK(" in coefficients_csv and "'@SUM(A1)" in coefficients_csv
    markdown = exports.table_file(built[0], "markdown")
    assert markdown.startswith("**Coefficients") and "| Term |" in markdown
    latex = exports.table_file(built[0], "latex")
    assert r"\begin{tabularx}" in latex and r"\toprule" in latex


def test_each_view_offers_its_table_in_three_formats() -> None:
    at = start()
    labels = {b.proto.label for b in at.get("download_button")}
    assert {"CSV", "Markdown", "LaTeX"} <= labels
    keys = {b.proto.id for b in at.get("download_button")}
    for view, stem in (("Effects of changes", "effects"), ("Residual checks", "checks"), ("Compare models", "comparison")):
        show(at, view)
        keys = " ".join(b.proto.id for b in at.get("download_button"))
        for fmt in exports.TABLE_FORMATS:
            assert f"download_{stem}_{fmt}" in keys, (view, fmt)


# --- the spec file -------------------------------------------------------------------------------------
def test_spec_file_through_the_command_line_gives_the_app_numbers(tmp_path: Path) -> None:
    at = start()
    edit_grid(at, {"drink_price": {"transform": "level", "change": "+0.5"}, "foot_traffic": {"transform": "sqrt"}})
    at.selectbox(key="covariance").set_value("HC3").run()
    good = at.session_state["last_good"]
    assert good["spec"]["covariance"] == "HC3"
    # The file the sidebar's "Download the spec" button offers.
    text = exports.spec_file(
        good["spec"],
        exports.saved_specs(at.session_state["saved_models"] if "saved_models" in at.session_state else [], good["data_id"]),
    )
    path = tmp_path / "spec.json"
    path.write_text(text, encoding="utf-8")
    cli = cli_analyze(DEMO_CSV, path)
    app_terms = {t["name"]: t for t in good["result"]["terms"]}
    assert [t["name"] for t in cli["terms"]] == list(app_terms)
    for term in cli["terms"]:
        mine = app_terms[term["name"]]
        for key in ("estimate", "std_error", "ci_low", "ci_high", "p_value"):
            assert term[key] == mine[key], (term["name"], key)  # the same floats, not merely close
    app_effects = good["result"]["effects"]
    assert [(e["column"], e["change"], e["exact"]) for e in cli["effects"]] == [
        (e["column"], e["change"], e["exact"]) for e in app_effects
    ]
    # And the numbers on screen are those numbers, rounded for reading.
    table = coefficients(at)
    slope = next(t for t in cli["terms"] if t["name"] == "drink_price")
    assert table.loc[table["Term"] == "drink_price", "Estimate"].item() == sig(slope["estimate"])


def test_spec_file_carries_the_saved_models_and_the_current_name() -> None:
    saved = {"A": {**DEMO_SPEC}, "B": {**DEMO_SPEC, "covariance": "HC3"}}
    document = json.loads(exports.spec_file({**DEMO_SPEC, "covariance": "HC3"}, saved))
    assert document["formwise_spec"] == 1 and set(document["saved"]) == {"A", "B"}
    assert document["spec"]["name"] == "B"
    plain_spec = json.loads(exports.spec_file(DEMO_SPEC, {}))
    assert "formwise_spec" not in plain_spec and plain_spec["outcome"] == DEMO_SPEC["outcome"]


def restored_spec() -> dict[str, Any]:
    return {
        "outcome": {"column": "weekly_revenue", "transform": "log"},
        "regressors": [
            {"column": "drink_price", "transform": "level", "change": "+0.5"},
            {"column": "ad_spend", "transform": "shifted_log:1", "change": "+50%"},
            {"column": "region", "transform": "category", "reference": "Inland", "change": "Inland->Coast"},
            {"column": "years_open", "transform": "quadratic"},
        ],
        "estimator": "ols",
        "covariance": "cluster",
        "cluster": "kiosk_id",
        "weights": None,
        "at": {"drink_price": 4.0},
    }


def test_spec_upload_restores_grid_errors_and_saved_models() -> None:
    at = start()
    spec = restored_spec()
    saved = {"levels only": {**spec, "outcome": {"column": "weekly_revenue", "transform": "level"}}}
    document = core.model.specfile.spec_document(spec, saved)
    upload_spec(at, "my model.json", document.encode())
    assert not at.error, [shown(e.value) for e in at.error]
    grid = at.session_state["grid_base"].set_index("column")
    assert grid.at["weekly_revenue", "role"] == "outcome" and grid.at["weekly_revenue", "transform"] == "log"
    assert grid.at["drink_price", "transform"] == "level" and grid.at["drink_price", "change"] == "+0.5"
    assert grid.at["ad_spend", "transform"] == "shifted_log:1" and grid.at["ad_spend", "change"] == "+50%"
    assert grid.at["region", "reference"] == "Inland" and grid.at["region", "change"] == "Inland->Coast"
    assert grid.at["years_open", "transform"] == "quadratic"
    assert grid.at["foot_traffic", "role"] == "not used"
    assert at.session_state["covariance"] == "cluster" and at.session_state["cluster_column"] == "kiosk_id"
    assert [m["name"] for m in at.session_state["saved_models"]] == ["levels only"]
    good = at.session_state["last_good"]
    assert {k: good["spec"][k] for k in ("outcome", "regressors", "covariance", "cluster", "at")} == {
        k: spec[k] for k in ("outcome", "regressors", "covariance", "cluster", "at")
    }
    captions = " ".join(shown(c.value) for c in at.sidebar.caption)
    assert "Restored from my model.json with 1 saved model(s)." in captions
    terms = set(coefficients(at)["Term"])
    assert "drink_price" in terms and "region = Coast (vs Inland)" in terms


@pytest.mark.parametrize(
    ("raw", "words"),
    [
        (b"{not json", "not valid JSON"),
        (json.dumps({**restored_spec(), "outcome": {"column": "profit", "transform": "log"}}).encode(), "profit"),
        (json.dumps({**restored_spec(), "estimator": "magic"}).encode(), "magic"),
        (
            json.dumps({"formwise_spec": 1, "spec": restored_spec(), "saved": {"bad": {"outcome": {"column": "nope"}}}}).encode(),
            "bad",
        ),
    ],
)
def test_a_bad_spec_upload_says_why_and_keeps_the_screen(raw: bytes, words: str) -> None:
    at = start()
    before_grid = at.session_state["grid_base"].copy()
    before = coefficients(at)
    upload_spec(at, "broken.json", raw)
    errors = [shown(e.value) for e in at.sidebar.error]
    assert errors and "broken.json" in errors[0] and words in errors[0], errors
    pd.testing.assert_frame_equal(at.session_state["grid_base"], before_grid)
    pd.testing.assert_frame_equal(coefficients(at), before)


# --- the report ------------------------------------------------------------------------------------------
NETWORK = re.compile(r"""(?:src|href|action|srcset|xlink:href)\s*=\s*["']?\s*(?:https?:|//|ftp:)""", re.IGNORECASE)


def test_report_download_is_self_contained() -> None:
    at = start()
    show(at, "Compare models")
    at.text_input(key="save_name").set_value("<b>Kiosks</b> [x](http://example.invalid)").run()
    at.button(key="save_model").click().run()
    assert "report" not in at.session_state or at.session_state["report"] is None
    prepare_report(at)
    assert not at.exception, at.exception
    html = at.session_state["report"]["html"]
    assert html.startswith("<!DOCTYPE html>")
    assert not NETWORK.search(html), NETWORK.search(html)
    assert "<script" not in html.lower() and "url(" not in html.lower()
    assert "<b>Kiosks</b>" not in html and "&lt;b&gt;Kiosks&lt;/b&gt;" in html
    assert "Cautions" in html and CAUTION_REVIEW in html
    labels = {b.proto.label for b in at.get("download_button")}
    assert "Download the report (HTML)" in labels
    # A change to the model makes the prepared report stale: it is not offered until prepared again.
    edit_grid(at, {"drink_price": {"transform": "level"}})
    labels = {b.proto.label for b in at.get("download_button")}
    assert "Download the report (HTML)" not in labels


def test_restore_notes_say_what_the_screen_leaves_out() -> None:
    frame = pd.read_csv(DEMO_CSV)
    assert exports.restore_notes(DEMO_SPEC, frame) == []
    notes = exports.restore_notes({**DEMO_SPEC, "weights": "foot_traffic", "estimator": "ppml"}, frame)
    assert len(notes) == 2 and "least squares" in notes[0] and "weights rows by 'foot_traffic'" in notes[1]
    with_zeros = {**DEMO_SPEC, "outcome": {"column": "catering_orders", "transform": "level"}, "estimator": "ppml"}
    assert exports.restore_notes(with_zeros, frame) == []
