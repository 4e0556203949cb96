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

- HAC        M = Σ_{|j|≤L} w_j Σ_t s_t s_{t-j}', w_j = 1 - j/(L+1) (Bartlett), s_t = x̃_t·u_t, times
             n/(n-k)                                           (Newey & West 1987, Econometrica 55)
- driscoll_kraay  the same on the per-period sums of the scores, S_t = Σ_{i in t} x̃ᵢuᵢ, times
             T/(T-1) · (n-1)/(n-k), T the periods with rows     (Driscoll & Kraay 1998, REStat 80)

Degrees of freedom for t-based intervals: n-k, and G-1 for cluster (Cameron & Miller 2015, §VI.C);
n-k for HAC and T-1 for driscoll_kraay.

Time and gaps. The two time-series kinds read the rows' period numbers (``Rows.time``: integers,
0 for the first period of the time column; ``core.model.design`` makes them). Lags are distances
in time, not in row position: the lag-j partner of a row is the row exactly j periods earlier,
if that period has a row in the fit. A period with no row (absent from the data, or its row
dropped for a missing cell or a transform's domain) contributes nothing, exactly as if its
score were zero; rows on either side of a gap are paired at their true distance, never as
neighbours. With no gap this is the textbook estimator on the rows sorted by time (statsmodels'
``cov_type="HAC"`` with ``use_correction=True``, and ``"hac-groupsum"`` with
``use_correction="cluster"``, as reference library).

Lags: given in the spec, or chosen from the data by the Newey & West (1994, REStud 61) plug-in
rule for the Bartlett kernel without prewhitening: on the series h_t = Σ_j s_tj over the
non-intercept columns (zero in periods without rows), n₀ = ⌊4(T/100)^{2/9}⌋, σ_j = Σ_t h_t
h_{t-j}/T, s⁽⁰⁾ = σ_0 + 2Σ_{j=1..n₀} σ_j, s⁽¹⁾ = 2Σ_{j=1..n₀} j·σ_j, L = ⌊1.1447·(s⁽¹⁾/s⁽⁰⁾)^{2/3}·T^{1/3}⌋,
at most T-1 (T the periods spanned; NW 1994 Tables I B and II C, as R's sandwich package
implements them in ``bwNeweyWest`` with ``prewhite = 0`` and ``NeweyWest``'s floor).

Every meat is a sum over rows, so it is accumulated over row chunks (``core.model.ols.CHUNK_ROWS``):
for a chunk, the scores x̃ᵢ·uᵢ (divided by (1-hᵢ)^{1/2} or (1-hᵢ) for HC2/HC3) are formed
and S'S, or for clusters the per-group sums of the scores, is added; no n x k array of scores
or of weighted rows is held. The rows x̃ᵢ = rᵢ·xᵢ are passed as X and the row factors rᵢ
(sqrt(w) for weighted least squares, sqrt(μ̂) for PPML).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from core.errors import DataError
from core.model import engine
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
    needs_time: bool = False

    def estimate(self, rows: Rows) -> tuple[np.ndarray, int]:
        """V and the degrees of freedom for t intervals."""
        raise NotImplementedError

    @property
    def reads_score_gram(self) -> bool:
        """Whether the meat is the score Gram Σ (rᵢuᵢ)² xᵢxᵢ' alone, which the fit's last
        residual pass can sum while it has each block in cache (``Rows.score_gram``)."""
        return False


@dataclass(frozen=True)
class Rows:
    """What every meat reads: the bread B, rows x̃ᵢ = rᵢ·Xᵢ (``row_scale`` r, 1 when None),
    residuals u, the groups and s² for the classical type; for the time-series kinds the period
    of each row and the lags (None: chosen from the data), and ``notes`` they fill in (lags
    used, periods spanned and without rows) for the result's header."""

    bread: np.ndarray
    X: np.ndarray
    u: np.ndarray
    groups: np.ndarray | None
    scale: float
    row_scale: np.ndarray | None
    time: np.ndarray | None = None
    lags: int | None = None
    notes: dict = field(default_factory=dict)
    # Σ (rᵢuᵢ)² XᵢXᵢ' when the fit summed it already (see CovarianceKind.reads_score_gram).
    score_gram: np.ndarray | None = None
    # Absorbed fixed effects (core.model.absorb): the parameters they add to k, and whether the
    # one absorbed identifier is nested in the clusters (then not counted in their factor).
    absorbed: int = 0
    nested: bool = False
    groups_second: np.ndarray | None = None  # two-way clustering's second grouping

    @property
    def n_k(self) -> tuple[int, int]:
        """Rows and parameters: the design's columns plus the absorbed fixed effects."""
        n, k = self.X.shape
        return n, k + self.absorbed

    @property
    def factor(self) -> np.ndarray:
        """Score factor per row: x̃ᵢ·uᵢ = xᵢ·(rᵢ·uᵢ)."""
        return self.u if self.row_scale is None else self.row_scale * self.u


class Classical(CovarianceKind):
    def estimate(self, rows: Rows) -> tuple[np.ndarray, int]:
        n, k = rows.n_k
        return rows.scale * rows.bread, n - k


@dataclass(frozen=True)
class HeteroskedasticityRobust(CovarianceKind):
    """HC0-HC3: M = Σ (uᵢ/(1-hᵢ)^{power/2})² x̃ᵢx̃ᵢ', times n/(n-k) for HC1."""

    power: float = 0.0
    small_sample: bool = False

    @property
    def reads_score_gram(self) -> bool:
        return not self.power

    def estimate(self, rows: Rows) -> tuple[np.ndarray, int]:
        n, k = rows.n_k
        correction = n / (n - k) if self.small_sample else 1.0
        if not self.power and rows.score_gram is not None:
            return correction * (rows.bread @ rows.score_gram @ rows.bread), n - k
        factor = rows.factor
        if self.power and rows.absorbed:
            raise DataError(
                f"{self.name} needs each row's leverage in the model with the absorbed fixed effects, which sweeping them "
                "out does not give; use HC1 or clustered standard errors."
            )
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
        meat = engine.scaled_cross_products(rows.X, factor)
        return correction * (rows.bread @ meat @ rows.bread), n - k


class Clustered(CovarianceKind):
    """M = Σ_g (X̃_g'u_g)(X̃_g'u_g)' · G/(G-1) · (n-1)/(n-k); G-1 degrees of freedom.

    Two-way (a second grouping): V = V_a + V_b - V_ab, each from its own grouping (ab: the
    pairs of groups met in the rows) with its own G/(G-1)·(n-1)/(n-k); where a variance comes
    out negative, the sum's negative eigenvalues are set to zero; min(G_a, G_b) - 1 degrees of
    freedom (Cameron, Gelbach & Miller 2011,
    JBES 29(2), eqs. 2.11-2.13 and §2.3). With absorbed fixed effects k counts their levels,
    except for one identifier nested in the clusters (``Rows.nested``)."""

    def estimate(self, rows: Rows) -> tuple[np.ndarray, int]:
        if rows.groups is None:
            raise DataError("cluster-robust standard errors need a cluster column; name one in 'cluster'.")
        if rows.groups_second is None:
            meat, n_groups = self._meat(rows, rows.groups)
            return rows.bread @ meat @ rows.bread, n_groups - 1
        meat_a, groups_a = self._meat(rows, rows.groups, "the first cluster column")
        meat_b, groups_b = self._meat(rows, rows.groups_second, "the second cluster column")
        a, _ = _group_codes(rows.groups)
        b, second = _group_codes(rows.groups_second)
        pairs = pd.factorize(a.astype(np.int64) * len(second) + b)[0]
        meat_ab, _ = self._meat(rows, pairs)
        cov = rows.bread @ (meat_a + meat_b - meat_ab) @ rows.bread
        if np.any(np.diag(cov) < 0):  # the eigenvalue fix of CGM 2011 §2.3, only when a variance is negative
            values, vectors = np.linalg.eigh((cov + cov.T) / 2.0)
            cov = (vectors * np.clip(values, 0.0, None)) @ vectors.T
        return cov, min(groups_a, groups_b) - 1

    def _meat(self, rows: Rows, groups: np.ndarray, which: str = "the cluster column") -> tuple[np.ndarray, int]:
        """Σ_g (X̃_g'u_g)(X̃_g'u_g)' times the grouping's small-sample factor, and its G."""
        n, k = rows.X.shape
        counted = k if rows.nested else k + rows.absorbed
        codes, uniques = _group_codes(groups)
        n_groups = len(uniques)
        if n_groups < 2:
            raise DataError(
                f"{which} has a single group in the rows used; cluster-robust errors need at least two groups (many more "
                "are better)."
            )
        factor = rows.factor
        summed = np.zeros((n_groups, k))
        for start in row_chunks(n):
            scores = rows.X[start : start + CHUNK_ROWS] * factor[start : start + CHUNK_ROWS, None]
            part = codes[start : start + CHUNK_ROWS]
            for j in range(k):
                summed[:, j] += np.bincount(part, weights=scores[:, j], minlength=n_groups)
        small_sample = n_groups / (n_groups - 1) * (n - 1) / (n - counted)
        return small_sample * (summed.T @ summed), n_groups


def _scores(rows: Rows, positions: np.ndarray) -> np.ndarray:
    """The scores x̃ᵢ·uᵢ of the rows at ``positions`` (one chunk)."""
    return rows.X[positions] * rows.factor[positions, None]


def _bartlett(lags: int) -> np.ndarray:
    """Bartlett weights w_j = 1 - j/(L+1), j = 0..L (Newey & West 1987)."""
    return 1.0 - np.arange(lags + 1) / (lags + 1.0)


def newey_west_lags(h: np.ndarray) -> int:
    """Lags by the Newey & West (1994) plug-in rule for the Bartlett kernel (module docstring);
    ``h`` the scalar score series on the full period grid."""
    periods = len(h)
    first = int(np.floor(4.0 * (periods / 100.0) ** (2.0 / 9.0)))
    sigma = np.array([float(h[j:] @ h[: periods - j]) / periods for j in range(first + 1)])
    s0 = sigma[0] + 2.0 * sigma[1:].sum()
    s1 = 2.0 * float(np.arange(1, first + 1) @ sigma[1:])
    if first == 0 or not 0 < s0 < np.inf or not np.isfinite(s1):
        # No usable spectrum (scores that overflow or vanish): the rule's first guess.
        return min(first, periods - 1)
    gamma = 1.1447 * ((s1 / s0) ** 2) ** (1.0 / 3.0)
    chosen = gamma * periods ** (1.0 / 3.0)
    return int(min(np.floor(chosen), periods - 1)) if np.isfinite(chosen) else periods - 1


def _lag_weights(rows: Rows) -> np.ndarray:
    """Columns summed into the scalar series of the lag rule: all but the intercept (all when
    the intercept is the only one)."""
    k = rows.X.shape[1]
    weights = np.ones(k)
    if k > 1:
        weights[0] = 0.0
    return weights


@dataclass(frozen=True)
class TimeSeriesRobust(CovarianceKind):
    """HAC (one row per period) and, with ``per_period`` set, Driscoll-Kraay (scores summed per
    period first); Bartlett kernel, lags by time distance (module docstring)."""

    per_period: bool = False

    def estimate(self, rows: Rows) -> tuple[np.ndarray, int]:
        n, k = rows.n_k
        if rows.time is None:
            raise DataError(f"{self.name} standard errors need a time column; name one in 'time'.")
        time = np.asarray(rows.time, dtype=np.int64)
        span = int(time.max()) + 1
        if self.per_period:
            meat, lags, with_rows = self._per_period(rows, time, span)
            if with_rows < 2:
                raise DataError("driscoll_kraay needs rows in at least two periods of the time column.")
            correction, df = with_rows / (with_rows - 1) * (n - 1) / (n - k), with_rows - 1
        else:
            meat, lags, with_rows = self._one_series(rows, time, span)
            correction, df = n / (n - k), n - k
        rows.notes.update(
            lags=lags,
            lag_rule="given" if rows.lags is not None else "automatic",
            periods=span,
            periods_without_rows=span - with_rows,
        )
        return correction * (rows.bread @ meat @ rows.bread), df

    def _choose(self, rows: Rows, h: np.ndarray, span: int) -> int:
        if rows.lags is None:
            return newey_west_lags(h)
        if rows.lags >= span:
            raise DataError(
                f"{rows.lags} lags are as many as the {span} periods of the time column allow or more; use fewer lags."
            )
        return rows.lags

    def _per_period(self, rows: Rows, time: np.ndarray, span: int) -> tuple[np.ndarray, int, int]:
        """Driscoll-Kraay: the scores summed per period on the full grid (empty periods zero)."""
        n, k = rows.X.shape
        sums = np.zeros((span, k))
        for start in row_chunks(n):
            part = np.arange(start, min(start + CHUNK_ROWS, n))
            scores = _scores(rows, part)
            for j in range(k):
                sums[:, j] += np.bincount(time[part], weights=scores[:, j], minlength=span)
        lags = self._choose(rows, sums @ _lag_weights(rows), span)
        weights = _bartlett(lags)
        meat = sums.T @ sums
        for lag in range(1, lags + 1):
            cross = sums[lag:].T @ sums[:-lag]
            meat += weights[lag] * (cross + cross.T)
        return meat, lags, int(np.count_nonzero(np.bincount(time, minlength=span)))

    def _one_series(self, rows: Rows, time: np.ndarray, span: int) -> tuple[np.ndarray, int, int]:
        """HAC over one series: rows sorted by period, each paired with the row exactly j periods
        earlier (found by binary search), in row chunks that overlap by the lags."""
        n, k = rows.X.shape
        order = np.argsort(time, kind="stable")
        periods = time[order]
        repeated = np.flatnonzero(np.diff(periods) == 0)
        if len(repeated):
            raise DataError(
                f"the time column has several rows in one period ({len(repeated) + 1} or more rows share a period); "
                "HAC needs one row per period. For a panel use driscoll_kraay, or cluster by the panel unit."
            )
        h = np.zeros(span)
        for start in row_chunks(n):
            part = order[start : start + CHUNK_ROWS]
            h[periods[start : start + CHUNK_ROWS]] = _scores(rows, part) @ _lag_weights(rows)
        lags = self._choose(rows, h, span)
        weights = _bartlett(lags)
        meat = np.zeros((k, k))
        for start in row_chunks(n):
            stop = min(start + CHUNK_ROWS, n)
            first = max(0, start - lags)  # a partner is at most ``lags`` positions earlier
            scores = _scores(rows, order[first:stop])
            own = scores[start - first :]
            meat += own.T @ own
            for lag in range(1, lags + 1):
                wanted = periods[start:stop] - lag
                found = np.searchsorted(periods, wanted)
                hit = found < n
                hit[hit] = periods[found[hit]] == wanted[hit]
                if hit.any():
                    cross = own[hit].T @ scores[found[hit] - first]
                    meat += weights[lag] * (cross + cross.T)
        return meat, lags, n


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
        TimeSeriesRobust("HAC", "Time series: Newey-West (HAC)", "Newey-West (HAC)", needs_time=True),
        TimeSeriesRobust(
            "driscoll_kraay",
            "Panel over time: Driscoll-Kraay",
            "Driscoll-Kraay",
            needs_time=True,
            per_period=True,
        ),
    )
}


def covariance(
    fit: OLSFit,
    X: np.ndarray,
    kind: str,
    groups: np.ndarray | None = None,
    time: np.ndarray | None = None,
    lags: int | None = None,
    notes: dict | None = None,
    groups_second: np.ndarray | None = None,
    nested: bool = False,
) -> tuple[np.ndarray, int]:
    """Covariance of least-squares coefficients and the degrees of freedom for t intervals;
    ``time``, ``lags``, ``notes``, ``groups_second`` and ``nested`` as in ``Rows`` (the fit's
    absorbed fixed effects counted)."""
    root_w = np.sqrt(fit.weights) if fit.weights is not None else None
    u = fit.resid if root_w is None else fit.resid * root_w
    found = COVARIANCE_KINDS.get(kind)
    if found is None:
        raise DataError(f"unknown covariance '{kind}'; use one of: {', '.join(COVARIANCE_KINDS)}.")
    rows = Rows(
        fit.xtx_inv, X, u, groups, fit.sigma**2, root_w, time, lags, {} if notes is None else notes, fit.score_gram,
        fit.absorbed, nested, groups_second,
    )  # fmt: skip
    return found.estimate(rows)


def sandwich(
    bread: np.ndarray,
    Xw: np.ndarray,
    u: np.ndarray,
    kind: str,
    groups: np.ndarray | None,
    scale: float,
    row_scale: np.ndarray | None = None,
    time: np.ndarray | None = None,
    lags: int | None = None,
    notes: dict | None = None,
    score_gram: np.ndarray | None = None,
    groups_second: np.ndarray | None = None,
) -> tuple[np.ndarray, int]:
    """V = B·M·B for rows x̃ᵢ = rᵢ·``Xw``ᵢ (rᵢ = ``row_scale``, 1 when None) and residuals uᵢ;
    ``scale`` is s² for the classical type; ``time``, ``lags``, ``notes``, ``score_gram`` and
    ``groups_second`` as in ``Rows``."""
    found = COVARIANCE_KINDS.get(kind)
    if found is None:
        raise DataError(f"unknown covariance '{kind}'; use one of: {', '.join(COVARIANCE_KINDS)}.")
    notes = {} if notes is None else notes
    rows = Rows(bread, Xw, u, groups, scale, row_scale, time, lags, notes, score_gram, groups_second=groups_second)
    return found.estimate(rows)


def _group_codes(groups: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Group codes numbered in the sorted order of the groups' text, as np.unique numbers them;
    the distinct values are found by hashing (pandas.factorize), only they are sorted."""
    values = np.asarray(groups)
    if np.issubdtype(values.dtype, np.integer) and len(values) and values.min() >= 0 and np.bincount(values).all():
        # Codes already (core.model.design numbers each cluster label once, 0..G-1 over the rows used).
        return values, np.arange(int(values.max()) + 1)
    if values.dtype == object and pd.api.types.infer_dtype(values, skipna=False) == "string":
        codes, distinct = pd.factorize(values)
        uniques, position = np.unique(np.asarray(distinct, dtype=object).astype(str), return_inverse=True)
        return position.ravel()[codes], uniques
    uniques, codes = np.unique(values.astype(str), return_inverse=True)
    return codes.ravel(), uniques
