"""Display tables (``core.output.display``) styled for the screen: numbers right-aligned on one
line, flagged rows tinted, user text shown literally (no streamlit import)."""

from __future__ import annotations

import pandas as pd
from pandas.io.formats.style import Styler

from core.output.display import NUMBER_COLUMNS
from core.output.escape import plain

HIGHLIGHT = "background-color: #FFF4D6"


def literal(table: pd.DataFrame) -> pd.DataFrame:
    """The table with every text cell and header escaped for Markdown: ``st.table`` renders
    both as Markdown, and they hold column names, category levels and model names."""
    out = table.rename(columns=lambda c: plain(c) if isinstance(c, str) else c)
    return out.map(lambda v: plain(v) if isinstance(v, str) else v)


def styled(table: pd.DataFrame, highlight_rows: list[int] | None = None, numbers_in: list[str] | None = None) -> Styler:
    """Numbers right-aligned on one line (so columns line up and never break mid-number);
    the listed rows tinted, e.g. extrapolated effects. ``numbers_in`` names further number
    columns whose names are not fixed (a model's name, an effect's change). Text is shown
    literally (see ``literal``)."""
    extra = set(numbers_in or [])
    numbers = [plain(c) for c in table.columns if c in NUMBER_COLUMNS or c in extra]
    # !important: Streamlit writes text-align: left into each text cell's own style, which an
    # ordinary rule cannot override, and number columns hold formatted text.
    right = {"text-align": "right !important", "white-space": "nowrap !important"}
    style = literal(table).style.set_properties(subset=numbers, **right)
    headings = [i for i, c in enumerate(table.columns) if plain(c) in numbers]
    style = style.set_table_styles(
        [{"selector": f"th.col_heading.col{i}", "props": "text-align: right !important"} for i in headings], overwrite=False
    )
    rows = set(highlight_rows or [])
    if rows:
        style = style.apply(lambda row: [HIGHLIGHT if row.name in rows else ""] * len(row), axis=1)
    return style
