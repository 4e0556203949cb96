"""The column cache of the edit loop: a refit through it gives the same result as a fit
without it, whatever was toggled before (identity, checked by property test on invented data)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import core
from core.errors import DataError


def invented_table(n: int = 300, seed: int = 5) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    price = rng.uniform(1, 9, n)
    spend = np.where(rng.random(n) < 0.3, 0.0, rng.lognormal(3, 1, n))
    age = rng.uniform(0, 12, n)
    region = rng.choice(["north", "south", "east"], n)
    revenue = np.exp(5 - 0.6 * np.log(price) + 0.05 * np.arcsinh(spend) + 0.02 * age + rng.normal(0, 0.3, n))
    revenue[:4] = 0.0  # a log outcome drops these rows
    frame = pd.DataFrame({"revenue": revenue, "price": price, "spend": spend, "age": age, "region": region})
    frame.loc[7, "age"] = np.nan  # a missing cell
    return frame


OUTCOME_TRANSFORMS = ["level", "log", "ihs", "sqrt", "shifted_log:1"]
TRANSFORMS = {
    "price": ["level", "log", "sqrt", "quadratic", "ihs"],
    "spend": ["level", "ihs", "shifted_log:1", "sqrt", "log"],
    "age": ["level", "quadratic", "sqrt", "shifted_log:0.5"],
}


def spec_of(outcome: str, picks: dict[str, str], with_region: bool) -> dict:
    regressors = [{"column": c, "transform": t} for c, t in picks.items()]
    if with_region:
        regressors.append({"column": "region", "transform": "category"})
    return {"outcome": {"column": "revenue", "transform": outcome}, "regressors": regressors, "covariance": "HC1"}


specs = st.builds(
    spec_of,
    st.sampled_from(OUTCOME_TRANSFORMS),
    st.fixed_dictionaries({c: st.sampled_from(ts) for c, ts in TRANSFORMS.items()}),
    st.booleans(),
)

TABLE = invented_table()
PARTS = {"terms", "fit", "effects", "diagnostics"}


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(specs, min_size=2, max_size=6))
def test_refits_through_the_cache_equal_fits_without_it(sequence: list[dict]) -> None:
    """Property: whatever sequence of transform choices came before, a fit through the shared
    cache is identical (same floats) to a fit on its own."""
    cache = core.ColumnCache()
    for spec in sequence:
        try:
            alone = core.analyze(TABLE, spec, PARTS)
        except DataError as error:
            with pytest.raises(DataError, match=str(error)[:40].replace("(", r"\(").replace(")", r"\)")):
                core.analyze(TABLE, spec, PARTS, columns=cache)
            continue
        assert core.analyze(TABLE, spec, PARTS, columns=cache) == alone


def test_a_toggle_computes_only_the_toggled_column() -> None:
    cache = core.ColumnCache()
    first = spec_of("log", {"price": "log", "spend": "ihs", "age": "level"}, True)
    core.analyze(TABLE, first, PARTS, columns=cache)
    misses = cache.misses
    core.analyze(TABLE, first, PARTS, columns=cache)
    assert cache.misses == misses  # the same spec again: everything from the cache
    toggled = spec_of("log", {"price": "level", "spend": "ihs", "age": "level"}, True)
    core.analyze(TABLE, toggled, PARTS, columns=cache)
    # price in levels: its design column only (its range lies inside the domain, so no row is checked)
    assert cache.misses == misses + 1


def test_another_table_with_the_same_columns_is_never_served_stale_columns() -> None:
    cache = core.ColumnCache()
    spec = spec_of("log", {"price": "log", "spend": "ihs", "age": "level"}, True)
    core.analyze(TABLE, spec, PARTS, columns=cache)
    other = invented_table(seed=9)
    assert core.analyze(other, spec, PARTS, columns=cache) == core.analyze(other, spec, PARTS)


def test_cached_columns_are_read_only_and_the_memory_is_bounded() -> None:
    cache = core.ColumnCache(max_bytes=10_000)  # 300 rows x 8 bytes = 2,400 bytes a column
    for spec in (
        spec_of("log", {"price": "log", "spend": "ihs", "age": "level"}, True),
        spec_of("level", {"price": "quadratic", "spend": "sqrt", "age": "sqrt"}, False),
    ):
        assert core.analyze(TABLE, spec, PARTS, columns=cache) == core.analyze(TABLE, spec, PARTS)
    assert 0 < cache._bytes <= 10_000
    for value, _ in cache._entries.values():
        arrays = [value] if isinstance(value, np.ndarray) else [v for v in value if isinstance(v, np.ndarray)]
        for array in arrays:
            with pytest.raises(ValueError):
                array[...] = 0


def test_a_column_that_cannot_be_read_is_reported_each_time_and_not_cached() -> None:
    frame = TABLE.assign(price=TABLE["price"].astype(object))
    frame.loc[3, "price"] = "n/a?"
    cache = core.ColumnCache()
    spec = spec_of("log", {"price": "log", "spend": "ihs", "age": "level"}, False)
    for _ in range(2):
        with pytest.raises(DataError, match="price"):
            core.analyze(frame, spec, PARTS, columns=cache)
    assert ("numbers", "price") not in cache._entries
