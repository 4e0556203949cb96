"""Plotly figures for the app (no streamlit import, so figures can be built and tested alone).

``base`` holds the shared look and the slide canvas; ``gap``, ``curves`` and ``checks`` build
the views' figures. The names views and tests use are gathered here.
"""

from app.charts.base import (
    BEYOND_NAME,
    BLUE,
    EXPORT_FORMATS,
    EXPORT_SCALE,
    MODEBAR_WORDS,
    SLIDE_SIZES,
    TEMPLATE,
    TYPE,
    caption_text,
    export_config,
    file_stem,
    for_slide,
    legend_rows,
    point_count,
    size_label,
    style,
    wrap,
)
from app.charts.checks import boxcox_figure, distribution_figure, profile_histogram_figure
from app.charts.curves import NAIVE_NAME, SMEARING_NAME, curve_figure, group_curves_figure, rows_off_the_axis
from app.charts.gap import curve_summary, gap_figure, safe_range, tolerance_regions, units_figure
from app.charts.residuals import check_figures, curvature_figure, spread_figure, tails_figure

__all__ = [
    "BEYOND_NAME", "BLUE", "EXPORT_FORMATS", "EXPORT_SCALE", "MODEBAR_WORDS", "NAIVE_NAME", "SLIDE_SIZES",
    "SMEARING_NAME", "TEMPLATE", "TYPE", "boxcox_figure", "caption_text", "check_figures", "curvature_figure",
    "curve_figure", "curve_summary", "distribution_figure", "group_curves_figure", "export_config", "file_stem", "for_slide", "gap_figure",
    "legend_rows", "point_count", "profile_histogram_figure", "rows_off_the_axis", "safe_range", "size_label", "spread_figure", "style",
    "tails_figure", "tolerance_regions", "units_figure", "wrap",
]  # fmt: skip
