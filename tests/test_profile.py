"""Column profiles, kinds and the transform advisor; the ``profile`` command line.

The advisor's expectations are rules of thumb (common practice, no source); the demo data is
invented (demo_data/make_demo.py documents how each column was generated).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from core.intake.profile import KINDS, profile_table, suggest_transform
from core.intake.reader import read_table_with_notes

ROOT = Path(__file__).resolve().parent.parent
DEMO_CSV = ROOT / "demo_data" / "kiosks.csv"
CORPUS = Path(__file__).resolve().parent / "corpus"
ENTRY_KEYS = {
    "column",
    "kind",
    "n_missing",
    "n_zero",
    "n_negative",
    "min",
    "median",
    "max",
    "skewness",
    "suggested_transform",
    "reasons",
    "histogram",
    "log_would_drop",
    "skewness_log",
    "skewness_ihs",
}


@pytest.fixture(scope="module")
def demo_profile() -> dict:
    frame, notes = read_table_with_notes(DEMO_CSV)
    return profile_table(frame, notes)


def entry(profile: dict, column: str) -> dict:
    found = [c for c in profile["columns"] if c["column"] == column]
    assert len(found) == 1
    return found[0]


def one(values: list | np.ndarray | pd.Series, name: str = "x") -> dict:
    """The profile entry of a single-column frame."""
    return profile_table(pd.DataFrame({name: values}), [])["columns"][0]


# --- the demo -----------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("column", "kind", "allowed"),
    [
        ("weekly_revenue", "money", {"log"}),
        ("drink_price", "money", {"log"}),
        ("foot_traffic", "count", {"log"}),
        ("ad_spend", "money", {"ihs", "level"}),
        ("years_open", "duration_years", {"level"}),
        ("app_order_share", "share", {"level"}),
        ("promo", "binary", {"level"}),
        ("region", "category", {"category"}),
        ("kiosk_id", "identifier", {None}),
        ("week", "count", {"level"}),
    ],
)
def test_demo_advice(demo_profile: dict, column: str, kind: str, allowed: set) -> None:
    e = entry(demo_profile, column)
    assert e["kind"] == kind
    assert e["suggested_transform"] in allowed
    assert e["reasons"] and all(isinstance(r, str) and r for r in e["reasons"])


def test_demo_reasons_say_why(demo_profile: dict) -> None:
    revenue = entry(demo_profile, "weekly_revenue")
    assert "positive money amounts" in revenue["reasons"][0] and "after log" in revenue["reasons"][0]
    assert revenue["skewness"] > 1.5 and abs(revenue["skewness_log"]) < 0.5  # log tames the skew
    ads = entry(demo_profile, "ad_spend")
    assert ads["log_would_drop"] == ads["n_zero"] > 0
    assert any(f"would drop {ads['log_would_drop']:,} rows" in r for r in ads["reasons"])
    assert any("time index" in r for r in entry(demo_profile, "week")["reasons"])
    assert any("cluster" in r for r in entry(demo_profile, "kiosk_id")["reasons"])


def test_demo_profile_shape_and_strict_json(demo_profile: dict) -> None:
    assert demo_profile["intake"] == ["read 'kiosks.csv' as comma-separated text, UTF-8 encoding."]
    assert len(demo_profile["columns"]) == 11
    for e in demo_profile["columns"]:
        assert ENTRY_KEYS <= set(e)
        assert e["kind"] in KINDS
        if e["histogram"] is not None:
            assert len(e["histogram"]["counts"]) == 20 and len(e["histogram"]["edges"]) == 21
            assert sum(e["histogram"]["counts"]) == e["n"] - e["n_missing"] - e["n_infinite"]
    json.dumps(demo_profile, allow_nan=False)
    revenue = entry(demo_profile, "weekly_revenue")
    assert revenue["boxcox"]["ci_low"] < revenue["boxcox"]["lambda"] < revenue["boxcox"]["ci_high"]


def test_skewness_matches_scipy(demo_profile: dict) -> None:
    from scipy import stats  # general-purpose reference library (docs/contract.md §3.13)

    values = pd.read_csv(DEMO_CSV)["foot_traffic"].to_numpy(dtype=float)
    e = entry(demo_profile, "foot_traffic")
    assert e["skewness"] == pytest.approx(stats.skew(values, bias=False), rel=1e-10)
    assert e["skewness_log"] == pytest.approx(stats.skew(np.log(values), bias=False), rel=1e-10)
    assert e["skewness_ihs"] == pytest.approx(stats.skew(np.arcsinh(values), bias=False), rel=1e-10)
    assert e["median"] == float(np.median(values))


# --- each kind on a small frame -------------------------------------------------------------------
RNG = np.random.default_rng(11)
SKEWED = np.round(RNG.lognormal(3.0, 1.0, 200), 2)


def test_money_by_name_is_logged_when_positive() -> None:
    e = one(SKEWED, "unit_price")
    assert (e["kind"], e["suggested_transform"]) == ("money", "log")
    assert "right-skewed" in e["reasons"][0]


def test_money_by_removed_currency_symbol() -> None:
    frame, notes = read_table_with_notes(CORPUS / "currency_dollar.csv")
    e = entry(profile_table(frame, notes), "fee")
    assert e["kind"] == "money" and "currency_symbols" in e["flags"]
    assert e["suggested_transform"] == "level"  # it holds a negative amount: never log


def test_money_with_zeros_gets_ihs_and_counts_the_rows_a_log_drops() -> None:
    values = np.where(np.arange(200) % 3 == 0, 0.0, SKEWED)
    e = one(values, "ad_spend")
    assert e["suggested_transform"] == "ihs"
    assert e["log_would_drop"] == e["n_zero"] == 67
    assert any("would drop 67 rows" in r for r in e["reasons"])
    assert any("units" in r for r in e["reasons"])


def test_money_with_negatives_stays_in_levels() -> None:
    e = one(SKEWED - 20.0, "profit")
    assert e["kind"] == "money" and e["suggested_transform"] == "level"
    assert e["n_negative"] > 0 and e["log_would_drop"] >= e["n_negative"]


def test_large_counts_are_logged_small_counts_are_not() -> None:
    large = one(np.round(SKEWED * 100).astype(int) + 1, "visitors")
    assert (large["kind"], large["suggested_transform"]) == ("count", "log")
    small = one(RNG.poisson(1.2, 200), "complaints")
    assert (small["kind"], small["suggested_transform"]) == ("count", "level")
    assert any("PPML" in r for r in small["reasons"])


def test_durations_in_years() -> None:
    e = one(RNG.integers(18, 66, 100), "age")
    assert (e["kind"], e["suggested_transform"]) == ("duration_years", "level")
    e = one(np.round(RNG.uniform(0, 30, 100), 1), "tenure_years")
    assert e["kind"] == "duration_years"


def test_shares_and_percentages() -> None:
    share = one(np.round(RNG.beta(2, 5, 100), 3), "x")
    assert (share["kind"], share["suggested_transform"]) == ("share", "level")
    named = one(np.round(RNG.uniform(0, 60, 100), 1), "growth_pct")
    assert (named["kind"], named["suggested_transform"]) == ("percent", "level")
    frame, notes = read_table_with_notes(CORPUS / "percent.csv")
    assert entry(profile_table(frame, notes), "margin")["kind"] == "percent"
    skewed = one(np.round(np.clip(RNG.lognormal(-5, 1.2, 300), 1e-4, 1), 5), "default_rate")
    assert skewed["kind"] == "share" and skewed["suggested_transform"] == "log"  # strongly skewed shares leave levels


def test_binary_category_and_numeric_codes() -> None:
    assert one([0, 1, 1, 0, 1], "treated")["suggested_transform"] == "level"
    assert one([0, 1, 1, 0, 1], "treated")["kind"] == "binary"
    assert one([True, False, True, True], "flag")["kind"] == "binary"
    region = one(["North", "South", "South", "East", "North", "East"] * 5, "region")
    assert (region["kind"], region["suggested_transform"]) == ("category", "category")
    assert "3 levels" in region["reasons"][0]
    codes = one([1, 2, 2, 1, 2, 1], "sex")
    assert (codes["kind"], codes["suggested_transform"]) == ("category", "category")


def test_continuous() -> None:
    e = one(RNG.normal(0, 1, 100), "z")
    assert (e["kind"], e["suggested_transform"]) == ("continuous", "level")
    e = one(SKEWED, "area")
    assert (e["kind"], e["suggested_transform"]) == ("continuous", "log")


def test_identifiers_are_not_used() -> None:
    assert one(list(range(1, 51)), "customer_id")["kind"] == "identifier"
    names = one([f"person {i}" for i in range(30)], "name")
    assert (names["kind"], names["suggested_transform"]) == ("identifier", None)
    assert one(list(range(40)), "column_1")["kind"] == "identifier"  # a saved row index


def test_dates_are_recognised_and_not_used() -> None:
    frame, notes = read_table_with_notes(CORPUS / "dates.csv")
    profile = profile_table(frame, notes)
    for column, flag in (("iso", "date_iso"), ("dmy", "date_day_first"), ("mdy", "date_month_first")):
        e = entry(profile, column)
        assert (e["kind"], e["suggested_transform"]) == ("date", None)
        assert flag in e["flags"] and (e["first"], e["last"]) == ("2024-01-31", "2024-03-15")
    stamps = entry(profile_table(read_table_with_notes(CORPUS / "two_sheets.xlsx")[0]), "opened")
    assert stamps["kind"] == "date" and stamps["first"] == "2018-11-30"


def test_text_mixed_and_free() -> None:
    frame, notes = read_table_with_notes(CORPUS / "mixed.csv")
    e = entry(profile_table(frame, notes), "x")
    assert (e["kind"], e["suggested_transform"]) == ("text", None)
    assert "rows 4, 9" in e["reasons"][0]
    free = one([f"comment {i % 70}" for i in range(200)], "remarks")
    assert (free["kind"], free["suggested_transform"]) == ("text", None)


def test_calendar_years_and_constants() -> None:
    years = one(list(range(2001, 2021)) * 3, "year")
    assert years["suggested_transform"] == "level" and "calendar_year" in years["flags"]
    constant = one([5.0] * 10, "fixed")
    assert constant["suggested_transform"] is None and "same value" in constant["reasons"][0]


def test_missing_and_infinite_values_are_counted_and_json_stays_strict() -> None:
    frame, notes = read_table_with_notes(CORPUS / "infinities.csv")
    profile = profile_table(frame, notes)
    e = entry(profile, "y")
    assert e["n_infinite"] == 3 and (e["min"], e["max"]) == (2.0, 5.5)
    json.dumps(profile, allow_nan=False)
    frame, notes = read_table_with_notes(CORPUS / "missing_markers.csv")
    e = entry(profile_table(frame, notes), "x")
    assert e["n_missing"] == 11 and any("11 missing values" in r for r in e["reasons"])


def test_notes_default_to_those_stored_by_the_reader() -> None:
    frame, notes = read_table_with_notes(CORPUS / "currency_dollar.csv")
    assert profile_table(frame)["intake"] == notes


def test_suggest_transform_works_on_an_entry_alone() -> None:
    e = one(SKEWED, "revenue")
    assert suggest_transform(e) == (e["suggested_transform"], e["reasons"])


@settings(max_examples=100, deadline=None, database=None)
@given(
    st.lists(st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-5, 5).map(float)), min_size=1, max_size=40),
    st.sampled_from(["price", "visits", "share", "age", "x", "id", "week"]),
)
def test_never_log_with_zeros_or_negatives(values: list[float], name: str) -> None:
    profile = profile_table(pd.DataFrame({name: values}), [])
    json.dumps(profile, allow_nan=False)
    e = profile["columns"][0]
    assert e["kind"] in KINDS
    if e["suggested_transform"] == "log":
        assert e["log_would_drop"] == 0 and e["min"] > 0


# --- command line -------------------------------------------------------------------------------
def run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "core", *args], cwd=ROOT, capture_output=True, text=True, timeout=120)


def test_profile_command_prints_the_profile() -> None:
    done = run("profile", "demo_data/kiosks.csv")
    assert done.returncode == 0, done.stderr
    printed = json.loads(done.stdout)
    assert set(printed) >= {"intake", "columns"}
    assert entry(printed, "drink_price")["suggested_transform"] == "log"
    sheet = run("profile", "tests/corpus/two_sheets.xlsx", "--sheet", "Costs")
    assert sheet.returncode == 0 and [c["column"] for c in json.loads(sheet.stdout)["columns"]] == ["item", "cost", "share"]


@pytest.mark.parametrize(
    ("args", "needle"),
    [
        (("profile", "tests/corpus/garbage.csv"), "binary"),
        (("profile", "tests/corpus/single_row.csv"), "at least a few rows"),
        (("profile", "tests/corpus/two_sheets.xlsx", "--sheet", "Nope"), "no sheet 'Nope'"),
        (("profile", "nowhere.csv"), "file not found"),
        (("profile",), "required"),
    ],
)
def test_profile_command_errors_are_one_line(args: tuple[str, ...], needle: str) -> None:
    done = run(*args)
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and needle in lines[0]
    assert "Traceback" not in done.stderr


def test_profile_without_boxcox_differs_only_there(demo_profile: dict) -> None:
    frame, notes = read_table_with_notes(DEMO_CSV)
    quick = profile_table(frame, notes, boxcox=False)
    assert all(e["boxcox"] is None for e in quick["columns"])
    for full, fast in zip(demo_profile["columns"], quick["columns"], strict=True):
        assert {k: v for k, v in full.items() if k != "boxcox"} == {k: v for k, v in fast.items() if k != "boxcox"}


def test_column_boxcox_is_scipys(demo_profile: dict) -> None:
    from scipy import stats  # general-purpose reference library (docs/contract.md §3.13)

    values = pd.read_csv(DEMO_CSV)["weekly_revenue"].to_numpy(dtype=float)
    _, lam, (low, high) = stats.boxcox(values, alpha=0.05)
    found = entry(demo_profile, "weekly_revenue")["boxcox"]
    # The profile divides by the geometric mean first (λ̂ is scale-free); the rest is rounding.
    assert found["lambda"] == pytest.approx(lam, abs=1e-6)
    assert (found["ci_low"], found["ci_high"]) == pytest.approx((low, high), abs=1e-6)


@settings(max_examples=300, deadline=None)
@given(
    st.lists(
        st.one_of(st.integers(-5, 5).map(float), st.floats(-1e300, 1e300, allow_nan=False, allow_infinity=False)),
        min_size=1,
        max_size=200,
    )
)
def test_histogram_from_the_sorted_values_is_numpys(values: list[float]) -> None:
    # numpy.histogram is the reference: its edges, and its counts (values on an inner edge go to
    # the bin on their right, the maximum to the last bin).
    from core.intake.profile import HISTOGRAM_BINS, _histogram

    x = np.array(values)
    got = _histogram(np.sort(x))
    try:
        with np.errstate(all="ignore"):
            counts, edges = np.histogram(x, bins=HISTOGRAM_BINS)
    except ValueError:  # a range too narrow for 20 finite bins at the values' size
        assert got is None
        return
    if not np.isfinite(edges).all():
        assert got is None
    else:
        assert got == {"edges": [float(e) for e in edges], "counts": [int(c) for c in counts]}


@settings(max_examples=120, deadline=None)
@given(
    st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=3, max_size=400),
    st.sampled_from([1e-300, 1e-3, 1.0, 1e200]),
)
def test_skewness_is_scipys_on_any_scale_and_none_without_finite_values(values: list[float], scale: float) -> None:
    # scipy.stats.skew(bias=False) as reference library; skewness is scale-free, so the same
    # answer on every scale (common practice, no source). Near-constant data give None.
    from scipy import stats

    from core.inference.shape import skewness

    x = np.asarray(values) * scale
    found = skewness(x)
    top = float(np.max(np.abs(x)))
    # Compared where the scaled values keep a clear spread (1e-300 can underflow small ones).
    if top > 0 and np.std(x / top) > 1e-6 and np.allclose(x / scale, values, rtol=1e-12, atol=0):
        assert found == pytest.approx(float(stats.skew(np.asarray(values), bias=False)), rel=1e-7, abs=1e-9)
    for bad in (np.nan, np.inf, -np.inf):
        assert skewness(np.append(x, bad)) is None
