"""Small helpers shared by the test modules (importable as tests.helpers)."""

from __future__ import annotations

import re

import pandas as pd


def term(result: dict, name: str) -> dict:
    """The row of result['terms'] with the given name."""
    found = [t for t in result["terms"] if t["name"] == name]
    assert len(found) == 1, f"no single term named {name!r} in {[t['name'] for t in result['terms']]}"
    return found[0]


def effect(result: dict, column: str) -> dict:
    """The (single) row of result['effects'] for a column."""
    found = [e for e in result["effects"] if e["column"] == column]
    assert len(found) == 1, f"expected one effect for {column!r}, got {len(found)}"
    return found[0]


def rel_err(value: float, reference: float) -> float:
    """Relative error |value - reference| / |reference| (absolute when the reference is 0)."""
    scale = abs(reference) if reference != 0 else 1.0
    return abs(value - reference) / scale


_ESCAPED = re.compile(r"\\([!-/:-@\[-`{-~])")


def shown(text: str) -> str:
    """Markdown source as a reader sees it: backslash escapes and the invisible word joiners
    that ``app.plain`` adds are taken out (what the screen shows, not the source)."""
    return _ESCAPED.sub(r"\1", text).replace("\u2060", "")


def shown_table(table: pd.DataFrame) -> pd.DataFrame:
    """An ``st.table``'s data as the reader sees it (headers and text cells unescaped)."""
    out = table.rename(columns=lambda c: shown(c) if isinstance(c, str) else c)
    return out.map(lambda v: shown(v) if isinstance(v, str) else v)
