"""``analyze``: the one entry point the app, the command line and the report call."""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from core.errors import DataError, FormwiseError
from core.inference.curves import effect_curve
from core.inference.diagnostics import diagnostics
from core.inference.effects import compute_effects, gap_curve
from core.inference.residuals import residual_sample, variable_distributions
from core.inference.retransform import boxcox_profile, fit_on_original_scale, predict
from core.inference.units import needs_units_check, units_check
from core.model.design import ColumnCache
from core.model.fitted import fit_model
from core.model.ols import NEAR_COLLINEAR
from core.model.spec import parse_spec
from core.model.transforms import Log
from core.output.readings import reading

ALL_PARTS = frozenset(
    {
        "terms",
        "fit",
        "effects",
        "gap_curves",
        "curves",
        "units_check",
        "diagnostics",
        "boxcox",
        "retransform",
        "predictions",
        "residuals",
        "distributions",
    }
)
# Fewer rows than this, or than 10 per coefficient, and results are flagged (common practice, no source).
SMALL_SAMPLE = 30

CAUTIONS = [
    "Effects are associations in this data with the other regressors held fixed; they are not causal effects by themselves.",
    "'Approximate' effects are the first-order (textbook) readings; 'exact' effects follow from the fitted "
    "model without linearisation. Prefer the exact effect for large changes.",
    "Effects and predictions outside the observed range of a variable are extrapolations and are marked.",
]


def analyze(
    data: pd.DataFrame, spec: dict, parts: Iterable[str] | None = None, columns: ColumnCache | None = None
) -> dict[str, Any]:
    """Fit the model described by ``spec`` on ``data`` and return the result contract (docs/contract.md §3).

    ``parts`` names the sections to compute (default: all); the header keys (n_obs, dropped,
    outcome, covariance, warnings) are always present. Raises ``FormwiseError`` with a
    message for the user on bad input. The result holds only JSON-able values. ``columns``
    (a ``ColumnCache`` kept by the caller for this table) lets a refit reuse the columns and
    transforms the previous fits already computed; the result is the same without it.
    """
    if not isinstance(data, pd.DataFrame):
        raise DataError("the data must be a table (a pandas DataFrame).")
    wanted = ALL_PARTS if parts is None else frozenset(parts)
    unknown = wanted - ALL_PARTS
    if unknown:
        raise FormwiseError(f"unknown result part(s): {', '.join(sorted(unknown))}; use some of {', '.join(sorted(ALL_PARTS))}.")

    model_spec = parse_spec(spec, data)
    design, fit, model = fit_model(data, model_spec, columns)
    cov, df = model.cov, model.df
    warnings = list(design.warnings)

    result: dict[str, Any] = {
        "n_obs": fit.n,
        "n_dropped": design.n_total - fit.n,
        "dropped": design.dropped,
        "outcome": {"column": model_spec.outcome_column, "transform": model_spec.outcome_transform.code},
        "covariance": model_spec.covariance,
        "estimator": model_spec.estimator,
        "reference_point": design.reference,
    }
    if fit.n < max(SMALL_SAMPLE, 10 * fit.k):
        warnings.append(f"small sample: {fit.n} rows for {fit.k} coefficients; estimates and intervals are fragile.")
    if fit.condition_number > NEAR_COLLINEAR:
        warnings.append(
            f"the regressors are nearly collinear (condition number {fit.condition_number:,.0f}); "
            "individual coefficients are imprecise, though predictions may still be fine."
        )

    ppml = model_spec.estimator == "ppml"
    if "terms" in wanted:
        result["terms"] = _terms(design, fit.coef, cov, df, model_spec)
    if "fit" in wanted or "retransform" in wanted:
        measures = {
            "r2_original_scale": None,
            "loglik_original_scale": None,
            "aic_original_scale": None,
            "bic_original_scale": None,
            "retransform": None,
        }
        if not ppml:
            with np.errstate(all="ignore"):
                measures = fit_on_original_scale(model, design.y_raw, fit.fitted, fit.loglik, fit.k)
        result["fit"] = {
            "r2": fit.r2,
            "adj_r2": fit.adj_r2,
            "r2_original_scale": measures["r2_original_scale"] if not ppml else fit.r2,
            "loglik": fit.loglik,
            "loglik_original_scale": measures["loglik_original_scale"],
            "aic_original_scale": measures["aic_original_scale"],
            "bic_original_scale": measures["bic_original_scale"],
            "sigma": fit.sigma,
            "condition_number": fit.condition_number,
            "df_resid": fit.df_resid,
        }
        result["retransform"] = measures["retransform"]
        if ppml:
            warnings.append(
                "PPML models the mean of the outcome directly: no retransformation is needed, and its Poisson "
                "pseudo-likelihood is not comparable with the least-squares models' original-scale likelihoods."
            )
    if "diagnostics" in wanted:
        result["diagnostics"] = None if ppml else diagnostics(design, fit)
    if "residuals" in wanted:
        result["residuals"] = None if ppml else residual_sample(design, fit)
    if "distributions" in wanted:
        result["distributions"] = variable_distributions(data, spec)
    if "boxcox" in wanted:
        result["boxcox"] = None if ppml else boxcox_profile(design.y_raw, design.X, design.weights)
    if "predictions" in wanted:
        sigma = fit.sigma if not ppml else 0.0
        result["predictions"] = predict(model, model_spec.predict, sigma) if model_spec.predict else []
    if "effects" in wanted:
        with np.errstate(all="ignore"):
            effects, effect_warnings = compute_effects(model)
        result["effects"] = effects
        warnings.extend(effect_warnings)
    if "gap_curves" in wanted:
        with np.errstate(all="ignore"):
            curves = [gap_curve(model, block) for block in design.encoder.blocks]
        result["gap_curves"] = [c for c in curves if c is not None]
    if "curves" in wanted:
        with np.errstate(all="ignore"):
            result["curves"] = [effect_curve(model, block) for block in design.encoder.blocks]
    if "units_check" in wanted:
        checks = []
        for column in needs_units_check(model_spec):
            check = units_check(data, model_spec, column, (design, fit, model))
            checks.append(check)
            if check["moves"]:
                code = next(r.transform.code for r in model_spec.regressors if r.column == column)
                warnings.append(
                    f"the effect of '{column}' ({code}) changes by up to {100 * check['max_relative_move']:.0f} % "
                    "when the variable is rescaled (say from units to thousands): with this transform the result "
                    "depends on the units of measurement. Consider log (if there are no zeros) or report the units."
                )
        result["units_check"] = checks
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
                    Log() if model_spec.estimator == "ppml" else model_spec.outcome_transform,
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
