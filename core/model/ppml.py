"""Poisson pseudo-maximum likelihood (PPML) for a log-linear mean of an outcome with zeros.

E[y | x] = exp(x'b) is estimated from the Poisson score equations Σ (yᵢ - exp(xᵢ'b))·xᵢ = 0,
which are consistent whenever the mean is right, whatever the distribution of y (Gourieroux,
Monfort & Trognon 1984; Santos Silva & Tenreyro 2006, REStat 88(4)). The outcome is used in
levels, zeros included, so no row is lost to a log. Solved by Newton steps with step halving.
Robust standard errors use the sandwich with bread (X'MX)^{-1}, M = diag(μ̂), and scores
(yᵢ - μ̂ᵢ)·xᵢ; in ``core.model.covariance`` terms the rows are sqrt(μ̂)·x and the residuals
(y - μ̂)/sqrt(μ̂). Coefficients read as for a log outcome.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import gammaln

from core.errors import DataError

MAX_ITERATIONS = 100
TOLERANCE = 1e-10


@dataclass
class PPMLFit:
    coef: np.ndarray
    mu: np.ndarray
    bread: np.ndarray
    loglik: float
    n: int
    k: int
    iterations: int


def _pseudo_loglik(y: np.ndarray, eta: np.ndarray, w: np.ndarray) -> float:
    return float(w @ (y * eta - np.exp(eta)))


def fit_ppml(X: np.ndarray, y: np.ndarray, weights: np.ndarray | None = None) -> PPMLFit:
    n, k = X.shape
    if np.any(y < 0):
        raise DataError("PPML needs an outcome of zero or more; the outcome has negative values. Use OLS instead.")
    if not np.any(y > 0):
        raise DataError("PPML needs some positive outcome values; the outcome is zero in every row used.")
    w = np.ones(n) if weights is None else weights
    scale = X.std(axis=0)
    scale[0] = 1.0
    scale[scale == 0] = 1.0
    Z = X / scale
    b = np.zeros(k)
    b[0] = np.log(float(w @ y) / float(w.sum()))
    eta = Z @ b
    current = _pseudo_loglik(y, eta, w)
    for iteration in range(1, MAX_ITERATIONS + 1):  # noqa: B007 - read after the loop
        mu = np.exp(eta)
        hessian = (Z * (w * mu)[:, None]).T @ Z
        gradient = Z.T @ (w * (y - mu))
        try:
            step = np.linalg.solve(hessian, gradient)
        except np.linalg.LinAlgError:
            raise DataError("PPML could not be fitted: the regressors are collinear in the rows used; remove one.") from None
        factor = 1.0
        while True:
            candidate = b + factor * step
            eta_new = Z @ candidate
            if np.all(np.isfinite(eta_new)) and np.max(eta_new) < 700:
                value = _pseudo_loglik(y, eta_new, w)
                if value >= current - 1e-12 * abs(current):
                    break
            factor /= 2
            if factor < 1e-8:
                raise DataError("PPML did not converge; some regressor may perfectly predict zeros. Check for such a variable.")
        converged = np.max(np.abs(candidate - b)) < TOLERANCE * (1 + np.max(np.abs(b)))
        b, eta, current = candidate, eta_new, value
        if converged:
            break
    else:
        raise DataError(
            "PPML did not converge in 100 steps; some regressor may perfectly predict zeros. Check for such a variable."
        )
    mu = np.exp(eta)
    full_loglik = current - float(w @ gammaln(y + 1.0))
    coef = b / scale
    bread_scaled = np.linalg.inv((Z * (w * mu)[:, None]).T @ Z)
    bread = bread_scaled / scale[:, None] / scale[None, :]
    return PPMLFit(coef=coef, mu=mu, bread=bread, loglik=full_loglik, n=n, k=k, iterations=iteration)
