"""Undo and redo of model edits: a bounded history of the variables grid.

Every accepted change of the grid (a cell edited, suggestions applied, a second outcome
resolved) pushes the grid it replaced; Undo brings it back and keeps the undone grid for Redo.
A new edit after an undo clears what could be redone, as text editors do.
"""

from __future__ import annotations

from collections.abc import Callable

import pandas as pd
import streamlit as st

from app import keys

LIMIT = 50


def record(before: pd.DataFrame, after: pd.DataFrame) -> None:
    """Remember ``before`` when the grid changed to ``after``."""
    if before is None or before.equals(after):
        return
    ss = st.session_state
    history = ss.setdefault(keys.UNDO, [])
    history.append(before)
    del history[:-LIMIT]
    ss[keys.REDO] = []


def forget() -> None:
    """A new table starts with no history (its grid has other rows)."""
    st.session_state[keys.UNDO] = []
    st.session_state[keys.REDO] = []


def _step(source: str, target: str, show: Callable[[pd.DataFrame], None]) -> None:
    ss = st.session_state
    stack = ss.get(source) or []
    if not stack:
        return
    grid = stack.pop()
    ss.setdefault(target, []).append(ss[keys.PREVIOUS_GRID])
    show(grid)


def _button(label: str, source: str, target: str, shortcut: str, help_text: str, show: Callable[[pd.DataFrame], None]) -> None:
    st.button(
        label,
        key=f"{label.lower()}_edit",
        icon=f":material/{label.lower()}:",
        disabled=not st.session_state.get(source),
        on_click=_step,
        args=(source, target, show),
        shortcut=shortcut,
        help=help_text,
        width="stretch",
    )


def undo_button(show: Callable[[pd.DataFrame], None]) -> None:
    """Undo: the grid before the last change (Ctrl/Cmd+Z)."""
    _button("Undo", keys.UNDO, keys.REDO, "Mod+Z", "Take back the last change to the model (Ctrl/Cmd+Z).", show)


def redo_button(show: Callable[[pd.DataFrame], None]) -> None:
    """Redo: the change taken back (Ctrl/Cmd+Shift+Z)."""
    _button("Redo", keys.REDO, keys.UNDO, "Mod+Shift+Z", "Make the change taken back again (Ctrl/Cmd+Shift+Z).", show)
