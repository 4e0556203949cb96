"""The variables grid's column settings: headers, widths, menus and help, in one place."""

from __future__ import annotations

from typing import Any

import streamlit as st

from app.gridspec import ROLES
from core.model.transforms import menu_word


def grid_column_config(options: list[str], names: list[str]) -> dict[str, Any]:
    """The data editor's column configuration; ``options`` are the transforms offered and
    ``names`` the table's columns (the moderators a regressor may vary by). The widths add up
    to a 1280 px screen's main column."""
    return {
        "column": st.column_config.TextColumn("Column", width=117, pinned=True),
        "about": st.column_config.TextColumn("What it holds", width=132),
        "role": st.column_config.SelectboxColumn(
            "Role",
            options=ROLES,
            required=True,
            width=95,
            help="Exactly one outcome; any number of regressors. 'absorb' gives every level of an identifier "
            "(store, firm, week) its own fixed effect, swept out rather than shown.",
        ),
        "transform": st.column_config.SelectboxColumn(
            "Transform",
            options=options,
            required=True,
            width=125,
            format_func=lambda t: menu_word(t),
            help="The outcome takes level, log, IHS, log(x + 1) or square root.",
        ),
        "change": st.column_config.TextColumn("Change", width=80, help="+10%, -25%, +1, 0->1 or Coast->Inland"),
        "by": st.column_config.SelectboxColumn(
            "Varies by",
            options=["", *names],
            width=95,
            help="Another regressor the effect of this one may depend on: the model adds their products, and "
            "the effect is given for each level of a category (or at the quartiles of a number).",
        ),
        "reference": st.column_config.TextColumn(
            "Reference", width=88, help="For categories: the reference level, the one the others are compared with."
        ),
        "unit": st.column_config.TextColumn(
            "Unit",
            width=85,
            help="What one unit of the column is. A noun in the singular (square foot, year) reads 'one more "
            "square foot'; a symbol or rate (kg, °C, $ per week) reads '+1 kg'. Readings, axes and tables name it.",
        ),
    }
