"""``analyze``: the one entry point the app, the command line and the report call."""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from core.covariance import covariance
from core.design import build_design
from core.effects import Model, compute_effects, gap_curve
from core.errors import DataError, FormwiseError
from core.ols import NEAR_COLLINEAR, fit_ols
from core.readings import reading
from core.spec import parse_spec

ALL_PARTS = frozenset({"terms", "fit", "effects", "gap_curves"})
# Fewer rows than this, or than 10 per coefficient, and results are flagged (common practice, no source).
SMALL_SAMPLE = 30

CAUTIONS = [
    "Effects are associations in this data with the other regressors held fixed; they are not causal effects by themselves.",
    "'Approximate' effects are the first-order (textbook) readings; 'exact' effects follow from the fitted "
    "model without linearisation. Prefer the exact effect for large changes.",
    "Effects and predictions outside the observed range of a variable are extrapolations and are marked.",
]


def analyze(data: pd.DataFrame, spec: dict, parts: Iterable[str] | None = None) -> dict[str, Any]:
    """Fit the model described by ``spec`` on ``data`` and return the result contract (SPEC §4).

    ``parts`` names the sections to compute (default: all); the header keys (n_obs, dropped,
    outcome, covariance, warnings) are always present. Raises ``FormwiseError`` with a
    message for the user on bad input. The result holds only JSON-able values.
    """
    if not isinstance(data, pd.DataFrame):
        raise DataError("the data must be a table (a pandas DataFrame).")
    wanted = ALL_PARTS if parts is None else frozenset(parts)
    unknown = wanted - ALL_PARTS
    if unknown:
        raise FormwiseError(f"unknown result part(s): {', '.join(sorted(unknown))}; use some of {', '.join(sorted(ALL_PARTS))}.")

    model_spec = parse_spec(spec, data)
    design = build_design(data, model_spec)
    names = [t.name for t in design.terms]
    with np.errstate(all="ignore"):
        fit = fit_ols(design.X, design.y, design.weights, names)
        cov, df = covariance(fit, design.X, model_spec.covariance, design.groups)
    warnings = list(design.warnings)

    result: dict[str, Any] = {
        "n_obs": fit.n,
        "n_dropped": design.n_total - fit.n,
        "dropped": design.dropped,
        "outcome": {"column": model_spec.outcome_column, "transform": model_spec.outcome_transform.code},
        "covariance": model_spec.covariance,
        "reference_point": design.reference,
    }
    if fit.n < max(SMALL_SAMPLE, 10 * fit.k):
        warnings.append(f"small sample: {fit.n} rows for {fit.k} coefficients; estimates and intervals are fragile.")
    if fit.condition_number > NEAR_COLLINEAR:
        warnings.append(
            f"the regressors are nearly collinear (condition number {fit.condition_number:,.0f}); "
            "individual coefficients are imprecise, though predictions may still be fine."
        )

    if "terms" in wanted:
        result["terms"] = _terms(design, fit.coef, cov, df, model_spec)
    if "fit" in wanted:
        result["fit"] = {
            "r2": fit.r2,
            "adj_r2": fit.adj_r2,
            "loglik": fit.loglik,
            "sigma": fit.sigma,
            "condition_number": fit.condition_number,
            "df_resid": fit.df_resid,
        }
    model = Model(design=design, coef=fit.coef, cov=cov, df=df, outcome=model_spec.outcome_transform, resid=fit.resid)
    if "effects" in wanted:
        with np.errstate(all="ignore"):
            effects, effect_warnings = compute_effects(model)
        result["effects"] = effects
        warnings.extend(effect_warnings)
    if "gap_curves" in wanted:
        with np.errstate(all="ignore"):
            curves = [gap_curve(model, block) for block in design.encoder.blocks]
        result["gap_curves"] = [c for c in curves if c is not None]
    result["warnings"] = list(dict.fromkeys(warnings))
    result["cautions"] = CAUTIONS
    return json_safe(result)


def _terms(design, coef, cov, df, model_spec) -> list[dict[str, Any]]:
    se = np.sqrt(np.clip(np.diag(cov), 0, None))
    with np.errstate(divide="ignore", invalid="ignore"):
        statistic = coef / se
    p_value = 2 * stats.t.sf(np.abs(statistic), df)
    t_crit = stats.t.ppf(0.975, df)
    blocks = {b.spec.column: b for b in design.encoder.blocks}
    out = []
    for i, term in enumerate(design.terms):
        out.append(
            {
                "name": term.name,
                "column": term.column,
                "transform": term.transform,
                "level": term.level,
                "power": term.power,
                "estimate": coef[i],
                "std_error": se[i],
                "statistic": statistic[i],
                "p_value": p_value[i],
                "ci_low": coef[i] - t_crit * se[i],
                "ci_high": coef[i] + t_crit * se[i],
                "reading": reading(
                    term,
                    float(coef[i]),
                    model_spec.outcome_transform,
                    model_spec.outcome_column,
                    blocks.get(term.column) if term.column else None,
                ),
            }
        )
    return out


def json_safe(value: Any) -> Any:
    """Plain JSON data: numpy scalars to Python, NaN and inf to None."""
    if isinstance(value, dict):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(v) for v in value]
    if isinstance(value, np.ndarray):
        return [json_safe(v) for v in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        number = float(value)
        return number if math.isfinite(number) else None
    if value is None or isinstance(value, str):
        return value
    return str(value)
