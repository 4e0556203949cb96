"""Residual checks: heteroskedasticity, normality, functional form, collinearity, influence.

- Breusch-Pagan, studentized (Koenker 1981, J. Econometrics 17): LM = n·R² of the auxiliary
  regression of û² on the model's regressors; χ² with (k-1) df (Breusch & Pagan 1979).
- White (1980, Econometrica 48): LM = n·R² of û² on the regressors, their squares and cross
  products (duplicate columns, such as a dummy and its square, removed); χ² with rank-1 df.
- Jarque & Bera (1987, Int. Stat. Review 55): JB = n/6·(S² + (K-3)²/4) with S, K the sample
  skewness and kurtosis of the residuals (moment estimators); χ² with 2 df.
- RESET (Ramsey 1969, JRSS-B 31): F test of adding ŷ² and ŷ³ to the regression.
- VIF (Belsley, Kuh & Welsch 1980): 1/(1-R²ⱼ) of each design column on the others, i.e. the
  diagonal of the inverse correlation matrix of the non-intercept columns.
- Influence (Cook 1977, Technometrics 19): leverage hᵢ and Cook's distance
  Dᵢ = ûᵢ²·hᵢ / (k·s²·(1-hᵢ)²); rows with Dᵢ > 4/n are listed (common practice, no source).

Weighted fits use the weighted residuals and rows (sqrt(w)·û, sqrt(w)·x).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import scipy.linalg as sla
from scipy import stats

from core.covariance import leverage
from core.design import Design
from core.ols import OLSFit

MAX_LISTED_ROWS = 25


def _r2_of(y: np.ndarray, Z: np.ndarray) -> tuple[float, int]:
    """R² of y on Z (Z includes a constant) and the rank of Z."""
    q, r, _ = sla.qr(Z, mode="economic", pivoting=True)
    diag = np.abs(np.diag(r))
    rank = int((diag > diag.max() * max(Z.shape) * np.finfo(float).eps * 10).sum()) if diag.size else 0
    q = q[:, :rank]
    projected = q.T @ y
    centred = y - y.mean()
    sst = float(centred @ centred)
    ssr = float(y @ y - projected @ projected)
    return (1.0 - ssr / sst if sst > 0 else 0.0), rank


def _weighted(design: Design, fit: OLSFit) -> tuple[np.ndarray, np.ndarray]:
    if fit.weights is None:
        return fit.resid, design.X
    root = np.sqrt(fit.weights)
    return fit.resid * root, design.X * root[:, None]


def breusch_pagan(u: np.ndarray, X: np.ndarray) -> dict[str, float]:
    r2, rank = _r2_of(u * u, X)
    statistic = len(u) * r2
    return {"statistic": statistic, "p_value": float(stats.chi2.sf(statistic, rank - 1)), "df": rank - 1}


def white(u: np.ndarray, X: np.ndarray) -> dict[str, float]:
    i0, i1 = np.triu_indices(X.shape[1])
    Z = X[:, i0] * X[:, i1]
    r2, rank = _r2_of(u * u, Z)
    statistic = len(u) * r2
    return {"statistic": statistic, "p_value": float(stats.chi2.sf(statistic, rank - 1)), "df": rank - 1}


def jarque_bera(u: np.ndarray) -> dict[str, float]:
    centred = u - u.mean()
    m2 = float(np.mean(centred**2))
    skew = float(np.mean(centred**3)) / m2**1.5
    kurt = float(np.mean(centred**4)) / m2**2
    statistic = len(u) / 6.0 * (skew**2 + (kurt - 3.0) ** 2 / 4.0)
    return {"statistic": statistic, "p_value": float(stats.chi2.sf(statistic, 2)), "skewness": skew, "kurtosis": kurt}


def reset(u: np.ndarray, X: np.ndarray, fitted: np.ndarray, ssr: float, root_w: np.ndarray | None) -> dict[str, float]:
    n, k = X.shape
    # Scale the fitted values before powering them so the auxiliary design stays well conditioned.
    scaled = (fitted - fitted.mean()) / (fitted.std() or 1.0)
    extra = np.column_stack([scaled**2, scaled**3])
    if root_w is not None:
        extra = extra * root_w[:, None]
    Z = np.column_stack([X, extra])
    q, _, _ = sla.qr(Z, mode="economic", pivoting=True)
    # X lies in the span of Z, so regressing y or the residuals u on Z leaves the same residual.
    projected = q.T @ u
    ssr_full = float(u @ u - projected @ projected)
    df_num = 2
    df_den = n - k - 2
    statistic = ((ssr - ssr_full) / df_num) / (ssr_full / df_den)
    return {"statistic": statistic, "p_value": float(stats.f.sf(statistic, df_num, df_den)), "df_num": df_num, "df_den": df_den}


def vif(X: np.ndarray, names: list[str]) -> list[dict[str, Any]]:
    if X.shape[1] <= 2:
        return [{"name": names[i], "vif": 1.0} for i in range(1, X.shape[1])]
    corr = np.corrcoef(X[:, 1:], rowvar=False)
    inverse = np.linalg.pinv(corr)
    return [{"name": names[i + 1], "vif": float(inverse[i, i])} for i in range(X.shape[1] - 1)]


def influence(design: Design, fit: OLSFit) -> dict[str, Any]:
    u, Xw = _weighted(design, fit)
    h = leverage(Xw, fit.xtx_inv)
    s2 = fit.sigma**2
    with np.errstate(divide="ignore", invalid="ignore"):
        cooks = u * u * h / (fit.k * s2 * (1.0 - h) ** 2)
    cutoff = 4.0 / fit.n
    order = np.argsort(-np.nan_to_num(cooks, nan=np.inf))
    flagged = [i for i in order[:MAX_LISTED_ROWS] if cooks[i] > cutoff]
    rows = [
        {
            # The user's spreadsheet numbers rows from 1 with the header on row 1.
            "sheet_row": int(design.rows[i]) + 2,
            "leverage": float(h[i]),
            "cooks_distance": float(cooks[i]),
            "residual": float(fit.resid[i]),
        }
        for i in flagged
    ]
    return {
        "cooks_cutoff": cutoff,
        "n_above_cutoff": int(np.sum(cooks > cutoff)),
        "high_leverage_cutoff": 2.0 * fit.k / fit.n,
        "n_high_leverage": int(np.sum(h > 2.0 * fit.k / fit.n)),
        "rows": rows,
    }


def diagnostics(design: Design, fit: OLSFit) -> dict[str, Any]:
    u, Xw = _weighted(design, fit)
    root_w = np.sqrt(fit.weights) if fit.weights is not None else None
    names = [t.name for t in design.terms]
    return {
        "breusch_pagan": breusch_pagan(u, Xw),
        "white": white(u, Xw),
        "jarque_bera": jarque_bera(u),
        "reset": reset(u, Xw, fit.fitted, fit.ssr, root_w),
        "vif": vif(design.X, names),
        "influence": influence(design, fit),
    }
