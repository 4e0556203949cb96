"""The fast paths of core.model.design give the same levels, references and design as the plain rules:
a level's name is str() of the cell, levels in numeric-then-text order, the default reference is
the most frequent level (ties: the one seen first in the rows used), the reference point's
category is the mode (ties: the first name in sorted order)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from core.model.design import build_design
from core.model.spec import parse_spec


def _design(column: pd.Series, x: np.ndarray | None = None):
    n = len(column)
    rng = np.random.default_rng(7)
    frame = pd.DataFrame({"y": rng.lognormal(size=n), "x": rng.normal(size=n) if x is None else x, "c": column})
    spec = {
        "outcome": {"column": "y", "transform": "log"},
        "regressors": [{"column": "x", "transform": "level"}, {"column": "c", "transform": "category"}],
    }
    return frame, build_design(frame, parse_spec(spec, frame))


def _plain_labels(column: pd.Series, rows: np.ndarray) -> np.ndarray:
    return np.asarray(column.astype(object), dtype=object)[rows].astype(str)


@pytest.mark.parametrize(
    "column",
    [
        pd.Series(np.array([1, 1.0, True, "1", "a", 2] * 20, dtype=object)),  # equal values that print differently
        pd.Series([0.0, -0.0, 1.5, 2.0] * 30),  # signed zeros
        pd.Series([3, 1, 2, 10, 3, 3] * 20),
        pd.Series(pd.Categorical(["b", "a", "c", "b"] * 30)),
        pd.Series(["b", "a", None, "c"] * 30, dtype="str"),
        pd.Series(np.array(["b", "a", None, "c", "b"] * 24, dtype=object)),
        pd.Series([True, False, True] * 40),
        pd.Series([1.0, 2.5, np.nan] * 40),
        pd.Series(["é", "e", "Z", "ä", "e"] * 24, dtype=object),
    ],
)
def test_levels_names_and_dummies_follow_the_plain_rules(column: pd.Series) -> None:
    _, design = _design(column)
    block = design.encoder.blocks[1]
    labels = _plain_labels(column, design.rows)
    names, counts = np.unique(labels, return_counts=True)
    assert sorted([block.reference_level, *block.levels]) == sorted(names.tolist())
    assert design.values["c"].tolist() == labels.tolist()
    assert design.reference["c"] == str(names[np.argmax(counts)])
    for j, level in enumerate(block.levels):
        np.testing.assert_array_equal(design.X[:, block.start + j], (labels == level).astype(float))
    assert design.X.flags.f_contiguous


def test_default_reference_ties_go_to_the_level_seen_first_in_the_rows_used() -> None:
    column = pd.Series(np.array(["A", "B"] * 50, dtype=object))
    x = np.random.default_rng(1).normal(size=100)
    x[[0, 3]] = np.nan  # drops the first "A" and one "B": 49 each, "B" now seen first
    _, design = _design(column, x)
    block = design.encoder.blocks[1]
    assert block.reference_level == "B"
    assert design.reference["c"] == "A"  # the mode breaks ties in sorted order


def test_design_arrays_are_read_only_and_the_frame_is_never_written() -> None:
    # A design takes a column with no row dropped as it is (a million-row copy per column was a
    # fifth of a refit), so nothing may write through it into the user's table.
    column = pd.Series(["a", "b", "c"] * 40)
    frame, design = _design(column)
    before = frame.copy()
    for values in (design.values["x"], design.y_raw, design.y, design.X):
        if np.shares_memory(values, frame["x"].to_numpy()) or np.shares_memory(values, frame["y"].to_numpy()):
            assert not values.flags.writeable
            with pytest.raises(ValueError, match="read-only"):
                values[0] = 0.0
    assert np.shares_memory(design.values["x"], frame["x"].to_numpy())  # the fast path is taken
    pd.testing.assert_frame_equal(frame, before)
