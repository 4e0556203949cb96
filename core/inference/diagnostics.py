"""Residual checks: heteroskedasticity, normality, functional form, collinearity, influence.

- Breusch-Pagan, studentized (Koenker 1981, J. Econometrics 17): LM = n·R² of the auxiliary
  regression of û² on the model's regressors; χ² with (k-1) df (Breusch & Pagan 1979).
- White (1980, Econometrica 48): LM = n·R² of û² on the regressors, their squares and cross
  products; χ² with rank-1 df, the rank of that auxiliary design (so a dummy's square, equal to
  the dummy, or the product of two levels of one category, always 0, add nothing; as
  statsmodels' het_white).
- Jarque & Bera (1987, Int. Stat. Review 55): JB = n/6·(S² + (K-3)²/4) with S, K the sample
  skewness and kurtosis of the residuals (moment estimators); χ² with 2 df.
- RESET (Ramsey 1969, JRSS-B 31): F test of adding ŷ² and ŷ³ to the regression.
- VIF (Belsley, Kuh & Welsch 1980): 1/(1-R²ⱼ) of each design column on the others, i.e. the
  diagonal of the inverse correlation matrix of the non-intercept columns.
- Influence (Cook 1977, Technometrics 19): leverage hᵢ and Cook's distance
  Dᵢ = ûᵢ²·hᵢ / (k·s²·(1-hᵢ)²); rows with Dᵢ > 4/n are listed (common practice, no source).

Weighted fits use the weighted residuals and rows (sqrt(w)·û, sqrt(w)·x).

Computation. Every auxiliary regression is summed over row chunks, never built as an n x p
matrix: for a chunk, the auxiliary columns Z_c are formed and Z_c'Z_c and Z_c'v are added.
R² = 1 - SSR/SST with SST = Σ(vᵢ - v̄)² and SSR = v'v - v'Z(Z'Z)⁺Z'v, the projection taken
on the eigenvectors of the unit-diagonal Gram matrix D⁻¹Z'ZD⁻¹ whose eigenvalues exceed
``RANK_TOLERANCE``·p times the largest; their count is the rank of Z (Golub & Van Loan, Matrix
Computations, 4th ed., §5.5: least squares by the symmetric eigendecomposition of the normal
equations, rank by the spectrum). Exactly dependent columns give eigenvalues at rounding level
(about 1e-16 of the largest), far below the cut. The columns are taken in a better-conditioned
basis of the same span: the regressors x (not the intercept) shifted by their means before
powers and products, x̃ = x - x̄ (the span of {1, xᵢ, xᵢxⱼ} is that of {1, x̃ᵢ, x̃ᵢx̃ⱼ});
weighted rows are scaled by sqrt(w) (products by w).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
from scipy import stats

from core.model.covariance import leverage
from core.model.design import Design
from core.model.ols import CHUNK_ROWS, OLSFit, row_chunks

MAX_LISTED_ROWS = 25
# Eigenvalues of the unit-diagonal auxiliary Gram matrix below RANK_TOLERANCE·p times the
# largest are treated as zero (exact dependence shows as ~1e-16; a direction is dropped only when
# the auxiliary columns are nearly dependent to about 1 part in 1e5 of their length).
RANK_TOLERANCE = 1e-12
# Elements (rows x columns) of one chunk of auxiliary columns: about 8 MB.
_AUX_ELEMENTS = 1 << 20


def _projection(v: np.ndarray, p: int, columns: Callable[[int, int], np.ndarray]) -> tuple[float, int]:
    """v'Z(Z'Z)⁺Z'v and the rank of Z, for auxiliary columns Z (n x p) that ``columns(start,
    stop)`` makes for rows start:stop, summed over row chunks."""
    n = len(v)
    rows = max(1024, _AUX_ELEMENTS // max(p, 1))
    gram = np.zeros((p, p))
    zv = np.zeros(p)
    for start in row_chunks(n, rows):
        stop = min(start + rows, n)
        chunk = columns(start, stop)
        gram += chunk.T @ chunk
        zv += chunk.T @ v[start:stop]
    length = np.sqrt(np.diag(gram))
    used = length > 0
    length = length[used]
    scaled = gram[np.ix_(used, used)] / length[:, None] / length[None, :]
    values, vectors = np.linalg.eigh(scaled)
    kept = values > values.max() * RANK_TOLERANCE * len(values)
    along = vectors[:, kept].T @ (zv[used] / length)
    return float(along @ (along / values[kept])), int(kept.sum())


def _r2(v: np.ndarray, p: int, columns: Callable[[int, int], np.ndarray]) -> tuple[float, int]:
    """R² (SST centred at the mean of v) of v on the auxiliary columns, and their rank."""
    explained, rank = _projection(v, p, columns)
    centred = v - v.mean()
    sst = float(centred @ centred)
    ssr = float(v @ v) - explained
    return (1.0 - ssr / sst if sst > 0 else 0.0), rank


def _shifted(X: np.ndarray, root_w: np.ndarray | None) -> Callable[[int, int], np.ndarray]:
    """Rows start:stop of sqrt(w)·[1, x - x̄] (the regressors shifted by their means)."""
    shift = np.concatenate([[0.0], X[:, 1:].mean(axis=0)])

    def rows(start: int, stop: int) -> np.ndarray:
        chunk = X[start:stop] - shift
        if root_w is not None:
            chunk *= root_w[start:stop, None]
        return chunk

    return rows


def breusch_pagan(u: np.ndarray, X: np.ndarray, root_w: np.ndarray | None = None) -> dict[str, float]:
    """Studentized Breusch-Pagan test; ``u`` the (weighted) residuals, X the unweighted design."""
    r2, rank = _r2(u * u, X.shape[1], _shifted(X, root_w))
    statistic = len(u) * r2
    return {"statistic": statistic, "p_value": float(stats.chi2.sf(statistic, rank - 1)), "df": rank - 1}


def white(u: np.ndarray, X: np.ndarray, root_w: np.ndarray | None = None) -> dict[str, float]:
    """White's test; ``u`` the (weighted) residuals, X the unweighted design."""
    k = X.shape[1]
    i0, i1 = np.triu_indices(k)
    shifted = _shifted(X, root_w)

    def products(start: int, stop: int) -> np.ndarray:
        base = shifted(start, stop)
        out = np.empty((stop - start, len(i0)), order="F")
        for c, (i, j) in enumerate(zip(i0, i1, strict=True)):
            np.multiply(base[:, i], base[:, j], out=out[:, c])
        return out

    r2, rank = _r2(u * u, len(i0), products)
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
    """RESET F test; ``u`` the (weighted) residuals, X the unweighted design, ``ssr`` = u'u.

    u is orthogonal to the weighted regressors, so regressing y or u on them and the powers
    gives the same residual: SSR_full = u'u - u'Z(Z'Z)⁺Z'u, and SSR - SSR_full is the
    projection itself."""
    n, k = X.shape
    # Scale the fitted values before powering them so the auxiliary design stays well conditioned.
    scaled = (fitted - fitted.mean()) / (fitted.std() or 1.0)
    shifted = _shifted(X, root_w)

    def columns(start: int, stop: int) -> np.ndarray:
        out = np.empty((stop - start, k + 2), order="F")
        out[:, :k] = shifted(start, stop)
        power = scaled[start:stop]
        out[:, k] = power**2
        out[:, k + 1] = power**3
        if root_w is not None:
            out[:, k:] *= root_w[start:stop, None]
        return out

    explained, _ = _projection(u, k + 2, columns)
    ssr_full = ssr - explained
    df_num = 2
    df_den = n - k - 2
    statistic = (explained / df_num) / (ssr_full / df_den)
    return {"statistic": statistic, "p_value": float(stats.f.sf(statistic, df_num, df_den)), "df_num": df_num, "df_den": df_den}


def vif(X: np.ndarray, names: list[str]) -> list[dict[str, Any]]:
    """Diagonal of the inverse correlation matrix (numpy.corrcoef's steps: centred cross
    products over n-1, divided by the standard deviations, clipped to [-1, 1]), summed over
    row chunks."""
    n, k = X.shape
    if k <= 2:
        return [{"name": names[i], "vif": 1.0} for i in range(1, k)]
    means = X[:, 1:].mean(axis=0)
    cross = np.zeros((k - 1, k - 1))
    for start in row_chunks(n):
        chunk = X[start : start + CHUNK_ROWS, 1:] - means
        cross += chunk.T @ chunk
    corr = cross / (n - 1)
    sd = np.sqrt(np.diag(corr))
    corr = corr / sd[:, None] / sd[None, :]
    np.clip(corr, -1, 1, out=corr)
    inverse = np.linalg.pinv(corr)
    return [{"name": names[i + 1], "vif": float(inverse[i, i])} for i in range(k - 1)]


def influence(design: Design, fit: OLSFit) -> dict[str, Any]:
    u = fit.resid if fit.weights is None else fit.resid * np.sqrt(fit.weights)
    h = leverage(design.X, fit.xtx_inv, fit.weights)
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
    root_w = np.sqrt(fit.weights) if fit.weights is not None else None
    u = fit.resid if root_w is None else fit.resid * root_w
    names = [t.name for t in design.terms]
    return {
        "breusch_pagan": breusch_pagan(u, design.X, root_w),
        "white": white(u, design.X, root_w),
        "jarque_bera": jarque_bera(u),
        "reset": reset(u, design.X, fit.fitted, fit.ssr, root_w),
        "vif": vif(design.X, names),
        "influence": influence(design, fit),
    }
