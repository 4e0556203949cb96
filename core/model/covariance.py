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

from dataclasses import dataclass

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


@dataclass(frozen=True)
class CovarianceKind:
    """One covariance type: its spec name, its words, and its meat (see the module docstring).

    ``words`` is the menu entry, ``short`` the name in headers and tables; ``needs_groups``
    says the spec must name a cluster column. Subclasses override ``estimate``.
    """

    name: str
    words: str
    short: str
    needs_groups: bool = False

    def estimate(self, rows: Rows) -> tuple[np.ndarray, int]:
        """V and the degrees of freedom for t intervals."""
        raise NotImplementedError


@dataclass(frozen=True)
class Rows:
    """What every meat reads: the bread B, rows x̃ᵢ = rᵢ·Xᵢ (``row_scale`` r, 1 when None),
    residuals u, the groups and s² for the classical type."""

    bread: np.ndarray
    X: np.ndarray
    u: np.ndarray
    groups: np.ndarray | None
    scale: float
    row_scale: np.ndarray | None

    @property
    def factor(self) -> np.ndarray:
        """Score factor per row: x̃ᵢ·uᵢ = xᵢ·(rᵢ·uᵢ)."""
        return self.u if self.row_scale is None else self.row_scale * self.u


class Classical(CovarianceKind):
    def estimate(self, rows: Rows) -> tuple[np.ndarray, int]:
        n, k = rows.X.shape
        return rows.scale * rows.bread, n - k


@dataclass(frozen=True)
class HeteroskedasticityRobust(CovarianceKind):
    """HC0-HC3: M = Σ (uᵢ/(1-hᵢ)^{power/2})² x̃ᵢx̃ᵢ', times n/(n-k) for HC1."""

    power: float = 0.0
    small_sample: bool = False

    def estimate(self, rows: Rows) -> tuple[np.ndarray, int]:
        n, k = rows.X.shape
        factor = rows.factor
        if self.power:
            weights = None if rows.row_scale is None else rows.row_scale * rows.row_scale
            h = leverage(rows.X, rows.bread, weights)
            if np.any(h >= 1 - 1e-10):
                bad = np.flatnonzero(h >= 1 - 1e-10)[:5]
                raise DataError(
                    f"{self.name} cannot be computed: row(s) {', '.join(str(r + 1) for r in bad)} fully determine their own fit "
                    "(leverage 1). Use HC1 or classical standard errors, or drop those rows."
                )
            factor = factor / (1.0 - h) ** (self.power / 2.0)
        meat = np.zeros((k, k))
        for start in row_chunks(n):
            scores = rows.X[start : start + CHUNK_ROWS] * factor[start : start + CHUNK_ROWS, None]
            meat += scores.T @ scores
        correction = n / (n - k) if self.small_sample else 1.0
        return correction * (rows.bread @ meat @ rows.bread), n - k


class Clustered(CovarianceKind):
    """M = Σ_g (X̃_g'u_g)(X̃_g'u_g)' · G/(G-1) · (n-1)/(n-k); G-1 degrees of freedom."""

    def estimate(self, rows: Rows) -> tuple[np.ndarray, int]:
        n, k = rows.X.shape
        if rows.groups is None:
            raise DataError("cluster-robust standard errors need a cluster column; name one in 'cluster'.")
        codes, uniques = _group_codes(rows.groups)
        n_groups = len(uniques)
        if n_groups < 2:
            raise DataError(
                "the cluster column has a single group; cluster-robust errors need at least two groups (many more are better)."
            )
        factor = rows.factor
        summed = np.zeros((n_groups, k))
        for start in row_chunks(n):
            scores = rows.X[start : start + CHUNK_ROWS] * factor[start : start + CHUNK_ROWS, None]
            part = codes[start : start + CHUNK_ROWS]
            for j in range(k):
                summed[:, j] += np.bincount(part, weights=scores[:, j], minlength=n_groups)
        small_sample = n_groups / (n_groups - 1) * (n - 1) / (n - k)
        return small_sample * (rows.bread @ (summed.T @ summed) @ rows.bread), n_groups - 1


# The registry, in menu order: spec validation, the app's menu and the tables read it.
COVARIANCE_KINDS: dict[str, CovarianceKind] = {
    kind.name: kind
    for kind in (
        Classical("classical", "Classical (same noise in every row)", "classical"),
        HeteroskedasticityRobust("HC0", "Robust, HC0", "robust (HC0)"),
        HeteroskedasticityRobust("HC1", "Robust, HC1 (usual choice)", "robust (HC1)", small_sample=True),
        HeteroskedasticityRobust("HC2", "Robust, HC2", "robust (HC2)", power=1.0),
        HeteroskedasticityRobust("HC3", "Robust, HC3 (cautious in small samples)", "robust (HC3)", power=2.0),
        Clustered("cluster", "Clustered by a grouping column", "clustered", needs_groups=True),
    )
}


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
    found = COVARIANCE_KINDS.get(kind)
    if found is None:
        raise DataError(f"unknown covariance '{kind}'; use one of: {', '.join(COVARIANCE_KINDS)}.")
    return found.estimate(Rows(bread, Xw, u, groups, scale, row_scale))


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
