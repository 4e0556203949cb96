"""The report's charts: matplotlib figures drawn offline (Agg to measure, SVG to write; no
browser, no display) in the app's look (``core.output.theme``).

Each chart is laid out on a slide canvas from measured text extents rather than guessed ones:
title, subtitle and legend stacked at the top and wrapped to the canvas width, the plot in the
room that is left, axis titles wrapped to the plot, tick labels thinned until none touch. Text
is written into the SVG as outlines (``svg.fonttype = "path"``), so the report shows exactly the
glyphs whose extents were measured, on any machine and with no font installed; the SVG carries
no user text at all (the report names each chart in its caption instead).
"""

from __future__ import annotations

import io
import re
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import matplotlib as mpl
import numpy as np
from matplotlib import font_manager
from matplotlib.artist import Artist
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.font_manager import FontProperties
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator
from matplotlib.transforms import Bbox

from core.output import numbers, theme, unit_words
from core.output.display import group_text
from core.output.theme import (
    BEYOND_NAME,
    BLUE,
    GREY,
    GRID,
    INK,
    NAIVE_NAME,
    ORANGE,
    SHADE,
    SKY,
    SMEARING_NAME,
    SUBTLE,
    TYPE,
    VERMILLION,
)

MARGIN = 20  # px between the canvas edge and any text
GAP = 10  # px between stacked blocks (title, subtitle, legend, plot)
TICK_GAP = 14  # px at least between two neighbouring tick labels
# Drop in log-likelihood that bounds the 95 % interval of one parameter: chi2(1, 0.95) / 2
# (likelihood-ratio interval; common practice, no source).
LR_DROP_95 = 1.920729410347062


def _first_installed_family() -> str:
    installed = {f.name for f in font_manager.fontManager.ttflist}
    return next((name for name in theme.FONT_FAMILIES if name in installed), "DejaVu Sans")


_FAMILY = _first_installed_family()


def _pt(px: float) -> float:
    """Font sizes and line widths are given in canvas pixels, as in the app; matplotlib wants points."""
    return px * theme.PT_PER_PX


_RC = {
    "svg.fonttype": "path",
    "svg.hashsalt": "formwise",  # the same ids on every run, so a report can be compared with the last
    "text.parse_math": False,  # a '$' in a column name is a dollar sign, not mathematics
    "font.family": [_FAMILY, "DejaVu Sans"],  # DejaVu for any glyph the first lacks
    "font.size": _pt(TYPE["base"]),
    "text.color": INK,
    "axes.labelcolor": INK,
    "axes.unicode_minus": True,
    "xtick.color": INK,
    "ytick.color": INK,
    "xtick.major.size": 0,
    "ytick.major.size": 0,
    "xtick.major.pad": _pt(8),
    "ytick.major.pad": _pt(8),
    "axes.labelpad": _pt(10),
    "legend.handlelength": 2.2,
    "legend.handletextpad": 0.6,
    "legend.columnspacing": 1.6,
    "legend.labelspacing": 0.45,
    "hatch.linewidth": 1.0,
}
_NO_METADATA = {"Creator": None, "Date": None, "Format": None, "Type": None}


@contextmanager
def drawing_style() -> Iterator[None]:
    """The settings every chart is built and saved under (text as outlines, no mathtext, the font)."""
    with mpl.rc_context(_RC):
        yield


def _floats(values: Sequence[Any] | None) -> np.ndarray:
    """Numbers as floats; core sends null for non-finite values."""
    return np.array([np.nan if v is None else float(v) for v in values or []], dtype=float)


def _minus(text: str) -> str:
    return text.replace("-", numbers.MINUS)


def change_text(value: float, percent: bool = False) -> str:
    """'+10 %', '−0.5': a change with its sign, three significant digits (as the app's gap chart)."""
    text = f"{value:+.3g}" if abs(value) >= 0.01 or value == 0 else f"{value:+.2e}"
    return _minus(text) + (" %" if percent else "")


def tick_labels(ticks: Sequence[float], suffix: str = "") -> list[str]:
    """Tick labels with as few decimals as the ticks need, thousands separated, true minus signs."""
    values = [float(t) for t in ticks]
    span = max((abs(v) for v in values), default=0.0)
    if span >= 1e15 or (0 < span < 1e-4):
        return [_minus(f"{v:.3g}") + suffix for v in values]
    step = min((abs(b - a) for a, b in zip(values, values[1:], strict=False) if b != a), default=1.0)
    decimals = next((d for d in range(9) if all(abs(round(v, d) - v) <= 1e-6 * step for v in values)), 9)
    out = []
    for v in values:
        text = f"{v:,.{decimals}f}"
        out.append(("0" if float(text.replace(",", "")) == 0 else _minus(text)) + suffix)
    return out


# --- measured layout ---------------------------------------------------------------------------------------


@dataclass
class Canvas:
    """A figure on a slide canvas, measured in canvas pixels (the figure is drawn at 96 dpi, so
    a display unit is one pixel; the y axis points up, as in matplotlib)."""

    fig: Figure
    width: int
    height: int

    @classmethod
    def new(cls, size: str) -> Canvas:
        _, width, height = theme.SLIDE_SIZES[size]
        fig = Figure(figsize=(width / theme.PX_PER_INCH, height / theme.PX_PER_INCH), dpi=theme.PX_PER_INCH)
        FigureCanvasAgg(fig)
        fig.patch.set_facecolor("white")
        return cls(fig, width, height)

    @property
    def renderer(self) -> Any:
        return self.fig.canvas.get_renderer()

    def measure(self, text: str, size: float) -> float:
        """Width in pixels of one line of ``text`` at ``size`` px."""
        width, _, _ = self.renderer.get_text_width_height_descent(text, FontProperties(size=_pt(size)), ismath=False)
        return float(width)

    def wrap(self, text: str, size: float, width: float) -> str:
        """``text`` broken at spaces into lines no wider than ``width`` px; a word wider than a
        whole line is broken between characters."""
        lines: list[str] = []
        for word in text.split():
            if lines and self.measure(f"{lines[-1]} {word}", size) <= width:
                lines[-1] += " " + word
                continue
            while len(word) > 1 and self.measure(word, size) > width:
                cut = 1
                while cut < len(word) and self.measure(word[: cut + 1], size) <= width:
                    cut += 1
                lines.append(word[:cut])
                word = word[cut:]
            lines.append(word)
        return "\n".join(lines)

    def extent(self, artist: Artist) -> Bbox:
        return artist.get_window_extent(self.renderer)

    def frac(self, x0: float, y0: float, x1: float, y1: float) -> tuple[float, float, float, float]:
        return x0 / self.width, y0 / self.height, (x1 - x0) / self.width, (y1 - y0) / self.height


def _header(canvas: Canvas, title: str, subtitle: str, handles: list[Artist], labels: list[str]) -> float:
    """Title, subtitle and legend stacked from the top-left corner, each wrapped to the canvas;
    returns the y (px from the bottom) under the last of them."""
    room = canvas.width - 2 * MARGIN
    top = canvas.height - MARGIN
    for text, size, colour, weight in ((title, TYPE["title"], INK, "normal"), (subtitle, TYPE["subtitle"], SUBTLE, "normal")):
        if not text:
            continue
        artist = canvas.fig.text(
            MARGIN / canvas.width,
            top / canvas.height,
            canvas.wrap(text, size, room),
            ha="left",
            va="top",
            fontsize=_pt(size),
            color=colour,
            fontweight=weight,
            linespacing=1.25,
        )
        top = canvas.extent(artist).y0 - GAP
    if handles:
        top = _legend(canvas, handles, labels, top, room) - GAP
    return top - GAP


def _legend(canvas: Canvas, handles: list[Artist], labels: list[str], top: float, room: float) -> float:
    """A borderless legend under the subtitle in as many columns as fit the canvas width."""
    handle_px = 70  # the line sample, its padding and the column gap, at legend size
    labels = [canvas.wrap(label, TYPE["legend"], room - handle_px) for label in labels]
    legend = None
    for columns in range(len(handles), 0, -1):
        if legend is not None:
            legend.remove()
        # Matplotlib fills a legend column by column; the order that does it row by row reads left to right.
        order = [k for j in range(columns) for k in range(j, len(handles), columns)]
        legend = canvas.fig.legend(
            [handles[k] for k in order],
            [labels[k] for k in order],
            loc="upper left",
            bbox_to_anchor=(MARGIN / canvas.width, top / canvas.height),
            bbox_transform=canvas.fig.transFigure,
            ncols=columns,
            frameon=False,
            fontsize=_pt(TYPE["legend"]),
            borderaxespad=0,
            borderpad=0,
        )
        if canvas.extent(legend).x1 <= canvas.width - MARGIN:
            break
    assert legend is not None
    return canvas.extent(legend).y0


def _plain_axes(ax: Axes) -> None:
    """The app's plot area: white, light grid on both axes, no frame, no tick marks."""
    ax.set_facecolor("white")
    for spine in ax.spines.values():
        spine.set_visible(False)
    ax.grid(True, color=GRID, linewidth=_pt(1))
    ax.set_axisbelow(True)
    ax.tick_params(labelsize=_pt(TYPE["base"]))


def _numeric_ticks(canvas: Canvas, ax: Axes, axis: str, suffix: str = "") -> None:
    """Ticks at round numbers, as many as fit with room between neighbouring labels."""
    low, high = ax.get_xlim() if axis == "x" else ax.get_ylim()
    for bins in (8, 7, 6, 5, 4, 3, 2, 1):
        ticks = [t for t in MaxNLocator(bins, steps=[1, 2, 2.5, 5, 10]).tick_values(low, high) if low <= t <= high]
        labels = tick_labels(ticks, suffix)
        if axis == "x":
            centres = [ax.transData.transform((t, 0))[0] for t in ticks]
            halves = [canvas.measure(label, TYPE["base"]) / 2 for label in labels]
        else:
            centres = [ax.transData.transform((0, t))[1] for t in ticks]
            halves = [0.7 * TYPE["base"]] * len(ticks)
        if all(c1 - h1 - (c0 + h0) >= TICK_GAP for c0, h0, c1, h1 in zip(centres, halves, centres[1:], halves[1:], strict=False)):
            break
    (ax.set_xticks if axis == "x" else ax.set_yticks)(ticks, labels)


@dataclass
class Axis:
    """What to draw on one axis: its title, and either a tick suffix or fixed category names."""

    title: str
    suffix: str = ""
    names: list[str] | None = None


def _category_ticks(canvas: Canvas, ax: Axes, names: list[str]) -> None:
    """Category names at 0, 1, 2, ..., each wrapped to its share of the plot width."""
    left, right = (ax.transData.transform((v, 0))[0] for v in (0, 1)) if len(names) > 1 else (0.0, ax.bbox.width)
    slot = max(40.0, abs(right - left) - TICK_GAP)
    ax.set_xticks(range(len(names)), [canvas.wrap(n, TYPE["base"], slot) for n in names])


def _fit_axes(canvas: Canvas, ax: Axes, box: tuple[float, float, float, float], x: Axis, y: Axis) -> None:
    """Place ``ax`` so that the plot, its tick labels and axis titles fill ``box`` (x0, y0, x1, y1
    in px): lay out, measure what sticks out of the plot, move the plot in, repeat (the ticks
    change with the plot's size)."""
    x0, y0, x1, y1 = box
    pos = [x0 + 110, y0 + 90, x1 - 30, y1]
    for _ in range(5):
        ax.set_position(canvas.frac(*pos))
        if x.names is None:
            _numeric_ticks(canvas, ax, "x", x.suffix)
        else:
            _category_ticks(canvas, ax, x.names)
        _numeric_ticks(canvas, ax, "y", y.suffix)
        # Further from category names than from numbers, so it does not read as a second line of the middle name.
        ax.set_xlabel(
            canvas.wrap(x.title, TYPE["base"], pos[2] - pos[0]),
            fontsize=_pt(TYPE["base"]),
            linespacing=1.25,
            labelpad=_pt(22 if x.names else 10),
        )
        ax.set_ylabel(canvas.wrap(y.title, TYPE["base"], pos[3] - pos[1]), fontsize=_pt(TYPE["base"]), linespacing=1.25)
        tight = ax.get_tightbbox(canvas.renderer)
        new = [x0 + pos[0] - tight.x0, y0 + pos[1] - tight.y0, x1 - (tight.x1 - pos[2]), y1 - (tight.y1 - pos[3])]
        if max(abs(a - b) for a, b in zip(new, pos, strict=True)) < 0.5:
            break
        pos = new
    _clear_corner(canvas, ax)


def _clear_corner(canvas: Canvas, ax: Axes) -> None:
    """Blank a y tick label that would touch an x tick label where the two axes meet."""
    renderer = canvas.renderer
    x_boxes = [t.get_window_extent(renderer) for t in ax.get_xticklabels() if t.get_text()]
    labels = [t.get_text() for t in ax.get_yticklabels()]
    for i, label in enumerate(ax.get_yticklabels()):
        box = label.get_window_extent(renderer)
        if label.get_text() and any(box.overlaps(b.expanded(1.0, 1.0).padded(4)) for b in x_boxes):
            labels[i] = ""
    ax.set_yticks(ax.get_yticks(), labels)


def _range(arrays: Sequence[np.ndarray], pad: float = 0.05, include: Sequence[float] = ()) -> tuple[float, float]:
    """Room for every value given (and ``include``), plus ``pad`` of the span on each side."""
    finite = np.concatenate([a[np.isfinite(a)] for a in arrays] + [np.asarray(include, dtype=float)])
    if not finite.size:
        return 0.0, 1.0
    low, high = float(finite.min()), float(finite.max())
    span = (high - low) or abs(high) or 1.0
    return low - pad * span, high + pad * span


def _square(colour: str, alpha: float) -> Patch:
    return Patch(facecolor=colour, alpha=alpha, edgecolor="none")


def _line(colour: str, width: float, style: str = "-") -> Line2D:
    return Line2D([], [], color=colour, linewidth=_pt(width), linestyle=style)


# --- the charts -----------------------------------------------------------------------------------------


def _at(curve: dict[str, Any]) -> str:
    """' at region = Inland' for a curve read at a moderator's value (docs/contract.md §3.8-3.9)."""
    return f" at {group_text(curve['group'])}" if curve.get("group") else ""


def effect_subtitle(outcome_column: str, outcome_label: str, percent_effect: bool, unit: str | None = None) -> str:
    """The effect is on the outcome itself, whatever its transform: the subtitle says so."""
    what = (
        f"% change in {outcome_column}"
        if percent_effect
        else "change in " + unit_words.label(outcome_column, unit, "its own units")
    )
    model = f" (model of {outcome_label})" if outcome_label != outcome_column else ""
    return f"Effect as {what}{model}, other regressors held at their reference values"


def gap_figure(
    curve: dict[str, Any], outcome_column: str, outcome_label: str, size: str = "full", units: dict[str, str] | None = None
) -> Figure:
    """Exact and first-order effect across change sizes, the gap between them shaded and the
    chosen change marked, in the words of the app's gap chart."""
    with drawing_style():
        canvas = Canvas.new(size)
        sizes, approx, exact = (_floats(curve[k]) for k in ("sizes", "approximate", "exact"))
        column = str(curve["column"])
        percent_change, percent_effect = curve["kind"] == "percent", curve["units"] == "percent"
        chosen = float(curve["chosen"])
        ax = canvas.fig.add_axes((0.1, 0.1, 0.8, 0.8))
        _plain_axes(ax)
        ax.fill_between(sizes, exact, approx, color=SKY, alpha=theme.GAP_ALPHA, linewidth=0)
        ax.axhline(0, color=SHADE, linewidth=_pt(1))
        ax.plot(sizes, exact, color=BLUE, linewidth=_pt(3.5))
        ax.plot(sizes, approx, color=ORANGE, linewidth=_pt(3.5), linestyle=(0, (4, 2)))
        ax.axvline(chosen, color=VERMILLION, linewidth=_pt(2.5), linestyle=":")
        at = int(np.nanargmin(np.abs(sizes - chosen)))
        for value, colour in ((exact[at], BLUE), (approx[at], ORANGE)):
            ax.plot(
                [sizes[at]], [value], "o", color=colour, markersize=_pt(11), markeredgecolor="white", markeredgewidth=_pt(1.5)
            )
        span = float(np.nanmax(sizes) - np.nanmin(sizes)) or 1.0
        ax.set_xlim(float(np.nanmin(sizes)) - 0.02 * span, float(np.nanmax(sizes)) + 0.02 * span)
        ax.set_ylim(*_range([approx, exact], include=[0.0]))
        # Near the right edge the label goes on the line's left so it stays in the plot.
        near_right = chosen > float(np.nanmax(sizes)) - 0.3 * span
        ax.annotate(
            f"your change: {change_text(chosen, percent_change)}",
            xy=(chosen, 0),
            xycoords=("data", "axes fraction"),
            xytext=(_pt(-8 if near_right else 8), _pt(8)),
            textcoords="offset points",
            ha="right" if near_right else "left",
            va="bottom",
            fontsize=_pt(TYPE["note"]),
            color=VERMILLION,
            bbox={"boxstyle": "square,pad=0.2", "facecolor": "white", "alpha": 0.85, "edgecolor": "none"},
        )
        handles = [_line(BLUE, 3.5), _line(ORANGE, 3.5, "--"), _square(SKY, 0.45)]
        labels = ["Exact effect", "First-order approximation", "Gap between them"]
        top = _header(
            canvas,
            f"How far the shortcut drifts: changing {column}{_at(curve)}",
            effect_subtitle(outcome_column, outcome_label, percent_effect, (units or {}).get(outcome_column)),
            handles,
            labels,
        )
        units, own = units or {}, "in its own units"
        x_title = f"Change in {column} (%)" if percent_change else "Change in " + unit_words.label(column, units.get(column), own)
        y_title = (
            f"Effect on {outcome_column} (%)"
            if percent_effect
            else "Effect on " + unit_words.label(outcome_column, units.get(outcome_column), own)
        )
        _fit_axes(
            canvas,
            ax,
            (MARGIN, MARGIN, canvas.width - MARGIN, top),
            Axis(x_title, " %" if percent_change else ""),
            Axis(y_title, " %" if percent_effect else ""),
        )
    return canvas.fig


def _model_words(outcome_label: str, ppml: bool) -> str:
    return f"PPML model of the mean of {outcome_label}" if ppml else f"Model of {outcome_label}"


def _differs(a: np.ndarray, b: np.ndarray) -> bool:
    both = np.isfinite(a) & np.isfinite(b)
    return bool(np.any(np.abs(a[both] - b[both]) > 1e-9 * np.maximum(1.0, np.abs(b[both]))))


def curve_figure(
    curve: dict[str, Any],
    outcome_column: str,
    outcome_label: str,
    regressor_label: str,
    ppml: bool = False,
    size: str = "full",
    units: dict[str, str] | None = None,
) -> Figure:
    """The expected outcome on its original scale across one regressor (others at the reference
    point): the smearing curve with its 95 % band, the naive back-transform dashed where it
    differs, and the stretches beyond the observed data shaded and named in the legend.
    Categories and 0/1 variables get one point per level with its interval as whiskers."""
    with drawing_style():
        canvas = Canvas.new(size)
        ax = canvas.fig.add_axes((0.1, 0.1, 0.8, 0.8))
        _plain_axes(ax)
        smear, naive = _floats(curve["smearing"]), _floats(curve["naive"])
        low, high = _floats(curve["ci_low"]), _floats(curve["ci_high"])
        show_naive = not ppml and _differs(naive, smear)
        if ppml:
            main = "Predicted mean (PPML models it directly)"
        else:
            main = SMEARING_NAME if show_naive else f"Predicted {outcome_column} (expected value)"
        column = str(curve["column"])
        subtitle = (
            f"{_model_words(outcome_label, ppml)} on {regressor_label} and other regressors, these held at their reference values"
        )
        if curve["kind"] == "levels":
            handles, labels, x_axis = _levels(ax, curve, smear, naive, low, high, show_naive, main)
            title = f"Predicted {outcome_column} by {column}{_at(curve)}"
        else:
            handles, labels, x_axis = _continuous(ax, curve, smear, naive, low, high, show_naive, main)
            title = f"Predicted {outcome_column} as {column} varies{_at(curve)}"
        top = _header(canvas, title, subtitle, handles, labels)
        units = units or {}
        if curve["kind"] != "levels" and column in units:
            x_axis = Axis(unit_words.label(column, units[column]), x_axis.suffix, x_axis.names)
        y_title = unit_words.label(outcome_column, units.get(outcome_column), "original units")
        _fit_axes(canvas, ax, (MARGIN, MARGIN, canvas.width - MARGIN, top), x_axis, Axis(y_title))
    return canvas.fig


def _continuous(
    ax: Axes,
    curve: dict[str, Any],
    smear: np.ndarray,
    naive: np.ndarray,
    low: np.ndarray,
    high: np.ndarray,
    show_naive: bool,
    main: str,
) -> tuple[list[Artist], list[str], Axis]:
    x = _floats(curve["x"])
    observed_min, observed_max = float(curve["observed_min"]), float(curve["observed_max"])
    # A variable that is never negative is not drawn below zero, even where its transform allows it.
    keep = x >= 0 if observed_min >= 0 else np.ones_like(x, dtype=bool)
    x, smear, naive, low, high = (a[keep] for a in (x, smear, naive, low, high))
    ax.fill_between(x, low, high, color=SKY, alpha=theme.BAND_ALPHA, linewidth=0)
    ax.plot(x, smear, color=BLUE, linewidth=_pt(3.5))
    handles: list[Artist] = [_square(SKY, 0.45), _line(BLUE, 3.5)]
    labels = ["95 % confidence band", main]
    curves = [smear, low, high]
    if show_naive:
        ax.plot(x, naive, color=ORANGE, linewidth=_pt(3), linestyle=(0, (4, 2)))
        handles.append(_line(ORANGE, 3, "--"))
        labels.append(NAIVE_NAME)
        curves.append(naive)
    x_low, x_high = float(np.nanmin(x)), float(np.nanmax(x))
    shaded = False
    for left, right in ((x_low, observed_min), (observed_max, x_high)):
        if right - left > 1e-12 * max(1.0, abs(right)):
            ax.axvspan(left, right, color=SHADE, alpha=theme.BEYOND_ALPHA, linewidth=0, zorder=0)
            shaded = True
    if shaded:
        # Named in the legend rather than written in the strips: a strip can be too narrow for a label.
        handles.append(_square(SHADE, 0.35))
        labels.append(BEYOND_NAME)
    pad = 0.01 * ((x_high - x_low) or 1.0)
    ax.set_xlim(x_low - pad, x_high + pad)
    ax.set_ylim(*_range(curves))
    return handles, labels, Axis(f"{curve['column']} (as recorded)")


def _level_name(value: Any) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _levels(
    ax: Axes,
    curve: dict[str, Any],
    smear: np.ndarray,
    naive: np.ndarray,
    low: np.ndarray,
    high: np.ndarray,
    show_naive: bool,
    main: str,
) -> tuple[list[Artist], list[str], Axis]:
    levels = [_level_name(v) for v in curve["x"]]
    names = [f"{lv} (reference)" if i == 0 and len(levels) > 2 else lv for i, lv in enumerate(levels)]
    positions = np.arange(len(levels), dtype=float)
    offset = 0.1 if show_naive else 0.0
    whiskers = ax.errorbar(
        positions - offset,
        smear,
        yerr=[smear - low, high - smear],
        fmt="o",
        color=BLUE,
        markersize=_pt(15),
        markeredgecolor="white",
        markeredgewidth=_pt(1.5),
        elinewidth=_pt(3),
        capsize=_pt(7),
        capthick=_pt(3),
    )
    handles: list[Artist] = [whiskers]
    labels = [main + " with 95 % interval"]
    curves = [smear, low, high]
    if show_naive:
        ax.plot(
            positions + offset, naive, "D", color=ORANGE, markersize=_pt(12), markeredgecolor="white", markeredgewidth=_pt(1.5)
        )
        handles.append(Line2D([], [], marker="D", linestyle="none", color=ORANGE, markersize=_pt(12), markeredgecolor="white"))
        labels.append(NAIVE_NAME)
        curves.append(naive)
    ax.set_xlim(-0.6, len(levels) - 0.4)
    # The whole of every whisker, with room to spare: an interval cut off would read as a shorter one.
    ax.set_ylim(*_range(curves, pad=0.08))
    ax.grid(False, axis="x")
    return handles, labels, Axis(str(curve["column"]), names=names)


def boxcox_figure(boxcox: dict[str, Any], outcome_column: str, size: str = "full") -> Figure:
    """Which power of the outcome fits best. The profile is drawn as the drop from the best
    log-likelihood (0 at the top, so higher is better), with log, level and the best power
    marked on it; a number line above the plot shows the powers the data accept at 95 % as a
    bar, and names log, level and the best power in a row of labels spread so none touch."""
    with drawing_style():
        canvas = Canvas.new(size)
        lam, drop = _profile(boxcox)
        best = float(boxcox["lambda"])
        low, high = boxcox.get("ci_low"), boxcox.get("ci_high")
        ax = canvas.fig.add_axes((0.1, 0.1, 0.8, 0.8))
        _plain_axes(ax)
        ax.plot(lam, drop, color=BLUE, linewidth=_pt(3.5))
        marks = _boxcox_marks(lam, drop, best)
        for _, where, value, style in marks:
            ax.plot([where], [value], linestyle="none", **style)
        ax.set_xlim(*_range([lam], pad=0.02))
        ax.set_ylim(*_range([drop], pad=0.06))
        handles: list[Artist] = [_line(BLUE, 3.5)]
        labels = ["Log-likelihood of each power, less the best"]
        if low is not None and high is not None:
            handles.append(_square(SKY, 0.6))
            labels.append(f"Powers the data accept (95 %): {numbers.signed(low)} to {numbers.signed(high)}")
        top = _header(
            canvas,
            f"Which power of {outcome_column} fits best (Box-Cox)",
            f"Higher is better; {outcome_column} is modelled on the regressors as they are transformed now",
            handles,
            labels,
        )
        ruler_height = 22 + 1.3 * TYPE["note"] + 8
        _fit_axes(
            canvas,
            ax,
            (MARGIN, MARGIN, canvas.width - MARGIN, top - ruler_height - GAP),
            Axis("Power λ of the outcome (0 = log, 0.5 ≈ square root, 1 = level)"),
            Axis("Log-likelihood, less the best"),
        )
        _ruler(canvas, ax, ruler_height, marks, low, high)
    return canvas.fig


def _profile(boxcox: dict[str, Any]) -> tuple[np.ndarray, np.ndarray]:
    """The powers tried and each one's log-likelihood less the best (0 at the best, negative elsewhere)."""
    lam = _floats(boxcox["profile"]["lambda"])
    loglik = _floats(boxcox["profile"]["loglik"])
    peak = boxcox.get("loglik_max")
    return lam, loglik - (float(peak) if peak is not None else float(np.nanmax(loglik)))


def profile_drop(boxcox: dict[str, Any], power: float) -> float | None:
    """How far the log-likelihood of ``power`` falls below the best power's (positive), or None
    when the profile does not reach that power."""
    lam, drop = _profile(boxcox)
    ok = np.isfinite(lam) & np.isfinite(drop)
    if not ok.any() or not lam[ok].min() <= power <= lam[ok].max():
        return None
    return float(-np.interp(power, lam[ok], drop[ok]))


def _boxcox_marks(lam: np.ndarray, drop: np.ndarray, best: float) -> list[tuple[str, float, float, dict[str, Any]]]:
    """(label, λ, drop, marker style) for log, level and the best power, where the profile reaches them."""
    ok = np.isfinite(lam) & np.isfinite(drop)
    lam, drop = lam[ok], drop[ok]
    hollow = {"markerfacecolor": "white", "markeredgewidth": _pt(2.5), "color": INK, "markersize": _pt(13)}
    marks = [
        (
            f"best {numbers.signed(best)}",
            best,
            0.0,
            {"marker": "o", "color": VERMILLION, "markersize": _pt(14), "markeredgecolor": "white"},
        )
    ]
    for value, word, marker in ((0.0, "log", "s"), (1.0, "level", "D")):
        if lam.size and lam.min() <= value <= lam.max():
            marks.append((word, value, float(np.interp(value, lam, drop)), {"marker": marker, **hollow}))
    return marks


def _ruler(
    canvas: Canvas,
    ax: Axes,
    height: float,
    marks: list[tuple[str, float, float, dict[str, Any]]],
    low: float | None,
    high: float | None,
) -> None:
    """The number line above the plot: the accepted interval as a bar, the marks on it and their
    names in one row beneath, spread apart where they would touch."""
    box = ax.get_position()
    bottom = box.y1 * canvas.height + GAP
    ruler = canvas.fig.add_axes(canvas.frac(box.x0 * canvas.width, bottom, box.x1 * canvas.width, bottom + height))
    ruler.set_xlim(ax.get_xlim())
    ruler.set_ylim(0, height)
    ruler.set_axis_off()
    line_y = height - 11
    ruler.axhline(line_y, color=GRID, linewidth=_pt(2))
    if low is not None and high is not None:
        ruler.plot([low, high], [line_y, line_y], color=SKY, alpha=0.6, linewidth=_pt(18), solid_capstyle="butt")
    for word, where, _, _ in marks:
        # Thin ticks rather than the curve's symbols: the best power often lies a few pixels from log.
        colour = VERMILLION if word.startswith("best") else INK
        ruler.plot([where], [line_y], marker="|", markersize=_pt(22), markeredgewidth=_pt(3), color=colour, zorder=3)
    to_px = ruler.transData.transform
    widths = [canvas.measure(word, TYPE["note"]) for word, *_ in marks]
    centres = [to_px((where, 0))[0] for _, where, *_ in marks]
    lefts = spread(centres, widths, box.x0 * canvas.width, box.x1 * canvas.width, TICK_GAP)
    for (word, *_), left in zip(marks, lefts, strict=True):
        canvas.fig.text(
            left / canvas.width,
            (bottom + 2) / canvas.height,
            word,
            ha="left",
            va="bottom",
            fontsize=_pt(TYPE["note"]),
            color=VERMILLION if word.startswith("best") else INK,
        )


def spread(centres: Sequence[float], widths: Sequence[float], low: float, high: float, gap: float) -> list[float]:
    """Left edges for labels of ``widths`` wanted centred at ``centres`` on one row from ``low``
    to ``high``: each as near its centre as it can be with ``gap`` between neighbours."""
    order = sorted(range(len(centres)), key=lambda i: centres[i])
    lefts = {i: centres[i] - widths[i] / 2 for i in order}
    edge = low
    for i in order:  # push right past the left edge and each left neighbour
        lefts[i] = max(lefts[i], edge)
        edge = lefts[i] + widths[i] + gap
    edge = high
    for i in reversed(order):  # then back left inside the right edge
        lefts[i] = min(lefts[i], edge - widths[i])
        edge = lefts[i] - gap
    return [max(low, lefts[i]) for i in range(len(centres))]


# --- SVG ---------------------------------------------------------------------------------------------------


def to_svg(fig: Figure, key: str) -> str:
    """The figure as an inline <svg> element, declared at its canvas size in px. ``key`` prefixes
    every id, so several charts in one page do not share ids. Clipping is dropped: every chart
    sets its limits to hold all it draws, and a clip path needs CSS ``url()``, which the
    report keeps out."""
    buffer = io.StringIO()
    with drawing_style():
        fig.savefig(buffer, format="svg", metadata=_NO_METADATA, facecolor="white")
    svg = buffer.getvalue()
    svg = svg[svg.index("<svg") :]
    svg = re.sub(r"<!--.*?-->\s*", "", svg, flags=re.S)  # each text as a comment: user text kept out
    svg = re.sub(r'\s*<style type="text/css">.*?</style>', "", svg, flags=re.S)
    svg = re.sub(r"\s*<clipPath\b.*?</clipPath>", "", svg, flags=re.S)
    svg = re.sub(r'\sclip-path="url\(#[^)"]*\)"', "", svg)
    svg = re.sub(r'\bid="', f'id="{key}-', svg)
    svg = re.sub(r'href="#', f'href="#{key}-', svg)
    width, height = (round(v * theme.PX_PER_INCH) for v in fig.get_size_inches())
    svg = re.sub(r'^<svg([^>]*?) width="[^"]*" height="[^"]*"', rf'<svg\1 width="{width}" height="{height}"', svg, count=1)
    svg = svg.replace("<svg ", '<svg class="chart" aria-hidden="true" ', 1)
    if "url(" in svg or "<text" in svg:
        raise AssertionError("chart SVG must hold no url() and no text elements")
    return svg.strip()


def sweep_figure(sweep: dict[str, Any], size: str = "full") -> Figure:
    """The sweep over functional forms: every model's focus effect on the common percent scale
    with its 95 % interval, smallest to largest, the best model by AIC on the original scale
    marked; which form each variable took is the report's table beside it."""
    ranked = sweep["models"]  # best by AIC first
    order = sorted(range(len(ranked)), key=lambda i: (ranked[i]["percent"] is None, ranked[i]["percent"] or 0.0))
    pct = _floats([ranked[i]["percent"] for i in order])
    low = _floats([ranked[i]["percent_ci_low"] for i in order])
    high = _floats([ranked[i]["percent_ci_high"] for i in order])
    x = np.arange(1, len(order) + 1, dtype=float)
    with drawing_style():
        canvas = Canvas.new(size)
        ax = canvas.fig.add_axes((0.1, 0.1, 0.8, 0.8))
        _plain_axes(ax)
        ax.axhline(0, color=GREY, linewidth=_pt(1))
        shown = np.isfinite(pct)
        # Many models: thinner marks, so neighbouring intervals stay apart.
        width = 2.0 if len(order) <= 64 else 1.0
        ax.vlines(x[shown], low[shown], high[shown], color=SKY, linewidth=_pt(width))
        ax.plot(x[shown], pct[shown], "o", color=INK, markersize=_pt(5 if len(order) <= 64 else 3), markeredgewidth=0)
        best = order.index(0)
        if shown[best]:
            ax.plot(
                [x[best]],
                [pct[best]],
                "D",
                color=VERMILLION,
                markersize=_pt(13),
                markerfacecolor="none",
                markeredgewidth=_pt(2.5),
            )
        ax.set_xlim(0.5 - 0.01 * len(order), len(order) + 0.5 + 0.01 * len(order))
        ax.set_ylim(*_range([pct, low, high], include=[0.0]))
        focus = sweep["focus"]
        handles = [_line(INK, 0, ""), _line(SKY, 2.0), _line(VERMILLION, 0, "")]
        handles[0].set_marker("o")
        handles[2].set_marker("D")
        handles[2].set_markerfacecolor("none")
        labels = ["Effect in one model", "Its 95 % interval", "Best model by AIC (original scale)"]
        top = _header(
            canvas,
            f"How much the effect of {focus['change']} in {focus['column']} depends on the forms",
            f"{len(order)} models on the same {sweep['n_obs']:,} rows, sorted by the effect",
            handles,
            labels,
        )
        _fit_axes(
            canvas,
            ax,
            (MARGIN, MARGIN, canvas.width - MARGIN, top),
            Axis("Models, smallest effect to largest"),
            Axis("Change of expected outcome (%)", " %"),
        )
    return canvas.fig
