"""Fixed effects absorbed instead of entered as dummies: the within transformation.

For one absorbed factor with levels g, least squares of y on X and the level dummies gives the
same slopes as least squares of ÿ on Ẍ, where ä = a - ā_g(i) + ā (each column less its level
mean, plus its overall mean so the intercept column stays 1 and the intercept is the rows'
average fixed effect); the residuals are the same too (Frisch-Waugh-Lovell; Wooldridge,
Econometric Analysis of Cross Section and Panel Data, 2nd ed., §10.5). For two or more factors
the projection on all their dummies is found by alternating projections: sweep out each
factor's level means in turn until nothing moves (Guimarães & Portugal 2010, Stata Journal
10(4), §3; Correia 2016, "A feasible estimator for linear models with multi-way fixed effects").
Weighted least squares takes weighted means.

Singletons, levels with one row, are dropped first and repeatedly, since dropping one can make
another (Correia 2015, "Singletons, cluster-robust standard errors and fixed effects: a bad
mix"): such a row is fitted exactly by its own dummy, so it changes no slope but would count
as an observation in the degrees of freedom.

Degrees of freedom. The dummies of every level of every factor have rank Σ_f G_f - r, r the
redundant levels: none for one factor; for two, one per connected component of the bipartite
graph of their levels (Abowd, Creecy & Kramarz 2002, the mobility groups), so G₁ + G₂ - 1 on a
connected panel; for three or more, one per factor after the first (a lower bound of r, so the
degrees of freedom are never overstated). The design's intercept lies in their span, so the
design's k plus ``Absorbed.dof`` = Σ_f G_f - r - 1 is the dummy-variable regression's count.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import sparse
from scipy.sparse import csgraph

from core.errors import DataError

# Alternating projections stop when no value moves by more than this share of its column's
# scale in a sweep (the slopes then agree with the dummy regression to about 1e-12) ...
TOLERANCE = 1e-14
# ... or after this many sweeps, with a warning (an ill-connected design converges slowly).
MAX_SWEEPS = 2_000


@dataclass
class Absorbed:
    """The absorbed factors of a design, on its rows: per factor its codes (0..G-1), level names
    and row counts; the redundant levels, the sweeps taken; the outcome within (ÿ) that is
    fitted; and per factor the level means of g(y) and of the design's columns (intercept
    first), from which a level's fixed effect is recovered (``level_effect``)."""

    columns: tuple[str, ...]
    codes: tuple[np.ndarray, ...]
    names: tuple[np.ndarray, ...]
    counts: tuple[np.ndarray, ...]
    redundant: int
    y_within: np.ndarray = field(repr=False)
    level_means: tuple[np.ndarray, ...] = field(repr=False)  # (G, 1 + width): g(y), then X
    sweeps: int = 1
    converged: bool = True

    @property
    def levels(self) -> tuple[int, ...]:
        return tuple(len(n) for n in self.names)

    @property
    def dof(self) -> int:
        """Parameters the absorbed levels add beyond the design's intercept (module docstring)."""
        return sum(self.levels) - self.redundant - 1

    def level_effect(self, column: str, level: str, coef: np.ndarray) -> float:
        """The fixed effect of one level on the model's scale: the mean over its rows of the
        rows' absorbed effects, ȳ_g - x̄_g'b over the non-intercept columns (the residuals
        average zero within every absorbed level)."""
        factor = self.columns.index(column)
        position = np.flatnonzero(self.names[factor] == level)
        if not len(position):
            raise KeyError(level)
        means = self.level_means[factor][position[0]]
        return float(means[0] - means[2:] @ coef[1:])

    def leverage(self, weights: np.ndarray | None = None) -> np.ndarray:
        """Each row's leverage from the fixed effects, added to the swept design's: wᵢ/W_g for one
        identifier (exact: the level dummies' hat matrix, orthogonal to the swept columns); for
        several Σ_f wᵢ/W_g(f) - (F-1)·wᵢ/W, exact for a balanced panel, else an approximation."""
        w = np.ones(len(self.codes[0])) if weights is None else np.asarray(weights, dtype=float)
        h = np.zeros(len(w))
        for codes in self.codes:
            h += w / np.bincount(codes, weights=w)[codes]
        return h - (len(self.codes) - 1) * w / w.sum()

    def nested_in(self, *groupings: np.ndarray | None) -> bool:
        """Whether the one absorbed factor is nested in every grouping given (each level's rows
        in one group), so its levels are not counted in the clusters' small-sample factor (the
        convention of linearmodels' absorbing least squares, which its documentation states)."""
        if len(self.columns) != 1:
            return False
        codes = self.codes[0].astype(np.int64)
        for groups in (g for g in groupings if g is not None):
            values = np.asarray(groups)
            group_codes = (values if np.issubdtype(values.dtype, np.integer) else pd.factorize(values)[0]).astype(np.int64)
            pairs = pd.unique(codes * (int(group_codes.max()) + 1) + group_codes)
            if len(pairs) != self.levels[0]:
                return False
        return True


def singleton_rows(codes: list[np.ndarray], keep: np.ndarray) -> np.ndarray:
    """Rows (a mask over ``keep``'s rows) in a level of any factor with a single kept row,
    found repeatedly until no level is a singleton."""
    keep = keep.copy()
    dropped = np.zeros(len(keep), dtype=bool)
    while True:
        found = np.zeros(len(keep), dtype=bool)
        for factor in codes:
            kept = factor[keep]
            counts = np.bincount(kept, minlength=int(factor.max()) + 1 if len(factor) else 0)
            lonely = np.zeros(len(keep), dtype=bool)
            lonely[keep] = counts[kept] == 1
            found |= lonely
        if not found.any():
            return dropped
        dropped |= found
        keep &= ~found


def _recode(codes: np.ndarray, names: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Codes renumbered 0..G-1 over the levels present, their names and row counts."""
    counts = np.bincount(codes, minlength=len(names))
    present = np.flatnonzero(counts)
    mapping = np.full(len(names), -1, dtype=np.intp)
    mapping[present] = np.arange(len(present))
    return mapping[codes], names[present], counts[present]


def _redundant(codes: list[np.ndarray], levels: list[int]) -> int:
    """Redundant levels (module docstring): none for one factor, the connected components of
    the bipartite level graph for two, one per factor after the first for three or more."""
    if len(codes) == 1:
        return 0
    if len(codes) == 2:
        a, b = codes
        graph = sparse.coo_matrix((np.ones(len(a)), (a, b + levels[0])), shape=(sum(levels), sum(levels)))
        return int(csgraph.connected_components(graph, directed=False)[0])
    return len(codes) - 1


def _means(values: np.ndarray, codes: np.ndarray, totals: np.ndarray, weights: np.ndarray | None) -> np.ndarray:
    """Per level the (weighted) mean of each column of ``values``: (G, columns)."""
    out = np.empty((len(totals), values.shape[1]), order="F")
    for j in range(values.shape[1]):
        column = values[:, j] if weights is None else values[:, j] * weights
        out[:, j] = np.bincount(codes, weights=column, minlength=len(totals))
    return out / totals[:, None]


def _subtract(A: np.ndarray, means: np.ndarray, codes: np.ndarray) -> None:
    """A's columns less their rows' level means, column by column (no n x columns temporary)."""
    for j in range(A.shape[1]):
        A[:, j] -= means[:, j].take(codes)


def absorb(
    X: np.ndarray,
    y: np.ndarray,
    columns: tuple[str, ...],
    coded: list[tuple[np.ndarray, np.ndarray]],
    weights: np.ndarray | None = None,
    names_of_columns: list[str] | None = None,
) -> tuple[Absorbed, list[str]]:
    """Sweep the absorbed factors out of X (in place, the intercept column kept at 1) and y;
    ``coded`` gives per factor the rows' codes and the level names, ``names_of_columns`` the
    design's term names. Returns the record and the warnings (a slow convergence)."""
    codes, names, counts = [], [], []
    for factor_codes, factor_names in coded:
        c, n, k = _recode(factor_codes, factor_names)
        codes.append(c)
        names.append(n)
        counts.append(k)
    totals = [
        k.astype(float) if weights is None else np.bincount(c, weights=weights, minlength=len(k))
        for c, k in zip(codes, counts, strict=True)
    ]
    # g(y) and the non-intercept columns, column-major: every pass below reads whole columns.
    A = np.empty((len(y), X.shape[1]), order="F")
    A[:, 0] = y
    A[:, 1:] = X[:, 1:]
    level_means = tuple(_means(A, c, t, weights) for c, t in zip(codes, totals, strict=True))
    overall = np.average(A, axis=0, weights=weights)
    scale = np.maximum(np.maximum(A.max(axis=0) - overall, overall - A.min(axis=0)), np.finfo(float).tiny)
    before = np.einsum("ij,ij->j", A, A) - len(y) * A.mean(axis=0) ** 2  # each column's spread, for the warning
    sweeps, converged = _sweep(A, codes, totals, weights, level_means, scale)
    _check_not_absorbed(A, scale, columns, names_of_columns)
    warnings = _mostly_absorbed(np.einsum("ij,ij->j", A, A), before, columns, names_of_columns)
    for j in range(1, X.shape[1]):
        np.add(A[:, j], overall[j], out=X[:, j])
    A[:, 0] += overall[0]
    if not converged:
        warnings.append(
            f"the absorbed fixed effects of {', '.join(columns)} did not settle within {MAX_SWEEPS:,} sweeps; the slopes "
            "may be off in their last digits. Absorb fewer factors, or check that their levels overlap."
        )
    record = Absorbed(
        columns=columns,
        codes=tuple(codes),
        names=tuple(names),
        counts=tuple(counts),
        redundant=_redundant(codes, [len(n) for n in names]),
        y_within=np.ascontiguousarray(A[:, 0]),
        level_means=tuple(np.column_stack([m[:, :1], np.ones(len(m)), m[:, 1:]]) for m in level_means),
        sweeps=sweeps,
        converged=converged,
    )
    return record, warnings


def _sweep(
    A: np.ndarray,
    codes: list[np.ndarray],
    totals: list[np.ndarray],
    weights: np.ndarray | None,
    first_means: tuple[np.ndarray, ...],
    scale: np.ndarray,
) -> tuple[int, bool]:
    """Alternating projections on A in place: each sweep takes every factor's level means out.
    One factor is done in one step; the first sweep reuses the level means already taken."""
    _subtract(A, first_means[0], codes[0])
    if len(codes) == 1:
        return 1, True
    for sweep in range(1, MAX_SWEEPS + 1):
        moved = np.zeros(A.shape[1])
        for factor, (c, t) in enumerate(zip(codes, totals, strict=True)):
            if sweep == 1 and factor == 0:
                continue
            means = _means(A, c, t, weights)
            moved = np.maximum(moved, np.max(np.abs(means), axis=0))
            _subtract(A, means, c)
        if np.all(moved <= TOLERANCE * scale):
            return sweep, True
    return MAX_SWEEPS, False


def _check_not_absorbed(A: np.ndarray, scale: np.ndarray, columns: tuple[str, ...], names: list[str] | None) -> None:
    """A regressor constant within the absorbed levels has nothing left to explain (A holds
    g(y) and the non-intercept design columns, swept; ``scale`` their spread before)."""
    left = np.max(np.abs(A), axis=0)
    for j in np.flatnonzero(left[1:] <= 1e-9 * scale[1:]):
        term = names[j + 1] if names else f"design column {j + 1}"
        raise DataError(
            f"'{term}' does not vary within the levels of {', '.join(columns)}: the absorbed fixed effects explain it "
            "fully, so its coefficient cannot be estimated. Remove that regressor, or absorb less."
        )


# A regressor whose variation the fixed effects take almost all of (its R² on them above 0.99)
# is estimated from the small rest: its coefficient is fragile and its interval wide.
MOSTLY_ABSORBED = 0.01


def _mostly_absorbed(left: np.ndarray, before: np.ndarray, columns: tuple[str, ...], names: list[str] | None) -> list[str]:
    """A warning per regressor that keeps under ``MOSTLY_ABSORBED`` of its variation."""
    out = []
    for j in np.flatnonzero(left[1:] < MOSTLY_ABSORBED * before[1:]):
        term = names[j + 1] if names else f"design column {j + 1}"
        share = 100.0 * left[j + 1] / before[j + 1]
        out.append(
            f"'{term}' varies little within the levels of {', '.join(columns)}: only {share:.2g} % of its variation is "
            "left once the fixed effects are absorbed, so its coefficient rests on that small rest and is fragile."
        )
    return out
