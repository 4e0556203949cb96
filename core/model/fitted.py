"""The fitted model: design, coefficients, their covariance and residuals, as every later step
(effects, curves, retransformation, predictions) sees it; and the one function that fits it.

For PPML the least-squares record carries the Poisson estimates (residuals y - μ̂, fitted values
the index x'b, r2 the squared correlation of y and μ̂), and the model is seen by the effect engine
as a log-link mean with no residual spread, so effects need no special case.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from core.errors import DataError
from core.model.absorb import Absorbed
from core.model.covariance import COVARIANCE_KINDS, covariance, sandwich
from core.model.design import ColumnCache, Design, build_design, match_level, unknown_level
from core.model.ols import OLSFit, fit_ols
from core.model.ppml import fit_ppml
from core.model.spec import ModelSpec
from core.model.transforms import Log, Transform

# Cap on the (rows x residuals) grid evaluated at once when smearing, to bound memory.
_SMEAR_CHUNK = 4_000_000


@functools.lru_cache(maxsize=256)
def t_quantile(probability: float, df: float) -> float:
    """Student's t quantile. Kept: every effect and interval reads one, scipy's costs 0.15 ms a
    call, and the many models of a sweep share a few degrees of freedom."""
    return float(stats.t.ppf(probability, df))


@dataclass
class Model:
    """A fitted model as the effect engine sees it."""

    design: Design
    coef: np.ndarray
    cov: np.ndarray
    df: int
    outcome: Transform
    resid: np.ndarray
    confidence: float = 0.95
    time_series: dict[str, Any] | None = None  # lags and periods of the HAC / Driscoll-Kraay errors
    # The reference point's design row, and the reference it encodes (``encode``).
    _reference_row: np.ndarray | None = field(default=None, init=False, repr=False, compare=False)
    _reference_for: dict[str, Any] | None = field(default=None, init=False, repr=False, compare=False)

    @property
    def kind(self) -> str:
        """'level', 'log' (closed forms) or 'smearing' (any other outcome transform)."""
        if self.outcome.code == "level":
            return "level"
        if self.outcome.is_log_like:
            return "log"
        return "smearing"

    @property
    def units(self) -> str:
        return "outcome" if self.kind == "level" else "percent"

    @property
    def t_crit(self) -> float:
        return t_quantile(0.5 + self.confidence / 2, self.df)

    def encode(self, point: dict[str, Any], m: int) -> np.ndarray:
        """Design rows for m points. A point that is the reference point with a few regressors
        changed (every effect, curve and prediction) starts from the reference row, encoded once,
        and re-encodes only those: with hundreds of regressors the effects and curves would
        otherwise encode every block for every regressor."""
        encoder, reference = self.design.encoder, self.design.reference
        if not all(block.spec.column in point for block in encoder.blocks):
            return encoder.encode(point, m)  # the encoder names the missing column
        changed = [b for b in encoder.blocks if not _same_value(point[b.spec.column], reference.get(b.spec.column))]
        if 4 * len(changed) > len(encoder.blocks):
            return encoder.encode(point, m)
        if self._reference_row is None or self._reference_for is not reference:
            self._reference_row, self._reference_for = encoder.encode(reference, 1)[0], reference
        X = np.empty((m, encoder.width), order="F")
        X[:] = self._reference_row
        for block in changed:
            encoder.fill(X, block, point)
        moved = {b.spec.column for b in changed}
        for product in encoder.products:
            if moved & {product.column, product.by}:
                encoder.fill_product(X, product)
        return X

    # --- smearing estimate of E[y | x] and its derivative in the index -------------------
    def smear(self, eta: np.ndarray, resid: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """S(η) = mean g⁻¹(η + ê) and S'(η) = mean (g⁻¹)'(η + ê), for each η (Duan 1983)."""
        resid = self.resid if resid is None else resid
        eta = np.asarray(eta, dtype=float)
        level = np.empty_like(eta)
        slope = np.empty_like(eta)
        step = max(1, _SMEAR_CHUNK // max(len(resid), 1))
        for start in range(0, len(eta), step):
            block = eta[start : start + step, None] + resid[None, :]
            level[start : start + step] = self.outcome.inverse(block).mean(axis=1)
            slope[start : start + step] = self.outcome.inverse_derivative(block).mean(axis=1)
        return level, slope


def _same_value(value: Any, reference: Any) -> bool:
    """Whether a point's value is the reference point's own (so its design columns are the
    reference row's): the same level name, or the same number."""
    if isinstance(value, str) or isinstance(reference, str):
        return isinstance(value, str) and isinstance(reference, str) and value == reference
    numbers = (int, float, np.integer, np.floating)
    return isinstance(value, numbers) and isinstance(reference, numbers) and not isinstance(value, bool) and value == reference


def fit_model(data: pd.DataFrame, model_spec: ModelSpec, columns: ColumnCache | None = None) -> tuple[Design, OLSFit, Model]:
    """Design, fit and covariance: everything the effect engine needs.

    For PPML the returned fit carries the Poisson estimates in the least-squares record
    (residuals y - μ̂, fitted values the index x'b, r2 the squared correlation of y and μ̂), and
    the model is seen by the effect engine as a log-link mean with no residual spread.
    """
    return fit_design(build_design(data, model_spec, columns), model_spec)


def fit_design(design: Design, model_spec: ModelSpec) -> tuple[Design, OLSFit, Model]:
    """Fit and covariance on a built design (see ``fit_model``)."""
    names = [t.name for t in design.terms]
    kind = COVARIANCE_KINDS.get(model_spec.covariance)
    # The HC0/HC1 meat is summed in the fit's last residual pass (no pass of its own over X).
    scores = kind is not None and kind.reads_score_gram and model_spec.estimator != "ppml"
    absorbed = design.absorbed
    with np.errstate(all="ignore"):
        try:
            fit = fit_ols(design.X, design.y if absorbed is None else absorbed.y_within, design.weights, names, scores)
        except DataError as exc:
            if absorbed is None:
                raise
            raise DataError(f"{exc} (This is once the fixed effects of {' and '.join(absorbed.columns)} are absorbed.)") from None
        if model_spec.estimator == "ppml":
            return _fit_ppml(design, model_spec, fit)
        if absorbed is not None:
            fit = _with_absorbed(fit, design)
        notes: dict[str, Any] = {}
        nested = absorbed is not None and design.groups is not None and absorbed.nested_in(design.groups, design.groups_second)
        cov, df = covariance(
            fit, design.X, model_spec.covariance, design.groups, design.time, model_spec.lags, notes,
            groups_second=design.groups_second, nested=nested,
        )  # fmt: skip
    model = Model(
        design=design,
        coef=fit.coef if absorbed is None else _at_level(fit.coef, absorbed, model_spec),
        cov=cov,
        df=df,
        outcome=model_spec.outcome_transform,
        resid=fit.resid,
        time_series=_time_series(model_spec, notes),
    )
    return design, fit, model


def _with_absorbed(fit: OLSFit, design: Design) -> OLSFit:
    """The fit on the swept data as the dummy-variable regression reports it: its degrees of
    freedom (the absorbed levels counted), s², R² against g(y) itself, fitted values g(y) - e
    (the fixed effects included). The residuals and slopes are already the same."""
    d = design.absorbed.dof
    n, k = fit.n, fit.k
    y = design.y
    w = design.weights
    centred = y - np.average(y, weights=w)
    sst = float(np.dot(centred * (w if w is not None else 1.0), centred))
    r2 = 1.0 - fit.ssr / sst if sst > 0 else float("nan")
    return replace(
        fit,
        absorbed=d,
        fitted=y - fit.resid,
        r2=r2,
        adj_r2=1.0 - (n - 1) / (n - k - d) * (1.0 - r2),
        sigma=float(np.sqrt(fit.ssr / (n - k - d))),
    )


def _at_level(coef: np.ndarray, absorbed: Absorbed, model_spec: ModelSpec) -> np.ndarray:
    """The coefficients effects, curves and predictions read: the intercept is the rows' average
    absorbed effect, or with ``at`` naming a level of an absorbed identifier that level's own
    (``Absorbed.level_effect``)."""
    chosen = [c for c in absorbed.columns if c in model_spec.at]
    if not chosen:
        return coef
    column = chosen[0]
    level = match_level(model_spec.at[column], absorbed.names[absorbed.columns.index(column)].tolist())
    if level is None:
        names = absorbed.names[absorbed.columns.index(column)].tolist()
        raise DataError(unknown_level(f"spec.at.{column}", model_spec.at[column], column, names))
    out = coef.copy()
    out[0] = absorbed.level_effect(column, level, coef)
    return out


def _fit_ppml(design: Design, model_spec: ModelSpec, screen: OLSFit) -> tuple[Design, OLSFit, Model]:
    ppml = fit_ppml(design.X, design.y_raw, design.weights)
    w = design.weights if design.weights is not None else 1.0
    root_mu = np.sqrt(w * ppml.mu)
    u = np.sqrt(w) * (design.y_raw - ppml.mu) / np.sqrt(ppml.mu)
    notes: dict[str, Any] = {}
    cov, df = sandwich(
        ppml.bread, design.X, u, model_spec.covariance, design.groups, 1.0, root_mu, design.time, model_spec.lags, notes,
        groups_second=design.groups_second,
    )  # fmt: skip
    r2 = float(np.corrcoef(design.y_raw, ppml.mu)[0, 1] ** 2)
    fit = replace(
        screen,
        coef=ppml.coef,
        resid=design.y_raw - ppml.mu,
        fitted=design.X @ ppml.coef,
        xtx_inv=ppml.bread,
        r2=r2,
        adj_r2=float("nan"),
        sigma=float("nan"),
        loglik=ppml.loglik,
        ssr=float("nan"),
    )
    model = Model(
        design=design,
        coef=ppml.coef,
        cov=cov,
        df=df,
        outcome=Log(),
        resid=np.zeros(1),
        time_series=_time_series(model_spec, notes),
    )
    return design, fit, model


def _time_series(model_spec: ModelSpec, notes: dict[str, Any]) -> dict[str, Any] | None:
    """The header's ``time_series`` (docs/contract.md §3.1): None unless HAC or Driscoll-Kraay."""
    return {"time": model_spec.time, **notes} if notes else None
