"""Property tests (hypothesis) on invented data generated from a drawn seed.

Every expected value here is recomputed in the test from the model's own estimates, without
calling core's transforms or effect engine: the transforms, the smearing mean and the textbook
approximations are written out below.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import core
from tests.helpers import effect, rel_err, term

FAST_PARTS = {"terms", "fit", "effects"}
SETTINGS = settings(max_examples=50, deadline=None, database=None)
# The transform grid has 36 cells; each cell gets its own run so that every pair is covered.
GRID_SETTINGS = settings(max_examples=15, deadline=None, database=None)
seeds = st.integers(min_value=0, max_value=2**32 - 1)


def invented(seed: int, n: int = 80) -> pd.DataFrame:
    """Invented data: positive skewed x1, centred x2, positive outcome y with log-normal noise."""
    rng = np.random.default_rng(seed)
    x1 = rng.lognormal(mean=1.0, sigma=0.5, size=n)
    x2 = rng.normal(0.0, 1.0, size=n)
    index = 1.0 + 0.4 * np.log(x1) + 0.2 * x2 + rng.normal(0.0, 0.2, size=n)
    return pd.DataFrame({"y": 10.0 * np.exp(index), "x1": x1, "x2": x2})


# --- transforms written out independently of core.model.transforms --------------------------------
# Outcome transforms: forward g and the retransform g⁻¹ used for smearing (Duan 1983). For sqrt
# the retransform is z², for Box-Cox (1 + L·z)^(1/L) (common practice, no source).
OUTCOMES = {
    "level": (lambda y: y, lambda z: z),
    "log": (np.log, np.exp),
    "ihs": (np.arcsinh, np.sinh),
    "sqrt": (np.sqrt, np.square),
    "shifted_log:1": (lambda y: np.log(y + 1.0), lambda z: np.exp(z) - 1.0),
    "boxcox:0.5": (lambda y: (np.sqrt(y) - 1.0) / 0.5, lambda z: (1.0 + 0.5 * z) ** 2),
}
# Regressor transforms: the design columns each contributes.
REGRESSORS = {
    "level": lambda x: np.column_stack([x]),
    "log": lambda x: np.column_stack([np.log(x)]),
    "ihs": lambda x: np.column_stack([np.arcsinh(x)]),
    "shifted_log:1": lambda x: np.column_stack([np.log(x + 1.0)]),
    "sqrt": lambda x: np.column_stack([np.sqrt(x)]),
    "quadratic": lambda x: np.column_stack([x, x * x]),
}


def _spec(y_t: str, x_t: str, change: str, covariance: str = "HC1") -> dict:
    return {
        "outcome": {"column": "y", "transform": y_t},
        "regressors": [
            {"column": "x1", "transform": x_t, "change": change},
            {"column": "x2", "transform": "level", "change": "+1"},
        ],
        "covariance": covariance,
    }


def _design(data: pd.DataFrame, x_t: str, x1=None, x2=None) -> np.ndarray:
    x1 = data["x1"].to_numpy() if x1 is None else np.atleast_1d(np.asarray(x1, dtype=float))
    x2 = data["x2"].to_numpy() if x2 is None else np.atleast_1d(np.asarray(x2, dtype=float))
    x2 = np.broadcast_to(x2, x1.shape)
    return np.column_stack([np.ones_like(x1), REGRESSORS[x_t](x1), x2])


def _expected_exact(data: pd.DataFrame, result: dict, y_t: str, x_t: str, x1_from: float, x1_to: float) -> float:
    """The exact effect recomputed from the model's own estimates and residuals."""
    forward, inverse = OUTCOMES[y_t]
    b = np.array([t["estimate"] for t in result["terms"]])
    X = _design(data, x_t)
    assert X.shape[1] == len(b)
    resid = forward(data["y"].to_numpy()) - X @ b
    x2_bar = data["x2"].mean()
    eta0 = (_design(data, x_t, x1_from, x2_bar) @ b)[0]
    eta1 = (_design(data, x_t, x1_to, x2_bar) @ b)[0]
    if y_t == "level":
        return eta1 - eta0  # difference of predictions (docs/contract.md §3)
    if y_t == "log":
        return 100.0 * math.expm1(eta1 - eta0)  # docs/contract.md §3; Wooldridge 7th ed., §6.2
    smear0 = np.mean(inverse(eta0 + resid))  # Duan (1983) smearing estimate of E[y | x]
    smear1 = np.mean(inverse(eta1 + resid))
    return 100.0 * (smear1 / smear0 - 1.0)


def _close(value: float, expected: float, rel: float, abs_: float = 1e-12) -> bool:
    return abs(value - expected) <= rel * abs(expected) + abs_


@pytest.mark.parametrize("x_t", list(REGRESSORS))
@pytest.mark.parametrize("y_t", list(OUTCOMES))
@GRID_SETTINGS
@given(seed=seeds, percent=st.sampled_from([-30, -10, 10, 25, 50, 100]))
def test_exact_effect_is_the_models_own_prediction_change(y_t, x_t, seed, percent):
    data = invented(seed)
    change = f"{percent:+d}%"
    result = core.analyze(data, _spec(y_t, x_t, change), parts=FAST_PARTS)

    # the estimates are the least-squares solution on the transformed outcome and design
    forward, _ = OUTCOMES[y_t]
    b_ls, *_ = np.linalg.lstsq(_design(data, x_t), forward(data["y"].to_numpy()), rcond=None)
    b = np.array([t["estimate"] for t in result["terms"]])
    np.testing.assert_allclose(b, b_ls, rtol=1e-8, atol=1e-10)

    row = effect(result, "x1")
    x_bar = data["x1"].mean()  # docs/contract.md §2: reference point defaults to the sample mean
    assert _close(row["reference"]["x1"], x_bar, 1e-12)
    assert row["units"] == ("outcome" if y_t == "level" else "percent")
    expected = _expected_exact(data, result, y_t, x_t, x_bar, x_bar * (1.0 + percent / 100.0))
    assert _close(row["exact"], expected, 1e-8, 1e-10), (row["exact"], expected)
    assert row["ci_low"] <= row["exact"] <= row["ci_high"]

    # a tiny change: the first-order approximation meets the exact effect
    small = core.analyze(data, _spec(y_t, x_t, "+0.01%"), parts={"terms", "effects"})
    tiny = effect(small, "x1")
    assert abs(tiny["approximate"] / tiny["exact"] - 1.0) <= 1e-3
    assert tiny["ci_low"] <= tiny["exact"] <= tiny["ci_high"]


@SETTINGS
@given(seed=seeds, factor=st.floats(min_value=1e-3, max_value=1e3), covariance=st.sampled_from(["classical", "HC1", "HC3"]))
def test_rescaling_a_logged_regressor_moves_only_the_intercept(seed, factor, covariance):
    data = invented(seed)
    scaled = data.assign(x1=data["x1"] * factor)
    spec = _spec("log", "log", "+10%", covariance)
    base = core.analyze(data, spec, parts=FAST_PARTS)
    moved = core.analyze(scaled, spec, parts=FAST_PARTS)
    b = term(base, "log(x1)")["estimate"]
    for name in ("log(x1)", "x2"):
        assert rel_err(term(moved, name)["estimate"], term(base, name)["estimate"]) <= 1e-9
        assert rel_err(term(moved, name)["std_error"], term(base, name)["std_error"]) <= 1e-9
    # ln(c·x) = ln c + ln x, so the intercept absorbs −b·ln c (common practice, no source)
    expected = term(base, "intercept")["estimate"] - b * math.log(factor)
    assert abs(term(moved, "intercept")["estimate"] - expected) <= 1e-9 * (1.0 + abs(expected))
    assert rel_err(effect(moved, "x1")["exact"], effect(base, "x1")["exact"]) <= 1e-9
    assert rel_err(moved["fit"]["r2"], base["fit"]["r2"]) <= 1e-9


@SETTINGS
@given(seed=seeds)
def test_ihs_effect_approaches_log_effect_for_large_values(seed):
    """asinh(x) = ln(2x) + O(x⁻²): far from zero an IHS slope reads like a log slope
    (Burbidge, Magee & Robb 1988; Bellemare & Wichman 2020)."""
    data = invented(seed)
    log_effect = effect(core.analyze(data, _spec("log", "log", "+10%"), parts=FAST_PARTS), "x1")["exact"]
    near = effect(core.analyze(data, _spec("log", "ihs", "+10%"), parts=FAST_PARTS), "x1")["exact"]
    large = data.assign(x1=data["x1"] * 1e4)
    far = effect(core.analyze(large, _spec("log", "ihs", "+10%"), parts=FAST_PARTS), "x1")["exact"]
    assert rel_err(far, log_effect) <= 1e-6
    assert abs(far - log_effect) < abs(near - log_effect)


# Wooldridge, Introductory Econometrics, 7th ed., Table 2.3 (functional forms with logarithms;
# table number recalled from memory):
#   level-level Δy = b·Δx; log-level %Δy = 100·b·Δx; level-log Δy = (b/100)·%Δx; log-log %Δy = b·%Δx.
TEXTBOOK = {
    ("level", "level"): lambda b, amount: b * amount,
    ("log", "level"): lambda b, amount: 100.0 * b * amount,
    ("level", "log"): lambda b, pct: b / 100.0 * pct,
    ("log", "log"): lambda b, pct: b * pct,
}


@pytest.mark.parametrize("pair", list(TEXTBOOK), ids=lambda p: f"{p[0]}-{p[1]}")
@SETTINGS
@given(seed=seeds, size=st.sampled_from([0.5, 1, 2, 10, 25, 50]), sign=st.sampled_from([1, -1]))
def test_approximate_is_the_textbook_formula(pair, seed, size, sign):
    y_t, x_t = pair
    data = invented(seed)
    amount = sign * size
    change = f"{amount:+g}%" if x_t == "log" else f"{amount:+g}"
    result = core.analyze(data, _spec(y_t, x_t, change), parts=FAST_PARTS)
    b = term(result, "x1" if x_t == "level" else "log(x1)")["estimate"]
    expected = TEXTBOOK[pair](b, amount)
    assert _close(effect(result, "x1")["approximate"], expected, 1e-10)
    # the level regressor x2 with "+1": b or 100·b
    b2 = term(result, "x2")["estimate"]
    assert _close(effect(result, "x2")["approximate"], b2 if y_t == "level" else 100.0 * b2, 1e-10)


@SETTINGS
@given(
    seed=seeds,
    shift=st.floats(min_value=-1e3, max_value=1e3, allow_nan=False).filter(lambda v: abs(v) > 1e-6),
    x_t=st.sampled_from(list(REGRESSORS)),
    covariance=st.sampled_from(["classical", "HC0", "HC2"]),
)
def test_adding_a_constant_to_a_level_outcome_moves_only_the_intercept(seed, shift, x_t, covariance):
    data = invented(seed)
    spec = _spec("level", x_t, "+10%", covariance)
    base = core.analyze(data, spec, parts=FAST_PARTS)
    moved = core.analyze(data.assign(y=data["y"] + shift), spec, parts=FAST_PARTS)
    scale = float(data["y"].abs().max()) + abs(shift)
    for before, after in zip(base["terms"], moved["terms"], strict=True):
        assert before["name"] == after["name"]
        expected = before["estimate"] + (shift if before["name"] == "intercept" else 0.0)
        assert abs(after["estimate"] - expected) <= 1e-9 * scale
        assert abs(after["std_error"] - before["std_error"]) <= 1e-9 * scale
    assert abs(moved["fit"]["r2"] - base["fit"]["r2"]) <= 1e-9
    assert rel_err(moved["fit"]["sigma"], base["fit"]["sigma"]) <= 1e-9
    for column in ("x1", "x2"):
        assert abs(effect(moved, column)["exact"] - effect(base, column)["exact"]) <= 1e-9 * scale


@pytest.mark.parametrize("y_t", list(OUTCOMES))
@GRID_SETTINGS
@given(seed=seeds)
def test_category_switch_is_the_models_own_prediction_change(y_t, seed):
    """The seventh regressor transform, category, under every outcome transform: the exact effect
    of moving from one level to another equals the change of the model's own predictions."""
    data = invented(seed)
    rng = np.random.default_rng(seed)
    data["grp"] = rng.choice(["a", "b", "c"], size=len(data))
    data["y"] = data["y"] * np.where(data["grp"] == "c", 1.3, 1.0)
    spec = {
        "outcome": {"column": "y", "transform": y_t},
        "regressors": [
            {"column": "x2", "transform": "level", "change": "+1"},
            {"column": "grp", "transform": "category", "reference": "a", "change": "a->c"},
        ],
    }
    result = core.analyze(data, spec, parts=FAST_PARTS)
    forward, inverse = OUTCOMES[y_t]
    dummies = np.column_stack([(data["grp"] == "b").to_numpy(float), (data["grp"] == "c").to_numpy(float)])
    X = np.column_stack([np.ones(len(data)), data["x2"], dummies])
    b = np.array([t["estimate"] for t in result["terms"]])
    np.testing.assert_allclose(b, np.linalg.lstsq(X, forward(data["y"].to_numpy()), rcond=None)[0], rtol=1e-8, atol=1e-10)
    resid = forward(data["y"].to_numpy()) - X @ b
    eta_a = b[0] + b[1] * data["x2"].mean()
    eta_c = eta_a + b[3]
    if y_t == "level":
        expected = eta_c - eta_a
    elif y_t == "log":
        expected = 100.0 * math.expm1(eta_c - eta_a)
    else:
        expected = 100.0 * (np.mean(inverse(eta_c + resid)) / np.mean(inverse(eta_a + resid)) - 1.0)
    row = effect(result, "grp")
    assert _close(row["exact"], expected, 1e-8, 1e-10), (row["exact"], expected)
    assert row["ci_low"] <= row["exact"] <= row["ci_high"]


_NUMERIC_REGRESSOR_CODES = ["level", "log", "ihs", "shifted_log:1", "sqrt", "quadratic"]


@settings(max_examples=60, deadline=None)
@given(
    code=st.sampled_from(_NUMERIC_REGRESSOR_CODES),
    kind=st.sampled_from(["units", "percent"]),
    amount=st.floats(-50.0, 200.0).filter(lambda a: abs(a) > 1e-3),
    seed=st.integers(0, 10_000),
)
def test_a_transform_s_even_step_moves_every_row_alike(code, kind, amount, seed):
    """Transform.even_step (the effect engine skips the sample average under it) holds: the
    basis moves by the same amount at every x; and a transform that declares none really moves
    rows differently (so a wrong declaration either way fails)."""
    from core.model.spec import Change
    from core.model.transforms import parse_transform

    transform = parse_transform(code, "regressor", "x")
    change = Change(text="t", kind=kind, amount=amount)
    x = np.random.default_rng(seed).lognormal(1.0, 1.0, 200) + abs(amount)  # x + amount stays above zero
    moved = transform.basis(change.apply(x)) - transform.basis(x)
    spread = np.max(np.abs(moved - moved[0]))
    if transform.even_step() == kind:
        assert spread <= 1e-12 * (1.0 + np.max(np.abs(moved)))
    else:
        assert spread > 1e-9 * (1.0 + np.max(np.abs(moved)))


def test_the_log_outcome_s_jacobian_read_off_the_outcome_is_the_direct_sum():
    from core.model.transforms import parse_transform

    y = np.random.default_rng(3).lognormal(2.0, 1.5, 10_000)
    for code in ("log", "ihs", "sqrt", "shifted_log:1", "level"):
        g = parse_transform(code, "outcome", "y")
        direct = float(np.sum(g.log_jacobian(y)))
        assert rel_err(g.log_jacobian_sum(y, g.forward(y)), direct) < 1e-12
        assert rel_err(g.log_jacobian_sum(y), direct) < 1e-12
