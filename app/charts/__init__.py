"""Plotly figures for the app (no streamlit import, so figures can be built and tested alone).

``base`` holds the shared look and the slide canvas; ``gap``, ``curves`` and ``checks`` build
the views' figures. The names views and tests use are gathered here.
"""

from app.charts.base import (
    BEYOND_NAME,
    BLUE,
    EXPORT_FORMATS,
    EXPORT_SCALE,
    SLIDE_SIZES,
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
from app.charts.checks import (
    boxcox_figure,
    distribution_figure,
    profile_histogram_figure,
    qq_figure,
    residual_histogram,
    residuals_figure,
    scale_location_figure,
)
from app.charts.curves import NAIVE_NAME, SMEARING_NAME, curve_figure
from app.charts.gap import curve_summary, gap_figure, safe_range, tolerance_regions, units_figure

__all__ = [
    "BEYOND_NAME", "BLUE", "EXPORT_FORMATS", "EXPORT_SCALE", "NAIVE_NAME", "SLIDE_SIZES", "SMEARING_NAME", "TYPE",
    "boxcox_figure", "caption_text", "curve_figure", "curve_summary", "distribution_figure", "export_config",
    "file_stem", "for_slide", "gap_figure", "legend_rows", "point_count", "profile_histogram_figure", "qq_figure",
    "residual_histogram", "residuals_figure", "safe_range", "scale_location_figure", "size_label", "style",
    "tolerance_regions", "units_figure", "wrap",
]  # fmt: skip
