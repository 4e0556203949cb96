"""A self-contained HTML report: one file, no script, nothing fetched from the network.

Everything in it comes from ``core.analyze``. The page is a jinja2 template
(``templates/report.html.j2``) with autoescaping on, so every piece of user text (file, column
and level names, spec names) is escaped; the charts (``core.output.figures``) are inline SVG
that carries no user text, the only markup passed through unescaped.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pandas as pd
from jinja2 import Environment, FileSystemLoader, StrictUndefined
from markupsafe import Markup
from matplotlib.figure import Figure

from core.analysis import analyze
from core.errors import FormwiseError
from core.model.design import ColumnCache
from core.model.transforms import parse_transform
from core.output import figures, forms, numbers, theme
from core.output.numbers import format_cell
from core.output.tables import Table, coefficient_table, comparison_table, diagnostics_table, effects_table, from_frame
from core.output.text import small_sample
from core.output.unit_words import units_of

CAUTION_REVIEW = (
    "For decisions with consequences, have the analysis reviewed by a qualified statistician and follow "
    "the reporting rules that apply where you work."
)
GAP_CAPTION = "The shaded gap is what the first-order approximation misses; prefer the exact effect where the gap is large."
CURVE_CAPTION = "Other regressors at the reference point; shaded: 95 % interval of the expected value."
LEVELS_CAPTION = "Other regressors at the reference point; whiskers: 95 % interval of the expected value."
SWEEP_CAPTION = (
    "Each model is one combination of forms, fitted on the same rows. Effects are the percent change of the "
    "expected outcome at the reference point, so models with a level and a log outcome are compared like for like."
)
SWEEP_RANKED_ROWS = 20  # the best models by AIC listed in the report; the chart shows them all

# Found beside this module, wherever the package is run from.
_ENV = Environment(
    loader=FileSystemLoader(Path(__file__).resolve().parent / "templates"),
    autoescape=True,
    undefined=StrictUndefined,
    trim_blocks=True,
    lstrip_blocks=True,
    keep_trailing_newline=True,
)
_ENV.filters["cell"] = format_cell
_ENV.filters["thousands"] = lambda n: f"{n:,}"
_ENV.tests["number"] = lambda v: isinstance(v, (int, float)) and not isinstance(v, bool)


@dataclass
class Chart:
    svg: Markup
    label: str  # what a screen reader says for the chart (its title)
    caption: str


def _chart(fig: Figure, key: str, caption: str) -> Chart:
    title = fig.texts[0].get_text().replace("\n", " ") if fig.texts else ""
    return Chart(Markup(figures.to_svg(fig, key)), title, caption)


def model_in_words(spec: dict[str, Any]) -> str:
    outcome = spec["outcome"]
    y = parse_transform(outcome.get("transform", "level"), "outcome", "outcome").label(outcome["column"])
    parts = []
    for r in spec.get("regressors", []):
        label = parse_transform(r.get("transform", "level"), "regressor", r["column"]).label(r["column"])
        if r.get("change"):
            label += f" (change {r['change']})"
        parts.append(label)
    estimator = "Poisson pseudo-maximum likelihood" if spec.get("estimator") == "ppml" else "least squares"
    return f"{y} explained by {', '.join(parts) or 'an intercept only'}, fitted by {estimator}"


def boxcox_caption(boxcox: dict[str, Any]) -> str:
    """The accepted interval in words and how far log and level fall below the best power."""
    words = [f"The bar marks the powers the data accept at 95 % (log-likelihood within {figures.LR_DROP_95:.2f} of the best)."]
    drops = [
        f"{name} (λ = {value:g}) is {numbers.compact(drop)} below the best"
        for name, value in (("log", 0.0), ("level", 1.0))
        if (drop := figures.profile_drop(boxcox, value)) is not None
    ]
    if drops:
        words.append(" and ".join(drops).capitalize() + ".")
    if boxcox.get("note"):
        words.append(boxcox["note"])
    return " ".join(words)


def report_figures(result: dict[str, Any], spec: dict[str, Any], size: str = "full") -> list[tuple[str, Figure, str]]:
    """Every chart of the report as (key, figure, caption), in the report's order: a gap chart
    per regressor with a change, an effect curve per regressor, the Box-Cox profile last."""
    outcome = result["outcome"]
    y = outcome["column"]
    y_label = parse_transform(outcome.get("transform", "level"), "outcome", "outcome").label(y)
    labels = {
        r["column"]: parse_transform(r.get("transform", "level"), "regressor", r["column"]).label(r["column"])
        for r in spec.get("regressors", [])
    }
    units = units_of(result, spec)
    out = [
        (f"gap{i}", figures.gap_figure(c, y, y_label, size=size, units=units), GAP_CAPTION)
        for i, c in enumerate(result.get("gap_curves", []))
    ]
    ppml = result.get("estimator") == "ppml"
    for i, curve in enumerate(result.get("curves", [])):
        label = labels.get(curve["column"], curve["column"])
        caption = LEVELS_CAPTION if curve["kind"] == "levels" else CURVE_CAPTION
        out.append((f"curve{i}", figures.curve_figure(curve, y, y_label, label, ppml=ppml, size=size, units=units), caption))
    if result.get("boxcox"):
        out.append(("boxcox", figures.boxcox_figure(result["boxcox"], y, size=size), boxcox_caption(result["boxcox"])))
    if result.get("sweep"):
        out.append(("sweep", figures.sweep_figure(result["sweep"], size=size), SWEEP_CAPTION))
    return out


# What the report tells its ``progress`` as it goes: (share done from 0 to 1, what runs now).
ReportProgress = Callable[[float, str], Any] | None
# Shares of the whole report, measured on bench/browser.py's 1,000,000-row table: the analysis
# about half, the charts (matplotlib to SVG) most of the rest.
_ANALYSIS_SHARE, _CHARTS_SHARE, _SAVED_SHARE = 0.5, 0.4, 0.08
STAGE_ANALYSIS = "Fitting the model and its checks"
STAGE_WRITING = "Writing the file"


class _Told:
    """Passes the report's progress on and stops the report when the caller says so."""

    def __init__(self, progress: ReportProgress) -> None:
        self.progress = progress

    def __call__(self, share: float, stage: str) -> None:
        if self.progress is not None and self.progress(min(share, 1.0), stage) is False:
            raise FormwiseError("the report was stopped before it was finished; nothing was written.")

    def span(self, start: float, width: float, stage: str) -> Callable[[float], bool]:
        """A ``core.analyze`` progress callback for the part of the report from ``start`` on."""

        def told(share: float) -> bool:
            self(start + width * share, stage)
            return True

        return told


def _charts(result: dict[str, Any], spec: dict[str, Any], told: _Told | None = None) -> dict[str, Chart]:
    made = report_figures(result, spec)
    out = {}
    for i, (key, fig, caption) in enumerate(made):
        if told is not None:
            told(_ANALYSIS_SHARE + _CHARTS_SHARE * i / len(made), f"Drawing the charts ({i + 1} of {len(made)})")
        out[key] = _chart(fig, key, caption)
    return out


@dataclass
class SweepSection:
    sentence: str
    chart: Chart
    moves: Table
    ranked: Table
    n_models: int
    n_left_out: int


def _sweep_section(sweep: dict[str, Any] | None, chart: Chart | None) -> SweepSection | None:
    if not sweep or chart is None:
        return None
    columns = forms.varying(sweep)
    moves = from_frame("What moves the answer: the effect under each form of each variable", forms.moves_table(sweep, columns))
    shown = min(SWEEP_RANKED_ROWS, sweep["n_models"])
    title = f"The {shown} best of {sweep['n_models']} models by AIC on the original scale"
    ranked = from_frame(title, forms.ranked_table(sweep, columns, SWEEP_RANKED_ROWS))
    sentence = " ".join(filter(None, [forms.summary_sentence(sweep), forms.held_sentence(sweep)]))
    return SweepSection(sentence, chart, moves, ranked, sweep["n_models"], sweep["n_left_out"])


def build_report(
    data: pd.DataFrame,
    spec: dict[str, Any],
    data_name: str,
    saved: dict[str, dict[str, Any]] | None = None,
    progress: ReportProgress = None,
    columns: ColumnCache | None = None,
) -> str:
    """The whole report as one HTML string.

    ``progress`` is called with the share done and the stage running (``STAGE_ANALYSIS``,
    "Drawing the charts (3 of 19)", the saved models, ``STAGE_WRITING``); when it returns False
    the report stops with ``FormwiseError`` and nothing is returned. ``columns``: the caller's
    ``ColumnCache`` for this table, so the report's fits reuse columns already transformed.
    """
    told = _Told(progress)
    told(0.0, STAGE_ANALYSIS)
    result = analyze(data, spec, columns=columns, progress=told.span(0.0, _ANALYSIS_SHARE, STAGE_ANALYSIS))
    n_coefficients = len(result.get("terms", [])) or 1
    charts = _charts(result, spec, told)
    comparison = None
    if saved:
        compared = {}
        start = _ANALYSIS_SHARE + _CHARTS_SHARE
        for i, (name, s) in enumerate(saved.items()):
            told(start + _SAVED_SHARE * i / len(saved), f"Fitting the saved models ({i + 1} of {len(saved)})")
            compared[name] = analyze(data, s, parts={"fit", "effects", "diagnostics"}, columns=columns)
        comparison = comparison_table(compared)
    told(_ANALYSIS_SHARE + _CHARTS_SHARE + _SAVED_SHARE, STAGE_WRITING)
    reference = [(str(k), v if isinstance(v, str) else format_cell(v)) for k, v in result["reference_point"].items()]
    return _ENV.get_template("report.html.j2").render(
        title=spec.get("name") or "Formwise report",
        data_name=data_name,
        result=result,
        generated=f"{datetime.now(UTC):%Y-%m-%d %H:%M}",
        model_words=model_in_words(spec),
        cautions=[*result["cautions"], CAUTION_REVIEW],
        small_sample=n_coefficients if small_sample(result["n_obs"], n_coefficients) else None,
        coefficients=coefficient_table(result),
        effects=effects_table(result),
        reference=reference,
        gap_charts=[c for key, c in charts.items() if key.startswith("gap")],
        curve_charts=[c for key, c in charts.items() if key.startswith("curve")],
        diagnostics=diagnostics_table(result) if result.get("diagnostics") else None,
        fit=result.get("fit") or {},
        boxcox_chart=charts.get("boxcox"),
        sweep=_sweep_section(result.get("sweep"), charts.get("sweep")),
        comparison=comparison,
        spec_json=json.dumps(spec, indent=2, ensure_ascii=False),
        font=theme.FONT,
        ink=theme.INK,
        blue=theme.BLUE,
        grid=theme.GRID,
        orange=theme.ORANGE,
        subtle=theme.SUBTLE,
    )
