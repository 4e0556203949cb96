"""Least squares: as accurate as a Householder QR factorisation, at the cost of a Gram matrix.

The passes over the rows live in ``core.model.engine``; this module decides which to run and
turns their small k x k results into the fit. Notation: X (n x k, intercept first), weights w,
Z = sqrt(w)·[1, X₂ - c] the shifted design and ỹ = sqrt(w)·(y - c_y) (the shift is the mean of
the first block of rows, ``engine.shift_for``); y - c_y ≈ Zγ, and β = T⁻¹γ in the original
parametrisation (β₀ = γ₀ + c_y - c'γ₂, β₂ = γ₂). Weighted least squares is least squares on the
sqrt(w)-scaled rows.

1. One pass forms the Gram matrix of [Z, ỹ]. The condition number κ of the design with its
   columns centred at their means and scaled to unit length (Belsley, Kuh & Welsch 1980, ch. 3)
   is read off the Cholesky factor R of Z'Z: the trailing block R₂₂ is the R factor of the
   centred columns whatever the shift, and κ is the ratio of the extreme singular values of
   R₂₂ with unit-length columns.
2. If κ ≤ ``NORMAL_EQUATIONS_MAX_CONDITION``, the normal equations are solved with that factor:
   their forward error is of order κ²u (u = 2⁻⁵³; Golub & Van Loan, Matrix Computations, 4th ed.,
   §5.3.7) and with κ ≤ 100 that is at most 2e-12, below what the statistics need and within a
   step of refinement of a QR solution. Every realistic regression, and every design the app
   does not flag as nearly collinear, takes this path: one pass for Z'Z, one for the residuals.
3. Otherwise (and when Cholesky fails) a second pass computes R by a tall-skinny QR of [Z, ỹ]
   (``engine.tsqr_pass``; Demmel, Grigori, Hoemmen & Langou 2012), backward stable like a
   Householder QR of the whole matrix; κ and the numerical rank come from the singular values of
   its R₂₂ (a rank-revealing step on the k x k factor instead of column pivoting over the rows;
   Golub & Van Loan §5.4.1, §5.5). A rank below k at the tolerance ``RANK_TOLERANCE`` relative to
   the largest singular value, a few units of rounding, is refused naming the columns of the
   null vectors; a design short of that is fitted, however ill conditioned, and its condition
   number reported.
4. The residual pass refines the solution: δγ = R⁻¹R⁻ᵀ Z'W e (seminormal equations with the
   factor at hand; Björck 1987, "Stability analysis of the method of seminormal equations for
   linear least squares problems", Linear Algebra Appl. 88/89), until a step is within the
   rounding noise of the residuals or stops shrinking. The residuals are formed in working
   precision from the shifted design, except on designs flagged as nearly collinear
   (κ > ``EXTENDED_REFINEMENT``): there y - Xβ and X'We are formed in extended precision
   (numpy.longdouble), so the iteration moves towards the least-squares solution of the data as
   stored rather than of their rounded, shifted copy (Björck 1967, "Iterative refinement of
   linear least squares solutions I", BIT 7; Golub & Van Loan §5.3.8). Measured on NIST's
   Wampler1-5 (bench/accuracy.py): 10.0 to 14.4 correct digits in every coefficient where a
   Householder QR of the same design gives 5.8 to 13.0; on Filip 7.6, which is all the double-
   precision design holds (its exact least-squares solution, in rational arithmetic, agrees with
   NIST's to 7.6 digits).
5. (X'WX)⁻¹ = T⁻¹R⁻¹R⁻ᵀT⁻ᵀ = M'M with M = R⁻ᵀT⁻ᵀ (one triangular solve): every diagonal entry
   is a sum of squares, so the intercept's variance does not suffer the cancellation of forming
   T⁻¹(Z'Z)⁻¹T⁻ᵀ term by term.

Fit measures follow the usual definitions (Greene, Econometric Analysis, 8th ed., §3.5, §14.9):
R² = 1 - SSR/SST with SST centred at the (weighted) mean (the sum of squares of the y column of
R below the intercept row); adjusted R² = 1 - (n-1)/(n-k)·(1-R²); sigma² = SSR/(n-k); Gaussian
log-likelihood -n/2·(ln 2π + ln(SSR/n) + 1) + ½·Σ ln wᵢ.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as sla

from core.errors import DataError
from core.model import engine

# Condition number (centred, unit-length columns) above which results are flagged as nearly
# collinear (core.analysis words the warning).
NEAR_COLLINEAR = 1e3
# Largest condition number solved by the normal equations; above it the tall-skinny QR is used.
NORMAL_EQUATIONS_MAX_CONDITION = 1e2
# Smallest singular value of the centred design with unit-length columns, relative to the
# largest, at or below which the design is taken to have lower rank: collinear up to rounding.
# Centring and unit lengths make the test blind to the columns' offsets and units; rounding a
# column to double precision moves it by about u = 1.1e-16 of its length, and exact
# collinearities (a dummy for every level, log(100·p) beside log(p), x1 + x2 beside both) give
# 1e-16 to 5e-15 from 100 to 1,000,000 rows (tests/test_fit_engine.py). 1000u = 2.2e-13 keeps a
# margin of 40 above those and fits NIST's Filip polynomial (1 / 3.8e9 = 2.6e-10).
_EPS = float(np.finfo(float).eps)
_OVERFLOW = "the fit overflowed: some values are too large to work with; rescale the data (e.g. thousands instead of units)."
RANK_TOLERANCE = 1000 * _EPS
# Condition number above which the refinement forms residuals in extended precision.
EXTENDED_REFINEMENT = NEAR_COLLINEAR
# Condition number above which a fit carries a warning that rounding limits its digits.
PRECISION_WARNING = 1e10
# Most refinement passes after the first residual pass.
MAX_REFINEMENTS = 4
# Rows per chunk in the passes of other modules (covariance meats, diagnostics): 65,536 x 13
# columns is about 7 MB, never a second full copy of X.
CHUNK_ROWS = 65_536


@dataclass
class OLSFit:
    coef: np.ndarray
    resid: np.ndarray  # y - Xb, unweighted
    fitted: np.ndarray  # Xb
    xtx_inv: np.ndarray  # (X'WX)^{-1} in the original parameterisation
    n: int
    k: int
    ssr: float  # weighted sum of squared residuals
    r2: float
    adj_r2: float
    sigma: float
    loglik: float
    condition_number: float
    weights: np.ndarray | None
    # "normal equations" or "tall-skinny QR", and how many refinement steps were taken.
    solver: str = "normal equations"
    refinements: int = 0
    # Warnings about the numerics of this fit, for the user (analysis words the collinearity one).
    warnings: list[str] = field(default_factory=list)
    # Σ (wᵢeᵢ)² xᵢxᵢ' (the HC0/HC1 meat), formed in the last residual pass when asked for.
    score_gram: np.ndarray | None = None
    # Parameters of fixed effects absorbed before the fit (core.model.absorb), beyond the k.
    absorbed: int = 0

    @property
    def df_resid(self) -> int:
        return self.n - self.k - self.absorbed


def row_chunks(n: int, size: int | None = None) -> range:
    """Start rows of the chunks that passes over the data work on (``CHUNK_ROWS`` rows each)."""
    return range(0, n, size or CHUNK_ROWS)


def fit_ols(
    X: np.ndarray,
    y: np.ndarray,
    weights: np.ndarray | None = None,
    names: list[str] | None = None,
    score_gram: bool = False,
) -> OLSFit:
    """Least squares of y on X (first column the intercept), optionally weighted (see the module
    docstring for the method). X is read in row blocks and never copied whole; Fortran order
    suits it best. Raises ``DataError`` naming the columns when the design is rank deficient.
    With ``score_gram`` the last residual pass also sums the HC0/HC1 meat (``OLSFit.score_gram``;
    None on designs refined in extended precision)."""
    # Every BLAS/LAPACK call here is on k x k matrices or inside the passes' own threads: BLAS's
    # threads would only contend with them (engine.single_threaded_blas).
    with engine.single_threaded_blas:
        return _fit(X, y, weights, names, score_gram)


def _fit(X: np.ndarray, y: np.ndarray, weights: np.ndarray | None, names: list[str] | None, scores: bool) -> OLSFit:
    n, k = X.shape
    shift = engine.shift_for(X, y, weights)
    gram = engine.gram_pass(shift)
    if not np.all(np.isfinite(gram)):
        raise _overflow_error(shift, names)

    R, q, rho, kappa = _normal_equations_factor(gram, k)
    solver = "normal equations"
    if R is None or kappa > NORMAL_EQUATIONS_MAX_CONDITION:
        solver = "tall-skinny QR"
        full = engine.tsqr_pass(shift)
        R, q, rho = full[:k, :k], full[:k, k], float(abs(full[k, k]))
        singular, right = _singular(R, k)
        kappa = _screen(singular, right, names, shift)

    gamma = sla.solve_triangular(R, q, check_finite=False)
    beta = _original(gamma, shift)
    if not np.all(np.isfinite(beta)):
        raise _overflow_error(shift, names)

    # Sizes for the refinement test, in units of each column's length (‖Dγ‖). Forming a
    # residual rounds at the size of y (y - c_y - Zγ in working precision), so steps below a few
    # units of ‖sqrt(w)·y‖ + ‖Dγ‖ are rounding noise; ‖sqrt(w)·y‖² comes from the Gram matrix.
    lengths = np.sqrt(np.einsum("ij,ij->j", R, R))
    y_length = float(np.sqrt(max(gram[k, k] + 2 * shift.c_y * gram[0, k] + shift.c_y**2 * gram[0, 0], 0.0)))
    resid = np.empty(n)
    fitted = np.empty(n)
    # Extended-precision residuals only where they pay: on designs flagged as nearly collinear.
    extended = solver != "normal equations" and kappa > EXTENDED_REFINEMENT
    refinements = 0
    previous = np.inf
    while True:
        residuals = engine.residual_pass(shift, gamma, beta, resid, extended, fitted, scores)
        grad, ssr = residuals.grad, residuals.ssr
        step = sla.cho_solve((R, False), grad, check_finite=False)
        size = float(np.linalg.norm(lengths * step))
        scale = float(np.linalg.norm(lengths * gamma)) + y_length
        # Stop at rounding noise, or when the steps no longer contract (the iteration contracts
        # by about κ²u per step on the normal equations, κu on the QR factor).
        done = size <= 4 * _EPS * scale or size > 0.5 * previous
        if done or refinements == MAX_REFINEMENTS or not np.isfinite(size):
            break
        previous = size
        refinements += 1
        if extended:
            beta = beta + _original_step(step, shift)
            gamma = _shifted(beta, shift)
        else:
            gamma = gamma + step
            beta = _original(gamma, shift)

    # (X'WX)^{-1} = M'M with M = R^{-T} T^{-T} (module docstring, step 5).
    t_inv_t = np.eye(k)
    t_inv_t[1:, 0] = -shift.c[1:]
    m = sla.solve_triangular(R, t_inv_t, trans="T", check_finite=False)
    xtx_inv = m.T @ m
    _check_range(gram, xtx_inv, shift, names)

    sst = float(q[1:] @ q[1:]) + rho * rho
    r2 = 1.0 - ssr / sst if sst > 0 else float("nan")
    adj_r2 = 1.0 - (n - 1) / (n - k) * (1.0 - r2)
    sigma = float(np.sqrt(ssr / (n - k)))
    log_w = 0.5 * float(np.log(weights).sum()) if weights is not None else 0.0
    loglik = -0.5 * n * (np.log(2 * np.pi) + np.log(ssr / n) + 1.0) + log_w
    notes = []
    if kappa > PRECISION_WARNING:
        digits = max(0, int(np.floor(-np.log10(kappa * _EPS))))
        notes.append(
            f"the design is so close to collinear (condition number {kappa:.2g}) that rounding error limits the "
            f"coefficients to about {digits} reliable significant digits."
        )
    return OLSFit(
        coef=beta,
        resid=resid,
        fitted=fitted,
        xtx_inv=xtx_inv,
        n=n,
        k=k,
        ssr=ssr,
        r2=r2,
        adj_r2=adj_r2,
        sigma=sigma,
        loglik=float(loglik),
        condition_number=kappa,
        weights=weights,
        solver=solver,
        refinements=refinements,
        warnings=notes,
        score_gram=residuals.score_gram,
    )


def _normal_equations_factor(gram: np.ndarray, k: int) -> tuple[np.ndarray | None, np.ndarray, float, float]:
    """Cholesky factor R of Z'Z (from the augmented Gram matrix), R⁻ᵀZ'ỹ, the residual norm and κ;
    R is None when Z'Z is not numerically positive definite."""
    zz = gram[:k, :k]
    length = np.sqrt(np.diag(zz))
    if not np.all(length > 0):
        return None, np.zeros(k), 0.0, np.inf
    # Cholesky of the equilibrated matrix, then undone: R = chol(D⁻¹Z'ZD⁻¹)·D.
    try:
        unit = sla.cholesky(zz / length[:, None] / length[None, :], lower=False, check_finite=False)
    except np.linalg.LinAlgError:
        return None, np.zeros(k), 0.0, np.inf
    R = unit * length[None, :]
    if not np.all(np.isfinite(R)) or np.any(np.diag(R) <= 0):
        return None, np.zeros(k), 0.0, np.inf
    q = sla.solve_triangular(R, gram[:k, k], trans="T", check_finite=False)
    rho = float(np.sqrt(max(gram[k, k] - q @ q, 0.0)))
    singular, _ = _singular(R, k)
    kappa = float(singular[0] / singular[-1]) if singular[-1] > 0 else np.inf
    return R, q, rho, kappa


def _singular(R: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Singular values (descending) and right singular vectors (rows) of the centred design with
    unit-length columns, from R₂₂ (intercept-only model: one singular value 1)."""
    if k == 1:
        return np.ones(1), np.ones((1, 1))
    block = R[1:, 1:]
    length = np.sqrt(np.einsum("ij,ij->j", block, block))
    length[length == 0] = 1.0  # a column equal to its shift: a zero singular value
    _, singular, right = np.linalg.svd(block / length[None, :])
    return singular, right


def _screen(singular: np.ndarray, right: np.ndarray, names: list[str] | None, shift: engine.Shift | None = None) -> float:
    """The condition number, or a DataError naming the columns when the rank is below k (or,
    when a column only looks constant because its values are below double precision's range,
    naming that column)."""
    top = float(singular[0])
    null = singular <= RANK_TOLERANCE * top
    if not null.any():
        return top / float(singular[-1])
    involved: set[int] = set()
    for vector in right[null]:
        involved.update(int(j) + 1 for j in np.flatnonzero(np.abs(vector) > 0.1))
    labels = [names[i] if names else f"column {i}" for i in sorted(involved)]
    tiny = _tiny_columns(shift, sorted(involved)) if shift is not None else {}
    if tiny:
        raise DataError(_tiny_message([names[i] if names else f"column {i}" for i in tiny], max(tiny.values())))
    rank = len(singular) - int(null.sum()) + 1
    raise DataError(
        f"these regressors are collinear: {', '.join(labels)}. One of them is a combination of the others "
        f"(with the intercept) up to rounding error, so the model's {len(singular) + 1} coefficients cannot all "
        f"be estimated (the design has rank {rank}). Remove one of them, or for categories pick a different set of levels."
    )


# Double precision's range for a column's sum of squares (Gram matrix entries): a column whose
# deviations have a length below SMALLEST_LENGTH squares to below 1e-300, among the subnormal
# numbers near the smallest normal double (2.2e-308) where digits run out and lengths round to
# zero, so it looks constant; one past LARGEST_LENGTH squares past the largest double
# (1.8e308). Both are refused naming the column, with a rescaling to try.
SMALLEST_LENGTH = 1e-150
LARGEST_LENGTH = 1e154


def _length(z: np.ndarray) -> tuple[float, float]:
    """The Euclidean length of z and its largest absolute value, without squaring z itself."""
    z = z[np.isfinite(z)]
    largest = float(np.max(np.abs(z))) if len(z) else 0.0
    if not 0 < largest < np.inf:
        return largest, largest
    return largest * float(np.linalg.norm(z / largest)), largest


def _tiny_columns(shift: engine.Shift, columns: list[int]) -> dict[int, float]:
    """The columns among ``columns`` that vary, but by so little their squares vanish: index ->
    their largest deviation from the mean."""
    out = {}
    for j in columns:
        x = shift.X[:, j]
        z = (x - np.mean(x)) * (1.0 if shift.root_w is None else shift.root_w)
        length, largest = _length(z)
        if 0 < largest and length < SMALLEST_LENGTH:
            out[j] = float(np.max(np.abs(x - np.mean(x))))
    return out


def _tiny_message(labels: list[str], largest: float) -> str:
    it, them = ("it", "its") if len(labels) == 1 else ("they", "their")
    return (
        f"the values of {', '.join(labels)} vary too little to work with in double precision (they differ from "
        f"{them} mean by at most {largest:.1e}): squared, they fall below the smallest number a computer's floating "
        f"point holds (about 2.2e-308), so {it} {'looks' if it == 'it' else 'look'} constant. Rescale by a power of ten "
        "(for example units instead of millionths) and fit again."
    )


def _check_range(gram: np.ndarray, xtx_inv: np.ndarray, shift: engine.Shift, names: list[str] | None) -> None:
    """Refuse a fit whose numbers left double precision's range though the solve went through: a
    regressor so tiny its coefficient's variance overflows, or an outcome so tiny its residuals
    square to zero (every standard error would read 0)."""
    k = shift.k
    lost = [j for j in range(1, k) if not np.isfinite(xtx_inv[j, j])]
    if lost:
        x = [shift.X[:, j] - np.mean(shift.X[:, j]) for j in lost]
        raise DataError(_tiny_message([names[j] if names else f"column {j}" for j in lost], max(_length(v)[1] for v in x)))
    if gram[k, k] < SMALLEST_LENGTH**2:
        root_w = 1.0 if shift.root_w is None else shift.root_w
        length, _ = _length((shift.y - np.mean(shift.y)) * root_w)
        if 0 < length < SMALLEST_LENGTH:
            raise DataError(_tiny_message(["the outcome"], _length(shift.y - np.mean(shift.y))[1]))


def _overflow_error(shift: engine.Shift, names: list[str] | None) -> DataError:
    """The fit overflowed: a DataError naming the columns (regressors, the outcome, the weights)
    whose sums of squares pass double precision's range, else the general message."""
    labels, largest = [], 0.0
    for j in range(shift.k + 1):
        x = shift.y - shift.c_y if j == shift.k else shift.X[:, j] - shift.c[j]
        length, _ = _length(x * (1.0 if shift.root_w is None else shift.root_w))
        if length > LARGEST_LENGTH or not np.isfinite(length):
            raw = shift.y if j == shift.k else shift.X[:, j] if j or shift.w is None else shift.w
            labels.append("the outcome" if j == shift.k else "the weights" if j == 0 else names[j] if names else f"column {j}")
            largest = max(largest, _length(raw)[1])
    if not labels:
        return DataError(_OVERFLOW)
    return DataError(
        f"the values of {', '.join(labels)} are too large to work with in double precision (up to about {largest:.1e}): "
        "their sums of squares pass the largest number a computer's floating point holds (about 1.8e308). Rescale by a "
        "power of ten (for example millions instead of units) and fit again."
    )


def _original(gamma: np.ndarray, shift: engine.Shift) -> np.ndarray:
    """β from γ: β₀ = γ₀ + c_y - c'γ₂, β₂ = γ₂."""
    beta = gamma.copy()
    beta[0] = gamma[0] + shift.c_y - float(shift.c[1:] @ gamma[1:])
    return beta


def _original_step(step: np.ndarray, shift: engine.Shift) -> np.ndarray:
    """δβ from δγ (the shift of y drops out of a difference)."""
    out = step.copy()
    out[0] = step[0] - float(shift.c[1:] @ step[1:])
    return out


def _shifted(beta: np.ndarray, shift: engine.Shift) -> np.ndarray:
    """γ from β (the inverse of ``_original``)."""
    gamma = beta.copy()
    gamma[0] = beta[0] - shift.c_y + float(shift.c[1:] @ beta[1:])
    return gamma
