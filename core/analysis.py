"""``analyze``: the one entry point the app, the command line and the report call."""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Iterable
from contextlib import nullcontext
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from core.errors import DataError, FormwiseError
from core.inference.bootstrap import (
    Progress,
    Target,
    effect_target,
    intervals,
    prediction_target,
    replicate,
    scenario_target,
    within,
)
from core.inference.curves import effect_curves
from core.inference.diagnostics import diagnostics
from core.inference.effects import compute_effects, gap_curves, slope_tests
from core.inference.residuals import residual_sample, variable_distributions
from core.inference.retransform import boxcox_profile, fit_on_original_scale, predict
from core.inference.scenarios import compute_scenarios
from core.inference.sweep import sweep_section
from core.inference.units import needs_units_check, units_check
from core.model.covariance import leverage
from core.model.design import SINGLETON, ColumnCache, Design
from core.model.engine import single_threaded_blas
from core.model.fitted import Model, fit_model
from core.model.ols import NEAR_COLLINEAR, OLSFit
from core.model.spec import ModelSpec, parse_spec
from core.model.transforms import Log
from core.output.readings import reading
from core.output.text import small_sample

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
        "scenarios",
        "residuals",
        "distributions",
        "sweep",
    }
)
# The display samples (residual points, histograms of the variables) are for the app's charts
# and are computed only when asked for by name.
DEFAULT_PARTS = ALL_PARTS - {"residuals", "distributions", "sweep"}

CAUTIONS = [
    "Effects are associations in this data with the other regressors held fixed; they are not causal effects by themselves.",
    "'Approximate' effects are the first-order (textbook) readings; 'exact' effects follow from the fitted "
    "model without linearisation. Prefer the exact effect for large changes.",
    "Effects and predictions outside the observed range of a variable are extrapolations and are marked.",
]


@dataclass
class _Run:
    """One analysis in progress: the inputs, the fitted model, and the warnings gathered so far."""

    data: pd.DataFrame
    spec: dict[str, Any]
    model_spec: ModelSpec
    design: Design
    fit: OLSFit
    model: Model
    warnings: list[str]
    progress: Progress = None
    columns: ColumnCache | None = None  # the caller's cache for this table, for the sections' own designs
    # Result entries waiting for their bootstrap intervals, with what is bootstrapped for each.
    targets: list[tuple[dict[str, Any], Target]] = field(default_factory=list)

    @property
    def ppml(self) -> bool:
        return self.model_spec.estimator == "ppml"

    @functools.cached_property
    def leverage(self) -> np.ndarray:
        """Each row's leverage, for both the influence measures and the residual checks (one pass
        over the design instead of two: about 20 ms each at 1,000,000 rows x 13 columns)."""
        return leverage(self.design.X, self.fit.xtx_inv, self.fit.weights)


def analyze(
    data: pd.DataFrame,
    spec: dict,
    parts: Iterable[str] | None = None,
    columns: ColumnCache | None = None,
    progress: Progress = None,
) -> dict[str, Any]:
    """Fit the model described by ``spec`` on ``data`` and return the result contract (docs/contract.md §3).

    ``parts`` names the sections to compute (default: ``DEFAULT_PARTS``, every section but the
    display samples; see ``SECTIONS``); the header keys
    (docs/contract.md §3.1) are always present. Raises ``FormwiseError`` with a message for the
    user on bad input. The result holds only JSON-able values. ``columns`` (a ``ColumnCache``
    kept by the caller for this table) lets a refit reuse the columns and transforms the
    previous fits already computed; the result is the same without it. ``progress`` is called
    with the share of the work done (0 to 1) after each section and during a bootstrap; when it
    returns False the analysis stops with ``FormwiseError``.
    """
    if not isinstance(data, pd.DataFrame):
        raise DataError("the data must be a table (a pandas DataFrame).")
    # The sweep (many models) only when the spec asks for one or its part is named.
    asked = {"sweep"} if isinstance(spec, dict) and "sweep" in spec else set()
    wanted = DEFAULT_PARTS | asked if parts is None else frozenset(parts)
    unknown = wanted - ALL_PARTS
    if unknown:
        raise FormwiseError(f"unknown result part(s): {', '.join(sorted(unknown))}; use some of {', '.join(sorted(ALL_PARTS))}.")

    model_spec = parse_spec(spec, data)
    with single_threaded_blas:
        design, fit, model = fit_model(data, model_spec, columns)
    run = _Run(data, spec, model_spec, design, fit, model, list(design.warnings), progress, columns=columns)
    result: dict[str, Any] = {
        "n_obs": fit.n,
        "n_dropped": design.n_total - fit.n,
        "dropped": design.dropped,
        "outcome": {"column": model_spec.outcome_column, "transform": model_spec.outcome_transform.code},
        "covariance": model_spec.covariance,
        "estimator": model_spec.estimator,
        "reference_point": design.reference,
        "time_series": model.time_series,
        "column_units": dict(model_spec.units),
        "absorb": _absorb_header(design, model_spec),
    }
    run.warnings.extend(fit.warnings)
    run.warnings.extend(_absorb_warnings(model_spec))
    run.warnings.extend(_time_series_warnings(model.time_series, model_spec.covariance))
    if small_sample(fit.n, fit.k + fit.absorbed):
        run.warnings.append(
            f"small sample: {fit.n} rows for {fit.k + fit.absorbed} coefficients (absorbed fixed effects included); "
            "estimates and intervals are fragile."
            if fit.absorbed
            else f"small sample: {fit.n} rows for {fit.k} coefficients; estimates and intervals are fragile."
        )
    if fit.condition_number > NEAR_COLLINEAR:
        run.warnings.append(
            f"the regressors are nearly collinear (condition number {fit.condition_number:,.0f}); "
            "individual coefficients are imprecise, though predictions may still be fine."
        )
    chosen = [(keys, section) for keys, section in SECTIONS if wanted & keys]
    total = sum(_cost(keys) for keys, _ in chosen) or 1.0
    done = 0.0
    for keys, section in chosen:
        run.progress = within(progress, done / total, _cost(keys) / total)  # the bootstrap's own share
        with np.errstate(all="ignore"), nullcontext() if keys & BLAS_THREADED_PARTS else single_threaded_blas:
            result.update(section(run))
        done += _cost(keys)
        if progress is not None and progress(min(done / total, 1.0)) is False:
            raise FormwiseError("the analysis was stopped before it finished; nothing was kept.")
    result["warnings"] = list(dict.fromkeys(run.warnings))
    result["cautions"] = CAUTIONS
    return json_safe(result)


def _absorb_header(design: Design, model_spec: ModelSpec) -> dict[str, Any] | None:
    """What was absorbed (docs/contract.md §3.1): the identifiers, their levels, the parameters
    they take, the singletons dropped, the sweeps, and the fixed effect effects and curves use."""
    absorbed = design.absorbed
    if absorbed is None:
        return None
    chosen = {c: str(model_spec.at[c]) for c in absorbed.columns if c in model_spec.at}
    singletons = sum(d["count"] for d in design.dropped if d["reason"] == SINGLETON)
    return {
        "columns": list(absorbed.columns),
        "levels": list(absorbed.levels),
        "dof": absorbed.dof,
        "singletons": singletons,
        "sweeps": absorbed.sweeps,
        "read_at": dict(list(chosen.items())[:1]) or "average",
    }


def _absorb_warnings(model_spec: ModelSpec) -> list[str]:
    """Absorbing an identifier without clustering by it: rows of one unit usually move together."""
    if not model_spec.absorb or model_spec.covariance == "cluster":
        return []
    first = model_spec.absorb[0]
    return [
        f"the fixed effects of '{first}' are absorbed but the standard errors are {model_spec.covariance}: rows of the "
        f"same {first} usually share more than their fixed effect, so clustered errors by '{first}' are the usual choice "
        "(Cameron & Miller 2015, J. Human Resources 50(2))."
    ]


def _diagnostics(run: _Run) -> dict[str, Any] | None:
    """The residual checks; a warning when the White test had to take its fitted-value form."""
    if run.ppml:
        return None
    if run.design.absorbed is not None:
        # Their auxiliary regressions (RESET's fitted powers, the White terms) would need the
        # fixed effects swept out of them too, and the leverage of every level.
        run.warnings.append(
            "the residual tests (Breusch-Pagan, White, Jarque-Bera, RESET) and the influence measures are not computed "
            "with absorbed fixed effects; the residual plots are shown."
        )
        return None
    checks = diagnostics(run.design, run.fit, run.leverage)
    note = (checks.get("white") or {}).get("note")
    if note:
        run.warnings.append(note)
    return checks


def _time_series_warnings(notes: dict[str, Any] | None, kind: str) -> list[str]:
    """How the time-series errors treat periods without rows (core.model.covariance: lags are
    distances in time, a missing period counts as a zero score)."""
    if not notes or not notes["periods_without_rows"]:
        return []
    missing, span = notes["periods_without_rows"], notes["periods"]
    return [
        f"{missing} of the {span} periods of '{notes['time']}' from the first to the last used have no row in the fit "
        f"(absent from the data, or dropped); the {kind} standard errors pair rows by their distance in time, so rows on "
        "either side of a gap are never treated as neighbours, and a missing period counts as a zero contribution."
    ]


def _fit_section(run: _Run) -> dict[str, Any]:
    fit = run.fit
    measures: dict[str, Any] = dict.fromkeys(
        ("r2_original_scale", "loglik_original_scale", "aic_original_scale", "bic_original_scale", "retransform")
    )
    if run.ppml:
        run.warnings.append(
            "PPML models the mean of the outcome directly: no retransformation is needed, and its Poisson "
            "pseudo-likelihood is not comparable with the least-squares models' original-scale likelihoods."
        )
    else:
        measures = fit_on_original_scale(run.model, run.design.y_raw, fit.fitted, fit.loglik, fit.k + fit.absorbed, run.design.y)
    return {
        "fit": {
            "r2": fit.r2,
            "adj_r2": fit.adj_r2,
            "r2_original_scale": fit.r2 if run.ppml else measures["r2_original_scale"],
            "loglik": fit.loglik,
            "loglik_original_scale": measures["loglik_original_scale"],
            "aic_original_scale": measures["aic_original_scale"],
            "bic_original_scale": measures["bic_original_scale"],
            "sigma": fit.sigma,
            "condition_number": fit.condition_number,
            "df_resid": fit.df_resid,
        },
        "retransform": measures["retransform"],
    }


def _effects_section(run: _Run) -> dict[str, Any]:
    effects, warnings = compute_effects(run.model)
    run.warnings.extend(warnings)
    _wait_for_bootstrap(run, effects, effect_target)
    return {"effects": effects, "slope_tests": slope_tests(run.model)}


def _units_section(run: _Run) -> dict[str, Any]:
    checks = []
    for column in needs_units_check(run.model_spec):
        check = units_check(run.data, run.model_spec, column, (run.design, run.fit, run.model))
        checks.append(check)
        if check["moves"]:
            code = next(r.transform.code for r in run.model_spec.regressors if r.column == column)
            run.warnings.append(
                f"the effect of '{column}' ({code}) changes by up to {100 * check['max_relative_move']:.0f} % "
                "when the variable is rescaled (say from units to thousands): with this transform the result "
                "depends on the units of measurement. Consider log (if there are no zeros) or report the units."
            )
    return {"units_check": checks}


def _scenarios_section(run: _Run) -> dict[str, Any]:
    scenarios, warnings = compute_scenarios(run.model, run.model_spec.scenarios)
    run.warnings.extend(warnings)
    _wait_for_bootstrap(run, scenarios, scenario_target)
    return {"scenarios": scenarios}


def _predictions_section(run: _Run) -> dict[str, Any]:
    points = run.model_spec.predict
    sigma = 0.0 if run.ppml else run.fit.sigma
    predictions = predict(run.model, points, sigma, warnings=run.warnings) if points else []
    _wait_for_bootstrap(run, predictions, prediction_target)
    return {"predictions": predictions}


def _wait_for_bootstrap(run: _Run, entries: list[dict[str, Any]], target: Callable[[Model, dict[str, Any]], Target]) -> None:
    """With ``spec.bootstrap``, every entry gets a ``bootstrap`` key: null where its estimate is,
    else filled in by ``_bootstrap_section`` once every section has named its targets."""
    if run.model_spec.bootstrap is None:
        return
    for entry in entries:
        entry["bootstrap"] = None
        if entry.get("exact", entry.get("smearing")) is not None:
            run.targets.append((entry, target(run.model, entry)))


def _bootstrap_section(run: _Run) -> dict[str, Any]:
    """One set of draws for every effect, scenario and prediction (core.inference.bootstrap)."""
    settings = run.model_spec.bootstrap
    if settings is None or not run.targets:
        return {}
    groups = run.design.resample_groups if settings.cluster else None
    replicates = replicate(run.model, [t for _, t in run.targets], settings.draws, settings.seed, groups, run.progress)
    for (entry, _), found in zip(run.targets, intervals(replicates, run.model.confidence), strict=True):
        entry["bootstrap"] = found
    if replicates.failed:
        run.warnings.append(
            f"{replicates.failed} of {settings.draws} bootstrap draws could not be refitted (the resample left a column "
            "without variation, such as a rare category) and were left out of the bootstrap intervals."
        )
    return {}


def _blocks(run: _Run, make: Callable[[Model, Any], list[Any]]) -> list[Any]:
    """Every block's entries (one per value of the moderator for a crossed regressor)."""
    return [entry for block in run.design.encoder.blocks for entry in make(run.model, block)]


# Sections whose large matrix products (n x k and wider) run faster on BLAS's own threads
# (measured at 1,000,000 rows x 13: residual checks 0.77 s against 0.87 s on one thread, the
# Box-Cox profile 1.07 s against 1.31 s). Everything else runs with BLAS on one thread: the
# row passes make their own threads (core.model.engine), and after a threaded BLAS call
# OpenBLAS's idle threads keep a core busy waiting for more work, which slowed the next fit
# at 1,000,000 rows from 34 ms to 54 ms (a refit's vector products were enough to start them).
BLAS_THREADED_PARTS = frozenset({"diagnostics", "boxcox"})

# Rough cost of each section relative to the coefficients (measured at 1,000,000 rows by
# bench/browser.py's table), only to make the share reported to ``progress`` move evenly.
SECTION_COST = {
    "diagnostics": 6.0,
    "boxcox": 8.0,
    "sweep": 20.0,
    "curves": 3.0,
    "residuals": 3.0,
    "distributions": 3.0,
    "units_check": 3.0,
}


def _cost(keys: frozenset[str]) -> float:
    return max((SECTION_COST.get(k, 1.0) for k in keys), default=1.0)


# The result sections in the order they are computed: (parts that ask for it, how).
SECTIONS: list[tuple[frozenset[str], Callable[[_Run], dict[str, Any]]]] = [
    (
        frozenset({"terms"}),
        lambda r: {"terms": _absorbed_intercept(r, _terms(r.design, r.fit.coef, r.model.cov, r.model.df, r.model_spec))},
    ),
    (frozenset({"fit", "retransform"}), _fit_section),
    (frozenset({"diagnostics"}), lambda r: {"diagnostics": _diagnostics(r)}),
    (frozenset({"residuals"}), lambda r: {"residuals": None if r.ppml else residual_sample(r.design, r.fit, h=r.leverage)}),
    (frozenset({"distributions"}), lambda r: {"distributions": variable_distributions(r.data, r.spec)}),
    (
        frozenset({"boxcox"}),
        # With absorbed fixed effects each λ would need its own sweep of the outcome: not profiled.
        lambda r: {
            "boxcox": None
            if r.ppml or r.design.absorbed is not None
            else boxcox_profile(r.design.y_raw, r.design.X, r.design.weights)
        },
    ),
    (frozenset({"predictions"}), _predictions_section),
    (frozenset({"effects"}), _effects_section),
    (frozenset({"scenarios"}), _scenarios_section),
    (frozenset({"gap_curves"}), lambda r: {"gap_curves": _blocks(r, gap_curves)}),
    (frozenset({"curves"}), lambda r: {"curves": _blocks(r, effect_curves)}),
    (frozenset({"units_check"}), _units_section),
    (frozenset({"sweep"}), lambda r: {"sweep": sweep_section(r.data, r.spec, r.model_spec, r.columns, r.design, r.progress)}),
    # Last: it fills in the entries the three sections above produced.
    (frozenset({"effects", "scenarios", "predictions"}), _bootstrap_section),
]


def _absorbed_intercept(run: _Run, terms: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """With absorbed fixed effects the intercept is their average over the rows (§2.15)."""
    if run.design.absorbed is not None and terms and terms[0]["column"] is None:
        names = " and ".join(run.design.absorbed.columns)
        terms[0]["reading"] = (
            f"The average over the rows of the absorbed fixed effects of {names}: the prediction on the model's scale "
            f"when every regressor term is zero, for a typical {names} rather than any one."
        )
    return terms


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
                "by": term.by,
                "by_level": term.by_level,
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
                    model_spec.units,
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
