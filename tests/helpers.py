"""Small helpers shared by the test modules (importable as tests.helpers)."""

from __future__ import annotations


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
