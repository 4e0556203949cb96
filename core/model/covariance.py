"""Coefficient covariance: one sandwich, several meats.

All types share V = B·M·B with bread B = (X'WX)^{-1} and a meat M that differs by type
(u = sqrt(w)·e and x̃ᵢ = sqrt(wᵢ)·xᵢ are the weighted residuals and rows; hᵢ = x̃ᵢ'B x̃ᵢ the
leverage):

- classical  V = s²·B, s² = Σuᵢ²/(n-k)
- HC0        M = Σ uᵢ² x̃ᵢx̃ᵢ'                                   (White 1980, Econometrica 48)
- HC1        HC0 · n/(n-k)                                     (MacKinnon & White 1985, J. Econometrics 29)
- HC2        M = Σ uᵢ²/(1-hᵢ) x̃ᵢx̃ᵢ'                            (MacKinnon & White 1985)
- HC3        M = Σ uᵢ²/(1-hᵢ)² x̃ᵢx̃ᵢ'                           (MacKinnon & White 1985; Long & Ervin 2000)
- cluster    M = Σ_g (X̃_g'u_g)(X̃_g'u_g)' · G/(G-1) · (n-1)/(n-k) (Liang & Zeger 1986; small-sample
             factor as in Cameron & Miller 2015, J. Human Resources 50(2), §VI.B)

Degrees of freedom for t-based intervals: n-k, and G-1 for cluster (Cameron & Miller 2015, §VI.C).

Every meat is a sum over rows, so it is accumulated over row chunks (``core.model.ols.CHUNK_ROWS``):
for a chunk, the scores x̃ᵢ·uᵢ (divided by (1-hᵢ)^{1/2} or (1-hᵢ) for HC2/HC3) are formed
and S'S, or for clusters the per-group sums of the scores, is added; no n x k array of scores
or of weighted rows is held. The rows x̃ᵢ = rᵢ·xᵢ are passed as X and the row factors rᵢ
(sqrt(w) for weighted least squares, sqrt(μ̂) for PPML).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from core.errors import DataError
from core.model.ols import CHUNK_ROWS, OLSFit, row_chunks


def leverage(X: np.ndarray, bread: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """Diagonal of the hat matrix, hᵢ = x̃ᵢ'(X'WX)^{-1}x̃ᵢ = wᵢ·xᵢ'(X'WX)^{-1}xᵢ, by row chunks."""
    n = X.shape[0]
    h = np.empty(n)
    for start in row_chunks(n):
        chunk = X[start : start + CHUNK_ROWS]
        h[start : start + CHUNK_ROWS] = np.einsum("ij,ij->i", chunk @ bread, chunk)
    return h * weights if weights is not None else h


def covariance(fit: OLSFit, X: np.ndarray, kind: str, groups: np.ndarray | None = None) -> tuple[np.ndarray, int]:
    """Covariance of least-squares coefficients and the degrees of freedom for t intervals."""
    root_w = np.sqrt(fit.weights) if fit.weights is not None else None
    u = fit.resid if root_w is None else fit.resid * root_w
    return sandwich(fit.xtx_inv, X, u, kind, groups, fit.sigma**2, row_scale=root_w)


def sandwich(
    bread: np.ndarray,
    Xw: np.ndarray,
    u: np.ndarray,
    kind: str,
    groups: np.ndarray | None,
    scale: float,
    row_scale: np.ndarray | None = None,
) -> tuple[np.ndarray, int]:
    """V = B·M·B for rows x̃ᵢ = rᵢ·``Xw``ᵢ (rᵢ = ``row_scale``, 1 when None) and residuals uᵢ;
    ``scale`` is s² for the classical type."""
    n, k = Xw.shape
    if kind == "classical":
        return scale * bread, n - k
    if kind not in ("HC0", "HC1", "HC2", "HC3", "cluster"):
        raise DataError(f"unknown covariance '{kind}'; use classical, HC0, HC1, HC2, HC3 or cluster.")
    # Score factor per row: x̃ᵢ·uᵢ = xᵢ·(rᵢ·uᵢ).
    factor = u if row_scale is None else row_scale * u
    if kind in ("HC2", "HC3"):
        h = leverage(Xw, bread, None if row_scale is None else row_scale * row_scale)
        if np.any(h >= 1 - 1e-10):
            rows = np.flatnonzero(h >= 1 - 1e-10)[:5]
            raise DataError(
                f"{kind} cannot be computed: row(s) {', '.join(str(r + 1) for r in rows)} fully determine their own fit "
                "(leverage 1). Use HC1 or classical standard errors, or drop those rows."
            )
        power = 1.0 if kind == "HC2" else 2.0
        factor = factor / (1.0 - h) ** (power / 2.0)
    if kind == "cluster":
        if groups is None:
            raise DataError("cluster-robust standard errors need a cluster column; name one in 'cluster'.")
        codes, uniques = _group_codes(groups)
        n_groups = len(uniques)
        if n_groups < 2:
            raise DataError(
                "the cluster column has a single group; cluster-robust errors need at least two groups (many more are better)."
            )
        summed = np.zeros((n_groups, k))
        for start in row_chunks(n):
            scores = Xw[start : start + CHUNK_ROWS] * factor[start : start + CHUNK_ROWS, None]
            part = codes[start : start + CHUNK_ROWS]
            for j in range(k):
                summed[:, j] += np.bincount(part, weights=scores[:, j], minlength=n_groups)
        small_sample = n_groups / (n_groups - 1) * (n - 1) / (n - k)
        return small_sample * (bread @ (summed.T @ summed) @ bread), n_groups - 1
    meat = np.zeros((k, k))
    for start in row_chunks(n):
        scores = Xw[start : start + CHUNK_ROWS] * factor[start : start + CHUNK_ROWS, None]
        meat += scores.T @ scores
    small_sample = n / (n - k) if kind == "HC1" else 1.0
    return small_sample * (bread @ meat @ bread), n - k


def _group_codes(groups: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Group codes numbered in the sorted order of the groups' text, as np.unique numbers them;
    the distinct values are found by hashing (pandas.factorize), only they are sorted."""
    values = np.asarray(groups)
    if values.dtype == object and pd.api.types.infer_dtype(values, skipna=False) == "string":
        codes, distinct = pd.factorize(values)
        uniques, position = np.unique(np.asarray(distinct, dtype=object).astype(str), return_inverse=True)
        return position.ravel()[codes], uniques
    uniques, codes = np.unique(values.astype(str), return_inverse=True)
    return codes.ravel(), uniques
