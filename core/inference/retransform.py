"""Back to the original scale: retransformation, comparable fit measures, Box-Cox, prediction.

- Smearing (Duan 1983, JASA 78): E[y | x] ≈ S(η) = (1/n)·Σᵢ g⁻¹(η + êᵢ); for log y this is
  exp(η)·mean(exp(êᵢ)).
- Normal theory: E[y | x] = E[g⁻¹(η + ε)], ε ~ N(0, σ²); for log y, exp(η + σ²/2) (the
  lognormal mean); otherwise by 40-point Gauss-Hermite quadrature (Abramowitz & Stegun 25.4.46).
- Retransform factors: mean over rows of the retransformed mean divided by the mean of the
  naive g⁻¹(η̂ᵢ); for log y exactly mean(exp(ê)) and exp(σ²/2).
- Original-scale log-likelihood: ℓ_g + Σ ln|g'(yᵢ)| (Box & Cox 1964, eq. 7), AIC = -2ℓ + 2k,
  BIC = -2ℓ + k·ln n, k the number of coefficients (docs/contract.md §3).
- r2_original_scale: squared correlation of y and the smearing prediction (docs/contract.md §3).
- Box-Cox profile (Box & Cox 1964, §3): with u = y / ẏ (ẏ the geometric mean),
  ℓ(λ) = -n/2·ln(ẏ²·SSR(λ)/n), SSR(λ) the residual sum of squares of (u^λ - 1)/λ on X; λ̂
  maximises it and the 95 % interval is {λ : 2(ℓ(λ̂) - ℓ(λ)) ≤ χ²₁(0.95)}.
- Prediction interval for a new y: the t interval of g(y), η̂ ± t·sqrt(s² + se(η̂)²), carried
  through the monotone g⁻¹ (quantiles are preserved by monotone maps; Wooldridge, Introductory
  Econometrics, 7th ed., §6.4).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import scipy.linalg as sla
from scipy import optimize, stats

from core.errors import DataError
from core.inference.diagnostics import sample_rows
from core.model import engine
from core.model.design import match_level, unknown_level
from core.model.fitted import Model
from core.model.transforms import Transform

_HERMITE_X, _HERMITE_W = np.polynomial.hermite.hermgauss(40)
# Above this many (rows x residuals), smearing for every row is evaluated on an index grid and
# interpolated, with residual quantiles standing in for the residuals (error far below 1e-6).
_DIRECT_LIMIT = 20_000_000
_GRID = 2048
_QUANTILES = 2000


def normal_mean(outcome: Transform, eta: np.ndarray, sigma: float) -> np.ndarray:
    """E[g⁻¹(η + ε)] with ε ~ N(0, σ²)."""
    eta = np.asarray(eta, dtype=float)
    if outcome.code == "level":
        return eta
    if outcome.is_log_like:
        return np.exp(eta + 0.5 * sigma**2)
    nodes = eta[..., None] + np.sqrt(2.0) * sigma * _HERMITE_X
    return (outcome.inverse(nodes) * _HERMITE_W).sum(axis=-1) / np.sqrt(np.pi)


def smear_rows(model: Model, eta: np.ndarray) -> np.ndarray:
    """The smearing estimate S(η) for many index values at once."""
    if model.kind == "level":
        return np.asarray(eta, dtype=float)
    if model.kind == "log":
        return np.exp(eta) * float(np.mean(np.exp(model.resid)))
    if len(eta) * len(model.resid) <= _DIRECT_LIMIT:
        return model.smear(eta)[0]
    resid = np.quantile(model.resid, (np.arange(_QUANTILES) + 0.5) / _QUANTILES)
    grid = np.linspace(float(np.min(eta)), float(np.max(eta)), _GRID)
    return np.interp(eta, grid, model.smear(grid, resid)[0])


def fit_on_original_scale(
    model: Model, y_raw: np.ndarray, fitted: np.ndarray, loglik: float, k: int, y: np.ndarray | None = None
) -> dict[str, Any]:
    """Measures comparable across outcome transforms, and the retransform factors.

    ``y`` is the outcome on the model's scale, g(y), when the caller has it (the log outcome's
    Jacobian is then read off it). For a log outcome the smearing prediction is exp(η̂)·mean(exp(ê)),
    a constant multiple of exp(η̂), so its correlation with y is that of exp(η̂): each of the two
    exponentials is taken once over the rows."""
    n = len(y_raw)
    with np.errstate(all="ignore"):
        if model.kind == "log":
            # Every million-row reduction as one of five independent jobs on the row passes' threads.
            naive_rows, smear_factor, centred, jacobian, squares = engine.each_column(
                [
                    lambda: _centred(np.exp(fitted), own=True),
                    lambda: float(np.mean(np.exp(model.resid))),
                    lambda: _centred(y_raw),
                    lambda: model.outcome.log_jacobian_sum(y_raw, y),
                    lambda: float(np.dot(model.resid, model.resid)),
                ],
                n,
            )
            r2 = _squared_correlation(centred, naive_rows)
        else:
            smeared = smear_rows(model, fitted)
            smeared_mean = float(smeared.mean())
            r2 = _squared_correlation(_centred(y_raw), _centred(smeared))
            jacobian = model.outcome.log_jacobian_sum(y_raw, y)
            squares = float(np.dot(model.resid, model.resid))
        ll = loglik + jacobian
    measures = {
        "r2_original_scale": r2,
        "loglik_original_scale": ll,
        "aic_original_scale": -2.0 * ll + 2.0 * k,
        "bic_original_scale": -2.0 * ll + np.log(n) * k,
    }
    if model.kind == "level":
        return {**measures, "retransform": None}
    sigma = float(np.sqrt(squares / (n - k)))
    if model.kind == "log":
        factors = {"smearing": smear_factor, "normal": float(np.exp(0.5 * sigma**2))}
    else:
        naive = float(np.mean(model.outcome.inverse(fitted)))
        # numpy division: a naive mean of 0 (an outcome on a 1e-300 scale) gives inf, shown as null.
        factors = {
            "smearing": float(np.divide(smeared_mean, naive)),
            "normal": float(np.divide(np.mean(normal_mean(model.outcome, fitted, sigma)), naive)),
        }
    return {**measures, "retransform": factors}


def _centred(a: np.ndarray, own: bool = False) -> tuple[np.ndarray, float]:
    """``a`` centred at its mean (in place when it is the caller's ``own`` array, else a new
    one), and its sum of squares."""
    if own:
        a -= a.mean()
    else:
        a = a - a.mean()
    return a, float(np.dot(a, a))


def _squared_correlation(a: tuple[np.ndarray, float], b: tuple[np.ndarray, float]) -> float:
    """corr(a, b)² as numpy.corrcoef gives it, for two columns centred by ``_centred``, without
    stacking copies of them."""
    (a, a_squares), (b, b_squares) = a, b
    if not b_squares > 0:
        return float("nan")
    return float(np.clip(float(np.dot(a, b)) / np.sqrt(a_squares) / np.sqrt(b_squares), -1.0, 1.0) ** 2)


def _orthonormal_basis(X: np.ndarray, root: np.ndarray | None) -> np.ndarray:
    """Q (n x k, Fortran order) with orthonormal columns spanning the rows sqrt(w)·x.

    CholeskyQR2 (Fukaya, Nakatsukasa, Yanagisawa & Yamamoto 2014, "CholeskyQR2: a simple and
    communication-avoiding algorithm for computing a tall-skinny QR factorization", ScalA):
    Q₁ = Z·R₁⁻¹ with R₁'R₁ = Z'Z, then once more on Q₁, which leaves Q orthonormal to rounding
    error for any Z with condition number below about 1e7. Z is sqrt(w)·[1, x - x̄], the same
    span as the design with the columns shifted by their means (better conditioned). The fit
    refuses only designs collinear up to rounding (``core.model.ols.RANK_TOLERANCE``) and fits
    ill-conditioned ones, so Z may be beyond that bound: then Householder QR stands in (as it
    does whenever Q is not orthonormal).
    """
    n, k = X.shape
    Q = np.empty((n, k), order="F")
    Q[:, 0] = 1.0
    if k > 1:
        np.subtract(X[:, 1:], X[:, 1:].mean(axis=0), out=Q[:, 1:])
    if root is not None:
        Q *= root[:, None]
    try:
        for _ in range(2):
            R = sla.cholesky(Q.T @ Q, lower=False)
            Q = sla.blas.dtrsm(1.0, R, Q, side=1, lower=0, overwrite_b=1)
        # The second factor near I means Q₁ was already orthonormal to about 1e-6, and then
        # Q = Q₁·R₂⁻¹ is orthonormal to rounding error.
        if np.max(np.abs(R - np.eye(k))) <= 1e-6:
            return Q
    except (np.linalg.LinAlgError, ValueError):
        pass
    return np.linalg.qr(X * root[:, None] if root is not None else X)[0]


def _slope_series(z: np.ndarray) -> np.ndarray:
    """(z·eᶻ - eᶻ + 1)/z² = Σ_{j≥2} (j-1)·z^{j-2}/j!, for |z| < 1e-3 (six terms: error < 1e-18)."""
    return 0.5 + z * (1.0 / 3.0 + z * (1.0 / 8.0 + z * (1.0 / 30.0 + z * (1.0 / 144.0 + z / 840.0))))


# Above this many rows the profile is that of a seeded random sample of them: λ̂ then moves by
# about its own standard error (a few thousandths at this size), the interval is the sample's
# (wider, on the safe side), and the work is a fifth of a million rows'.
BOXCOX_SAMPLE_ROWS = 200_000
BOXCOX_SAMPLE_NOTE = "The Box-Cox profile used a random {m:,} of the {n:,} rows; its interval is that sample's."


def boxcox_profile(y_raw: np.ndarray, X: np.ndarray, weights: np.ndarray | None = None) -> dict[str, Any] | None:
    """Profile likelihood of the Box-Cox λ for y given X; None when y has values <= 0.

    Work at a million rows: an orthonormal basis Q of the (weighted) design is formed once
    (``_orthonormal_basis``), so SSR(λ) = ‖v - QQ'v‖² costs two products with Q per λ. λ̂ is
    first bracketed by Brent's method on ℓ (as the profile is flat at its top, ℓ alone fixes λ̂
    only to about the square root of the rounding error), then refined as the root of
    dSSR/dλ = 2·r'(dv/dλ) with r = v - QQ'v and dv/dλ = (a·e^{λa} - v)/λ, a = ln u, v the
    transformed u (Brent's root finder to full precision). The interval bounds are roots of
    ℓ(λ̂) - ℓ(λ) - χ²₁(0.95)/2, searched outwards from λ̂ in steps of 0.25 as before (the first
    bracket narrowed around the crossing a parabola predicts); the 81 points of the profile
    chart are evaluated together, a chunk of rows at a time. Above ``BOXCOX_SAMPLE_ROWS`` rows
    the profile is that of a seeded random sample of them, and ``rows_used`` and ``note`` say so.
    """
    y_raw = np.asarray(y_raw, dtype=float)
    if np.any(y_raw <= 0):
        return None
    y_raw, X, weights, note = _boxcox_rows(y_raw, X, weights)
    n = len(y_raw)
    log_y = np.log(y_raw)
    mean_log = float(log_y.mean())
    log_u = log_y - mean_log  # ln(y / geometric mean)
    root = np.sqrt(weights) if weights is not None else None
    q = _orthonormal_basis(X, root)

    def transformed(lam: float) -> np.ndarray:
        v = log_u if abs(lam) < 1e-12 else np.expm1(lam * log_u) / lam
        return v * root if root is not None else v

    def loglik(ssr: Any) -> Any:
        return -0.5 * n * (np.log(np.maximum(ssr, np.finfo(float).tiny) / n) + 2.0 * mean_log)

    def residual(v: np.ndarray) -> np.ndarray:
        return v - q @ (q.T @ v)

    def profile(lam: float) -> float:
        # SSR as ‖v - QQ'v‖², summed pairwise: an error in Q'v moves it only to second order.
        r = residual(transformed(lam))
        return float(loglik(float(np.add.reduce(r * r))))

    def slope(lam: float) -> float:
        """dSSR/dλ (its sign: SSR falls below λ̂ and rises above it)."""
        v = transformed(lam)
        r = residual(v)
        z = lam * log_u
        small = np.abs(z) < 1e-3
        with np.errstate(divide="ignore", invalid="ignore"):
            direct = (log_u * np.exp(z) - (np.expm1(z) / lam if lam != 0 else log_u)) / lam
        dv = np.where(small, log_u * log_u * _slope_series(z), direct)
        if root is not None:
            dv = dv * root
        return 2.0 * float(r @ dv)

    try:
        best = optimize.minimize_scalar(lambda lam: -profile(lam), bracket=(-2.0, 2.0), tol=1e-5)
    except (ValueError, RuntimeError):  # a profile without a maximum in reach (degenerate data)
        return None
    lam_hat = float(best.x)
    if not -10 < lam_hat < 10 or not math.isfinite(profile(lam_hat)):
        return None
    step = 2e-5 * (1.0 + abs(lam_hat))
    for _ in range(12):
        low_slope, high_slope = slope(lam_hat - step), slope(lam_hat + step)
        if low_slope < 0 < high_slope:
            lam_hat = float(optimize.brentq(slope, lam_hat - step, lam_hat + step, xtol=1e-15, rtol=1e-15))
            break
        if low_slope > 0 and high_slope > 0 or low_slope < 0 and high_slope < 0:
            step *= 8.0
        else:
            break
    top = profile(lam_hat)
    drop = 0.5 * float(stats.chi2.ppf(0.95, 1))

    def excess(lam: float) -> float:
        return top - profile(lam) - drop

    def bound(direction: float) -> float | None:
        step, edge = 0.25, lam_hat
        for _ in range(80):
            nxt = edge + direction * step
            fall = top - profile(nxt)
            if fall > drop:
                if edge == lam_hat:
                    # A parabola through the top and this point puts the crossing near
                    # step·sqrt(drop/fall); bracketing that closely saves most root-finding steps.
                    near = step * math.sqrt(drop / fall)
                    inner, outer = lam_hat + direction * 0.8 * near, lam_hat + direction * 1.25 * near
                    if excess(inner) < 0 < excess(outer):
                        edge, nxt = inner, outer
                return float(optimize.brentq(excess, min(edge, nxt), max(edge, nxt), xtol=1e-12))
            edge = nxt
        return None

    low, high = bound(-1.0), bound(1.0)
    lo_grid = min(-1.0, (low if low is not None else lam_hat) - 0.5)
    hi_grid = max(2.0, (high if high is not None else lam_hat) + 0.5)
    grid = np.linspace(lo_grid, hi_grid, 81)
    return {
        "lambda": lam_hat,
        "ci_low": low,
        "ci_high": high,
        **{"rows_used": n, "note": note},
        "loglik_max": top,
        "profile": {"lambda": grid.tolist(), "loglik": loglik(_ssr_many(grid, log_u, root, q)).tolist()},
    }


def _boxcox_rows(
    y_raw: np.ndarray, X: np.ndarray, weights: np.ndarray | None
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None, str | None]:
    """The rows the profile uses, all of them or a seeded sample of ``BOXCOX_SAMPLE_ROWS``, and
    the note that says so (None for all)."""
    n = len(y_raw)
    if n <= BOXCOX_SAMPLE_ROWS:
        return y_raw, X, weights, None
    rows = sample_rows(n, BOXCOX_SAMPLE_ROWS)
    note = BOXCOX_SAMPLE_NOTE.format(m=BOXCOX_SAMPLE_ROWS, n=n)
    return y_raw[rows], X[rows], None if weights is None else weights[rows], note


def _ssr_many(lams: np.ndarray, log_u: np.ndarray, root: np.ndarray | None, q: np.ndarray) -> np.ndarray:
    """SSR(λ) = ‖v‖² - ‖Q'v‖² for many λ in one pass over the rows (matrix products per chunk).
    Away from λ = 0 the transform uses exp(λa) - 1 (error a few units in the last place of
    e^{λa}, below 1e-14 of v); near 0 expm1."""
    n = len(log_u)
    rows = max(1024, (1 << 20) // len(lams))
    squares = np.zeros(len(lams))
    projected = np.zeros((q.shape[1], len(lams)))
    for start in range(0, n, rows):
        a = log_u[start : start + rows]
        v = np.empty((len(a), len(lams)), order="F")
        for j, lam in enumerate(lams):
            if abs(lam) < 1e-12:
                v[:, j] = a
            elif abs(lam) < 0.05:
                np.divide(np.expm1(lam * a), lam, out=v[:, j])
            else:
                column = v[:, j]
                np.multiply(a, lam, out=column)
                np.exp(column, out=column)
                column -= 1.0
                column /= lam
        if root is not None:
            v *= root[start : start + rows, None]
        squares += np.einsum("ij,ij->j", v, v)
        projected += q[start : start + rows].T @ v
    return squares - np.einsum("ij,ij->j", projected, projected)


def _levels_named(design: Any, given: dict[str, Any]) -> dict[str, Any]:
    """The prediction point with each category value as the level it names; a value naming no
    level of the fitted model is an error listing the levels (never the reference level in
    silence)."""
    out = dict(given)
    for block in design.encoder.blocks:
        column = block.spec.column
        if block.is_category and column in given:
            known = [block.reference_level, *block.levels]
            matched = match_level(given[column], known)
            if matched is None:
                raise DataError(unknown_level("spec.predict", given[column], column, known, " in the rows used"))
            out[column] = matched
    return out


# The values of a prediction (docs/contract.md §3.11) in words, for the warning when some of
# them cannot be computed.
PREDICTION_VALUES = {
    "index": "the index",
    "naive": "the predicted outcome",
    "normal": "the predicted outcome",
    "smearing": "the predicted outcome",
    "mean_ci_low": "its intervals",
    "mean_ci_high": "its intervals",
    "interval_low": "its intervals",
    "interval_high": "its intervals",
}


def prediction_warning(number: int, given: dict[str, Any], entry: dict[str, Any]) -> str | None:
    """The warning for a prediction some of whose values overflow (or are undefined) on the
    original scale: they become null in the result (docs/contract.md §1), and this says why."""
    empty = [PREDICTION_VALUES[k] for k in PREDICTION_VALUES if entry.get(k) is not None and not math.isfinite(entry[k])]
    if not empty:
        return None
    at = ", ".join(f"{c} = {v:.6g}" if isinstance(v, float) else f"{c} = {v}" for c, v in given.items())
    return (
        f"prediction {number} ({at}): {' and '.join(dict.fromkeys(empty))} cannot be computed: on the original scale "
        "they are too large for floating-point numbers or outside what the outcome's transform maps back to, so they are "
        "shown empty. Check the values given for this prediction."
    )


def predict(
    model: Model, points: list[dict[str, Any]], sigma: float, confidence: float = 0.95, warnings: list[str] | None = None
) -> list[dict[str, Any]]:
    """Outcome on the original scale for user-given regressor values (others at the reference);
    a value that overflows is left for null and warned about in ``warnings``."""
    design = model.design
    t = float(stats.t.ppf(0.5 + confidence / 2, model.df))
    out = []
    for given in points:
        point = dict(design.reference, **_levels_named(design, given))
        X = model.encode(point, 1)
        eta = float((X @ model.coef)[0])
        se = float(np.sqrt(max(float(X[0] @ model.cov @ X[0]), 0.0)))
        spread = np.sqrt(sigma**2 + se**2)
        outside = []
        for block in design.encoder.blocks:
            column = block.spec.column
            if block.is_category or column not in given:
                continue
            x = design.values[column]
            if not float(np.min(x)) <= float(point[column]) <= float(np.max(x)):
                outside.append(column)
        g_inv = model.outcome.inverse
        out.append(
            {
                "values": point,
                "index": eta,
                "naive": float(g_inv(np.array([eta]))[0]),
                "normal": float(normal_mean(model.outcome, np.array([eta]), sigma)[0]),
                "smearing": float(smear_rows(model, np.array([eta]))[0]),
                "mean_ci_low": float(smear_rows(model, np.array([eta - t * se]))[0]),
                "mean_ci_high": float(smear_rows(model, np.array([eta + t * se]))[0]),
                # PPML models the mean only (sigma 0 here): no interval for a new observation.
                "interval_low": float(g_inv(np.array([eta - t * spread]))[0]) if sigma > 0 else None,
                "interval_high": float(g_inv(np.array([eta + t * spread]))[0]) if sigma > 0 else None,
                "outside_observed_range": outside,
            }
        )
        problem = prediction_warning(len(out), given, out[-1])
        if problem and warnings is not None:
            warnings.append(problem)
    return out
