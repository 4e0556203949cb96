"""The Formwise look shared by every chart, on screen and in the report: palette, type scale,
slide canvases and the words charts use for the same things. Pure constants, so the app's
plotly figures and the report's matplotlib figures can both import them.

Colours are the Okabe-Ito palette (Okabe & Ito 2008, "Color Universal Design"), which stays
distinguishable under the common forms of colour-vision deficiency; line styles differ too,
so a chart also reads in greyscale.
"""

from __future__ import annotations

BLUE = "#0072B2"
ORANGE = "#E69F00"
SKY = "#56B4E9"
VERMILLION = "#D55E00"
PURPLE = "#CC79A7"
GREEN = "#009E73"
INK = "#1F2933"
GRID = "#E4E7EB"
SUBTLE = "#52606D"
GREY = "#7B8794"
SHADE = "#9AA5B1"
# Text drawn over a tinted band (the approximation's tolerance bands in the app).
BAND_TEXT = "#8A3B6B"

# Opacities of the fills, as the app draws them.
GAP_ALPHA = 0.28  # SKY between the exact effect and its approximation
BAND_ALPHA = 0.30  # SKY for a 95 % confidence band
BEYOND_ALPHA = 0.16  # SHADE over stretches beyond the observed data
TOLERANCE_ALPHA = 0.13  # PURPLE where the approximation is off by more than the tolerance

# Font families in order of preference; CSS takes the list as it is, matplotlib takes the
# first one installed (the report draws its text as outlines, so the reader needs none of them).
FONT_FAMILIES = ("Source Sans Pro", "Segoe UI", "Helvetica", "Arial", "Liberation Sans", "DejaVu Sans")
FONT = "Source Sans Pro, Segoe UI, Helvetica, Arial, sans-serif"

# Type sizes in CSS pixels of the chart's own canvas. A full-slide canvas is 1280 x 720 px,
# which at 96 px per inch is the 13.33 x 7.5 in of a 16:9 slide: a size here times 0.75 is the
# size in points on the slide (ticks 14 pt, title 19.5 pt). Keep every text at 16 px or more.
TYPE = {"base": 19, "title": 26, "subtitle": 18, "legend": 18, "note": 17, "caption": 16}
PX_PER_INCH = 96
PT_PER_PX = 0.75

# name: (words, width, height) of a chart's canvas in CSS pixels.
SLIDE_SIZES = {
    "full": ("Full slide, 16:9", 1280, 720),
    "half": ("Half slide, 8:9", 640, 720),
    "square": ("Square", 720, 720),
}

# Legend words charts share.
SMEARING_NAME = "Smearing (Duan) — expected value"
NAIVE_NAME = "Naive back-transform — closer to the median"
BEYOND_NAME = "Beyond the data: extrapolated"
