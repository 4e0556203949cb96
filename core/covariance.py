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
"""

from __future__ import annotations

import numpy as np

from core.errors import DataError
from core.ols import OLSFit


def leverage(X: np.ndarray, bread: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """Diagonal of the hat matrix, hᵢ = x̃ᵢ'(X'WX)^{-1}x̃ᵢ."""
    h = np.einsum("ij,ij->i", X @ bread, X)
    return h * weights if weights is not None else h


def covariance(fit: OLSFit, X: np.ndarray, kind: str, groups: np.ndarray | None = None) -> tuple[np.ndarray, int]:
    """Covariance of least-squares coefficients and the degrees of freedom for t intervals."""
    u = fit.resid if fit.weights is None else fit.resid * np.sqrt(fit.weights)
    Xw = X if fit.weights is None else X * np.sqrt(fit.weights)[:, None]
    return sandwich(fit.xtx_inv, Xw, u, kind, groups, fit.sigma**2)


def sandwich(
    bread: np.ndarray, Xw: np.ndarray, u: np.ndarray, kind: str, groups: np.ndarray | None, scale: float
) -> tuple[np.ndarray, int]:
    """V = B·M·B for rows x̃ᵢ (``Xw``) and residuals uᵢ; ``scale`` is s² for the classical type."""
    n, k = Xw.shape
    if kind == "classical":
        return scale * bread, n - k
    if kind in ("HC0", "HC1"):
        scores = Xw * u[:, None]
        factor = n / (n - k) if kind == "HC1" else 1.0
        return factor * (bread @ (scores.T @ scores) @ bread), n - k
    if kind in ("HC2", "HC3"):
        h = np.einsum("ij,ij->i", Xw @ bread, Xw)
        if np.any(h >= 1 - 1e-10):
            rows = np.flatnonzero(h >= 1 - 1e-10)[:5]
            raise DataError(
                f"{kind} cannot be computed: row(s) {', '.join(str(r + 1) for r in rows)} fully determine their own fit "
                "(leverage 1). Use HC1 or classical standard errors, or drop those rows."
            )
        power = 1.0 if kind == "HC2" else 2.0
        scores = Xw * (u / (1.0 - h) ** (power / 2.0))[:, None]
        return bread @ (scores.T @ scores) @ bread, n - k
    if kind == "cluster":
        if groups is None:
            raise DataError("cluster-robust standard errors need a cluster column; name one in 'cluster'.")
        codes, uniques = _group_codes(groups)
        n_groups = len(uniques)
        if n_groups < 2:
            raise DataError(
                "the cluster column has a single group; cluster-robust errors need at least two groups (many more are better)."
            )
        scores = Xw * u[:, None]
        summed = np.column_stack([np.bincount(codes, weights=scores[:, j], minlength=n_groups) for j in range(k)])
        factor = n_groups / (n_groups - 1) * (n - 1) / (n - k)
        return factor * (bread @ (summed.T @ summed) @ bread), n_groups - 1
    raise DataError(f"unknown covariance '{kind}'; use classical, HC0, HC1, HC2, HC3 or cluster.")


def _group_codes(groups: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    uniques, codes = np.unique(np.asarray(groups).astype(str), return_inverse=True)
    return codes.ravel(), uniques
