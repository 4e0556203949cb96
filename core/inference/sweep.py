"""Every functional form at once: the sweep of docs/contract.md §2.13 and §3.16.

A sweep fits every combination of candidate transforms (outcome and regressors) on one set of
rows, the rows every candidate can take, and states each model's focus effect on one common
scale (percent change of the expected outcome at the reference point) beside its
original-scale fit measures. The work is one system, not a loop of fits (the multiverse or
specification-curve idea: Simonsohn, Simmons & Nelson 2020, Nature Human Behaviour 4; Steegen,
Tuerlinckx, Gelman & Vanpaemel 2016, Perspectives on Psychological Science 11):

1. The columns of every candidate of every variable (each regressor's basis columns, each
   candidate outcome's g(y)) form one wide table S, held as its columns (most are views of the
   base design's); one pass of the fit engine (``core.model.engine.gram_pass`` over a
   ``ColumnShift``, shifted and weighted blocks) accumulates its Gram matrix.
2. A model is a set of columns of S and one outcome column: its normal equations are a
   sub-block of that Gram matrix, solved by the same Cholesky factor as ``core.model.ols``
   (coefficients, SSR, condition number), so log-likelihood, AIC and BIC on the original scale
   (with the outcome's Jacobian, ``core.inference.retransform.fit_on_original_scale``) need no
   pass of their own.
3. One further pass handles every model together: per block the residuals of all models and the
   focus effect's projected scores are one matrix product, and the HC0/HC1 variance of the
   focus effect, Σᵢ(ũᵢ·z̃ᵢ'a)² with a = (Z'WZ)⁻¹c, and the sums behind the original-scale R² are
   added up for all models at once.

A variable can be held at the spec's own form (``vary`` names the ones that change); without
``vary``, a model with more variables than ``MAX_MODELS`` combinations allow holds the last ones
in the spec's order (``_varied``), so a wide table still gets its sweep.

Models whose outcome needs the smearing estimate (IHS, square root, shifted log, Box-Cox: S(η)
averages over every residual), covariance kinds other than classical, HC0 and HC1, and designs
whose condition number exceeds ``core.model.ols.NORMAL_EQUATIONS_MAX_CONDITION`` are fitted one
by one through the fit engine and the covariance registry on the same rows, so every model's
numbers are what ``core.analyze`` gives for its spec on those rows.
"""

from __future__ import annotations

import functools
import itertools
import math
from collections.abc import Iterable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import pandas as pd
import scipy.linalg as sla

from core.errors import DataError, FormwiseError, SpecError
from core.inference.bootstrap import Progress, within
from core.inference.effects import default_change, effect_arrays, exact_interval
from core.inference.retransform import fit_on_original_scale
from core.model import engine
from core.model.design import Block, ColumnCache, Design, Encoder, Term, build_design
from core.model.fitted import Model, fit_design
from core.model.ols import NORMAL_EQUATIONS_MAX_CONDITION, _normal_equations_factor
from core.model.spec import ModelSpec, RegressorSpec, parse_change
from core.model.transforms import Category, Transform, menu_codes, parse_transform

MAX_MODELS = 1_024
SWEEP_KEYS = {"focus", "candidates", "vary"}
# The plausible forms a sweep tries when the spec names none (the advisor's rules of the trade,
# core.intake.advisor): level, and one log-type form (log where every value is above zero, else
# IHS where none is negative); 0/1 indicators in levels only. Quadratics, square roots and
# shifted logs are tried when named in ``candidates``.
_LOG_FAMILY = ("log", "ihs")
# Covariance kinds the one-pass system computes; others go model by model.
_ONE_PASS = {"classical": 0.0, "HC0": 0.0, "HC1": 1.0}
# Rows per step of the second pass. Measured at 1,000,000 rows and 512 models on two threads
# (one product of a model per row): 1.2 s with 768 to 1,536 rows, 1.26 s with 512, 1.3 s with
# 2,048, 1.8 s with 4,096, 2.6 s with 8,192 (the product outgrows the cache).
_SUB_ROWS = 1_024


@dataclass
class _Choice:
    """One candidate of one variable: its transform and its columns in S."""

    column: str
    transform: Transform
    cols: list[int]


@dataclass
class _Setup:
    spec: ModelSpec
    design: Design  # the base model on the common rows
    focus: str
    change_text: str
    choices: dict[str, list[_Choice]]  # per variable (outcome first), in candidate order
    columns: tuple[np.ndarray, ...]  # S, every candidate column, intercept first (see _columns)
    outcomes: list[_Choice]
    left_out: list[dict[str, Any]]
    n_left_out: int
    forms: dict[str, list[str]] = None  # every variable's candidates, held or not (codes)
    held: list[str] = None  # variables that could vary but keep the spec's form
    held_for_cap: bool = False  # held so that the models stay within MAX_MODELS


def sweep_section(
    data: pd.DataFrame,
    raw_spec: dict,
    model_spec: ModelSpec,
    columns: ColumnCache | None = None,
    base: Design | None = None,
    progress: Progress = None,
) -> dict:
    """The ``sweep`` result (docs/contract.md §3.16) for the spec's ``sweep`` entry; ``base``
    is the spec's own design on ``data`` when the caller has built it already. ``progress`` is
    told the share done (the common rows, the Gram pass, the models solved, then each block of
    the second pass); when it returns False the sweep stops with ``FormwiseError``."""
    setup = _setup(data, raw_spec, model_spec, columns, base)
    _report(progress, 0.1)
    models = _fit_all(setup, progress)
    return _summary(setup, models)


def _report(progress: Progress, share: float) -> None:
    if progress is not None and progress(share) is False:
        raise FormwiseError("the forms sweep was stopped before it finished; nothing was kept.")


def spec_of_model(spec: dict[str, Any], sweep: dict[str, Any], transforms: dict[str, str]) -> dict[str, Any]:
    """The plain spec of one model of a sweep result: ``spec`` without its sweep entry, with the
    model's transforms and the focus change named (what loads the model into the grid)."""
    out = {k: v for k, v in spec.items() if k != "sweep"}
    out["outcome"] = {**spec["outcome"], "transform": transforms[spec["outcome"]["column"]]}
    focus = sweep["focus"]
    out["regressors"] = [
        {**r, "transform": transforms[r["column"]], **({"change": focus["change"]} if r["column"] == focus["column"] else {})}
        for r in spec.get("regressors", [])
    ]
    return out


def sweep_rows(data: pd.DataFrame, raw_spec: dict, model_spec: ModelSpec) -> np.ndarray:
    """Positions in ``data`` of the rows the sweep fits every model on."""
    return _setup(data, raw_spec, model_spec, None).design.rows


# --- the spec entry and the common rows ---------------------------------------------------------
def _parse(raw_spec: dict, model_spec: ModelSpec) -> tuple[str, dict[str, list[Transform]], list[str] | None]:
    entry = raw_spec.get("sweep")
    entry = {} if entry is None else entry
    if not isinstance(entry, dict):
        raise SpecError('spec.sweep: must be an object like {"focus": "price", "candidates": {"price": ["level", "log"]}}.')
    unknown = set(entry) - SWEEP_KEYS
    if unknown:
        raise SpecError(f"spec.sweep: unknown key(s) {', '.join(sorted(unknown))}; use focus and candidates.")
    if model_spec.estimator != "ppml" and not model_spec.regressors:
        raise SpecError("spec.sweep: the model has no regressor, so there is no effect to compare across forms.")
    if model_spec.estimator == "ppml":
        raise SpecError("spec.sweep: the sweep compares least-squares forms; it is not available with estimator 'ppml'.")
    names = [r.column for r in model_spec.regressors]
    focus = entry.get("focus")
    if focus is None:
        focus = next((r.column for r in model_spec.regressors if r.change is not None), names[0])
    if focus not in names:
        raise SpecError(f"spec.sweep.focus: '{focus}' is not a regressor of this model; use one of: {', '.join(names)}.")
    given = entry.get("candidates") or {}
    if not isinstance(given, dict):
        raise SpecError('spec.sweep.candidates: must be an object like {"price": ["level", "log"]}.')
    candidates: dict[str, list[Transform]] = {}
    categories = {r.column for r in model_spec.regressors if isinstance(r.transform, Category)}
    for column, codes in given.items():
        where = f"spec.sweep.candidates.{column}"
        role = "outcome" if column == model_spec.outcome_column else "regressor"
        if role == "regressor" and column not in names:
            raise SpecError(f"{where}: '{column}' is neither the outcome nor a regressor of this model.")
        if not isinstance(codes, list) or not codes:
            raise SpecError(f'{where}: must be a list of transforms like ["level", "log"].')
        found = list({t.code: t for t in (parse_transform(c, role, where) for c in codes)}.values())
        if (column in categories) != all(isinstance(t, Category) for t in found):
            raise SpecError(f"{where}: a category stays a category and a numeric regressor cannot become one in a sweep.")
        candidates[column] = found
    vary = entry.get("vary")
    if vary is not None:
        known = [model_spec.outcome_column, *names]
        if not isinstance(vary, list) or not all(isinstance(c, str) for c in vary):
            raise SpecError('spec.sweep.vary: must be a list of column names like ["price", "income"].')
        unknown = [c for c in vary if c not in known]
        if unknown:
            raise SpecError(
                f"spec.sweep.vary: '{unknown[0]}' is neither the outcome nor a regressor of this model; "
                f"use some of: {', '.join(known)}."
            )
        held = [c for c in candidates if c not in vary]
        if held:
            raise SpecError(
                f"spec.sweep.candidates.{held[0]}: names forms for a variable that spec.sweep.vary holds; add it to vary."
            )
    return focus, candidates, vary


def _default(values: np.ndarray, role: str, binary: bool) -> list[Transform]:
    if binary:
        return [parse_transform("level", role, "sweep")]
    log_type = next((c for c in _LOG_FAMILY if not parse_transform(c, role, "sweep").invalid(values)[0].any()), None)
    wanted = {"level", log_type}
    return [parse_transform(c, role, "sweep") for c in menu_codes(role) if c in wanted]


def _setup(
    data: pd.DataFrame, raw_spec: dict, model_spec: ModelSpec, columns: ColumnCache | None, base: Design | None = None
) -> _Setup:
    if model_spec.absorb:
        raise SpecError(
            "spec.sweep: the sweep compares forms without absorbed fixed effects; remove 'absorb' to sweep the forms "
            "(or enter the identifier as a category if it has few levels)."
        )
    crossed = [r.column for r in model_spec.regressors if r.by]
    if crossed:
        # The sweep's shared table holds each candidate's basis columns, not products of them.
        raise SpecError(
            f"spec.sweep: the sweep compares forms of models without moderators; '{crossed[0]}' has one ('by'). "
            "Remove 'by' to sweep the forms, then add it back to the form you keep."
        )
    focus, given, vary = _parse(raw_spec, model_spec)
    # A cache of its own when the caller keeps none: the common rows' design reuses the columns
    # the base design converted.
    columns = ColumnCache() if columns is None else columns
    base = build_design(data, model_spec, columns) if base is None else base
    blocks = {b.spec.column: b for b in base.encoder.blocks}
    own = {model_spec.outcome_column: model_spec.outcome_transform, **{r.column: r.transform for r in model_spec.regressors}}
    lists: dict[str, list[Transform]] = {}
    for column, transform in own.items():
        is_outcome = column == model_spec.outcome_column
        values = base.y_raw if is_outcome else base.values[column]
        if isinstance(transform, Category):
            found = [transform]
        elif column in given:
            found = given[column]
        else:
            found = _default(values, "outcome" if is_outcome else "regressor", not is_outcome and blocks[column].binary)
        if transform.code not in {t.code for t in found}:
            found = [transform, *found]
        lists[column] = found
    varied, for_cap = _varied(lists, [model_spec.outcome_column, focus, *given], vary)
    forms = {c: [t.code for t in found] for c, found in lists.items()}
    held = [c for c, found in lists.items() if len(found) > 1 and c not in varied]
    lists = {c: found if c in varied else [own[c]] for c, found in lists.items()}
    keep = np.ones(len(base.rows), dtype=bool)
    left_out = []
    for column, found in lists.items():
        if isinstance(own[column], Category):
            continue
        values = base.y_raw if column == model_spec.outcome_column else base.values[column]
        for transform in found:
            bad, reason = transform.invalid(values)
            if bad.any():
                left_out.append({"column": column, "transform": transform.code, "reason": reason, "count": int(bad.sum())})
                keep &= ~bad
    design = base
    if not keep.all():
        common = np.zeros(len(data), dtype=bool)
        common[base.rows[keep]] = True
        design = build_design(data, model_spec, columns, common)
    change = _focus_change(design, focus)
    setup = _columns(model_spec, design, focus, change, lists, left_out, int((~keep).sum()))
    return replace(setup, forms=forms, held=held, held_for_cap=for_cap)


def _varied(lists: dict[str, list[Transform]], first: list[str], vary: list[str] | None) -> tuple[set[str], bool]:
    """The variables whose forms the sweep varies (the others keep the spec's form), and whether
    some were held only to stay within ``MAX_MODELS``.

    With ``vary`` given, exactly those. Otherwise every variable, unless that makes more than
    ``MAX_MODELS`` models: then ``first`` (the outcome, the focus and the variables named in
    candidates) and, in the spec's order, each further variable whose forms still fit."""

    def count(columns: Iterable[str]) -> int:
        return math.prod(len(lists[c]) for c in set(columns))

    def sizes(columns: Iterable[str]) -> str:
        return " x ".join(f"{len(lists[c])} ({c})" for c in lists if c in set(columns) and len(lists[c]) > 1)

    if vary is not None:
        if count(vary) > MAX_MODELS:
            raise SpecError(
                f"spec.sweep.vary: {sizes(vary)} make {count(vary):,} models; a sweep fits at most {MAX_MODELS:,}. "
                "Vary fewer variables."
            )
        return set(vary), False
    if count(lists) <= MAX_MODELS:
        return set(lists), False
    if count(first) > MAX_MODELS:
        raise SpecError(
            f"spec.sweep: {sizes(first)} make {count(first):,} models; a sweep fits at most {MAX_MODELS:,}. "
            "Name fewer candidates in spec.sweep.candidates."
        )
    chosen = set(first)
    for column in lists:
        if column not in chosen and count([*chosen, column]) <= MAX_MODELS:
            chosen.add(column)
    return chosen, True


def _focus_change(design: Design, focus: str) -> str:
    block = design.encoder.block(focus)
    if block.spec.change is not None:
        return block.spec.change.text
    if block.is_category:
        return f"{block.reference_level}->{block.levels[0]}"
    return default_change(block, design.values[focus]).text


def _columns(model_spec, design, focus, change, lists, left_out, n_left_out) -> _Setup:
    """The wide table S as its columns: intercept, every regressor candidate's basis columns,
    every outcome candidate (last). A candidate the base design has (the spec's own forms,
    categories, the outcome as fitted) is a view of the design's column; only the other forms
    are computed, one job per variable on the passes' threads. Copying all of them into one
    n x q array cost a second copy of the design and, on the first sweep of a session, the
    kernel's work of finding that much fresh memory (0.5 s at 1,000,000 rows x 23 columns on
    the two-core machine). A column two candidates share, such as x in level and in quadratic,
    is used once."""
    n = len(design.y)
    outcome = model_spec.outcome_column
    blocks = design.encoder.blocks

    def variable(block: Block) -> tuple[list[tuple[Transform, list[int]]], list[np.ndarray]]:
        column, found, mine = block.spec.column, [], []
        for transform in lists[column]:
            if block.is_category or transform.code == block.spec.transform.code:
                basis = [design.X[:, j] for j in range(block.start, block.stop)]
            else:
                values = np.empty((n, transform.width), order="F")
                with np.errstate(all="ignore"):
                    transform.write_basis(design.values[column], values)
                basis = [values[:, j] for j in range(transform.width)]
            where = []
            for new in basis:
                same = next((i for i, old in enumerate(mine) if np.array_equal(old, new)), None)
                if same is None:
                    mine.append(new)
                    same = len(mine) - 1
                where.append(same)
            found.append((transform, where))
        return found, mine

    def outcome_column(transform: Transform) -> np.ndarray:
        if transform.code == model_spec.outcome_transform.code:
            return design.y
        with np.errstate(all="ignore"):
            return np.asarray(transform.forward(design.y_raw), dtype=float)

    jobs = [functools.partial(variable, b) for b in blocks] + [functools.partial(outcome_column, t) for t in lists[outcome]]
    done = engine.each_column(jobs, n)
    columns: list[np.ndarray] = [design.X[:, 0]]
    choices: dict[str, list[_Choice]] = {}
    for block, (found, mine) in zip(blocks, done[: len(blocks)], strict=True):
        at = len(columns)
        columns.extend(mine)
        choices[block.spec.column] = [_Choice(block.spec.column, t, [at + i for i in where]) for t, where in found]
    outcomes = []
    for transform, values in zip(lists[outcome], done[len(blocks) :], strict=True):
        outcomes.append(_Choice(outcome, transform, [len(columns)]))
        columns.append(values)
    return _Setup(
        model_spec, design, focus, change, {outcome: outcomes, **choices}, tuple(columns), outcomes, left_out, n_left_out
    )


# --- the models ---------------------------------------------------------------------------------
@dataclass
class _Fit:
    transforms: dict[str, str]
    outcome: _Choice
    picks: list[_Choice]
    cols: list[int]
    model: Model | None = None
    gamma: np.ndarray | None = None
    R: np.ndarray | None = None
    ssr: float = 0.0
    measures: dict[str, Any] | None = None
    effect: dict[str, Any] | None = None
    projection: np.ndarray | None = None  # (Z'WZ)⁻¹c over the model's columns
    arrays: Any = None
    eta0: float = np.nan
    error: str | None = None


def _fit_all(setup: _Setup, progress: Progress = None) -> list[_Fit]:
    with engine.single_threaded_blas, np.errstate(all="ignore"):
        shift = engine.column_shift_for(setup.columns, setup.columns[-1], setup.design.weights)
        gram = engine.gram_pass(shift)[:-1, :-1]
        _report(progress, 0.2)
        if not np.all(np.isfinite(gram)):
            raise DataError("the sweep overflowed: some values are too large to work with; rescale the data.")
        jacobians = {o.transform.code: float(np.sum(o.transform.log_jacobian(setup.design.y_raw))) for o in setup.outcomes}
        regressors = [c for c in setup.choices if c != setup.spec.outcome_column]
        fits = []
        for combo in itertools.product(setup.outcomes, *(setup.choices[c] for c in regressors)):
            outcome, picks = combo[0], list(combo[1:])
            fit = _Fit({c.column: c.transform.code for c in combo}, outcome, picks, [0] + [j for p in picks for j in p.cols])
            fits.append(fit)
        one_pass = setup.spec.covariance in _ONE_PASS
        pending = []
        for fit in fits:
            closed = fit.outcome.transform.code == "level" or fit.outcome.transform.is_log_like
            try:
                if one_pass and closed and _solve(setup, shift, gram, fit, jacobians):
                    pending.append(fit)
                else:
                    _exact(setup, fit)
            except DataError as exc:
                fit.error = str(exc)
        _report(progress, 0.3)
        if pending:
            _second_pass(setup, shift, pending, within(progress, 0.3, 0.7))
    return fits


def _model_spec(setup: _Setup, fit: _Fit) -> ModelSpec:
    regs = []
    for reg, pick in zip(setup.spec.regressors, fit.picks, strict=True):
        change = parse_change(setup.change_text, "sweep") if reg.column == setup.focus else reg.change
        regs.append(RegressorSpec(reg.column, pick.transform, change, reg.reference))
    return replace(setup.spec, outcome_transform=fit.outcome.transform, regressors=tuple(regs))


def _encoder(setup: _Setup, spec: ModelSpec) -> tuple[Encoder, list[Term]]:
    blocks, terms, start = [], [Term("intercept", None, None)], 1
    for reg, base in zip(spec.regressors, setup.design.encoder.blocks, strict=True):
        width = len(base.levels) if base.is_category else reg.transform.width
        blocks.append(Block(reg, start, start + width, list(base.levels), base.reference_level, base.binary))
        terms.extend(Term(f"{reg.transform.code}({reg.column})", reg.column, reg.transform.code) for _ in range(width))
        start += width
    return Encoder(blocks, start), terms


def _solve(setup: _Setup, shift: engine.Shift, gram: np.ndarray, fit: _Fit, jacobians: dict[str, float]) -> bool:
    """Coefficients and fit measures from the model's sub-block of the Gram matrix; False when
    the design is too ill-conditioned for the normal equations (then it is fitted on its own)."""
    J, o = fit.cols, fit.outcome.cols[0]
    k, n = len(J), len(setup.design.y)
    if n <= k:
        raise DataError(f"the model has {k} coefficients but only {n} rows.")
    sub = gram[np.ix_(J + [o], J + [o])]
    R, q, rho, kappa = _normal_equations_factor(sub, k)
    if R is None or kappa > NORMAL_EQUATIONS_MAX_CONDITION:
        return False
    gamma = sla.solve_triangular(R, q, check_finite=False)
    beta = gamma.copy()
    beta[0] = gamma[0] + shift.c[o] - float(shift.c[J[1:]] @ gamma[1:])
    spec = _model_spec(setup, fit)
    encoder, terms = _encoder(setup, spec)
    design = replace(setup.design, encoder=encoder, terms=terms)
    df = n - k
    fit.model = Model(
        design=design, coef=beta, cov=np.full((k, k), np.nan), df=df, outcome=spec.outcome_transform, resid=np.zeros(1)
    )
    fit.gamma, fit.R, fit.ssr = gamma, R, rho * rho
    w = setup.design.weights
    log_w = 0.5 * float(np.log(w).sum()) if w is not None else 0.0
    loglik = -0.5 * n * (np.log(2 * np.pi) + np.log(fit.ssr / n) + 1.0) + log_w
    ll = loglik + jacobians[fit.outcome.transform.code]
    fit.measures = {
        "loglik_original_scale": ll,
        "aic_original_scale": -2.0 * ll + 2.0 * k,
        "bic_original_scale": -2.0 * ll + np.log(n) * k,
    }
    fit.arrays, fit.eta0 = _focus_arrays(setup, fit.model)
    if fit.arrays is not None:
        # a = (Z'WZ)⁻¹c in the shifted parametrisation (c has no intercept entry, so c_z = c).
        fit.projection = sla.cho_solve((R, False), fit.arrays.c[0], check_finite=False)
    return True


def _focus_arrays(setup: _Setup, model: Model) -> tuple[Any, float]:
    """The focus effect's arrays (``effect_arrays``) and the index at its start point; arrays
    None when the change leaves a transform's domain."""
    block = model.design.encoder.block(setup.focus)
    change = parse_change(setup.change_text, "sweep")
    base = dict(model.design.reference)
    x_ref = base[setup.focus]
    x0, x1 = (change.start, change.end) if change.kind == "switch" else (x_ref, change.apply(x_ref))
    point = base | {setup.focus: x0}
    if block.is_category:
        arrays = effect_arrays(model, block, np.array([x0], dtype=object), np.array([x1], dtype=object), point, 1)
        return arrays, float((model.encode(point, 1) @ model.coef)[0])
    x0, x1 = float(x0), float(x1)
    t = block.spec.transform
    if t.invalid(np.array([x0]))[0][0] or t.invalid(np.array([x1]))[0][0]:
        return None, np.nan
    arrays = effect_arrays(model, block, np.array([x0]), np.array([x1]), point, 1)
    return arrays, float((model.encode(point, 1) @ model.coef)[0])


def _exact(setup: _Setup, fit: _Fit) -> None:
    """One model through the fit engine and the covariance registry (as core.analyze)."""
    spec = _model_spec(setup, fit)
    encoder, terms = _encoder(setup, spec)
    X = np.empty((len(setup.design.y), len(fit.cols)), order="F")
    for i, j in enumerate(fit.cols):
        X[:, i] = setup.columns[j]
    design = replace(
        setup.design,
        X=X,
        y=setup.columns[fit.outcome.cols[0]].copy(),
        encoder=encoder,
        terms=terms,
    )
    _, ols, model = fit_design(design, spec)
    fit.model = model
    fit.measures = fit_on_original_scale(model, design.y_raw, ols.fitted, ols.loglik, ols.k, design.y)
    arrays, eta0 = _focus_arrays(setup, model)
    interval = None if arrays is None else exact_interval(model, arrays, float(arrays.exact[0]))
    fit.effect = _effect(model, arrays, interval, eta0)


def _effect(model: Model, arrays: Any, interval: tuple[float, float] | None, eta0: float) -> dict[str, Any]:
    """The focus effect's entries; ``percent`` on the common scale (docs/contract.md §3.16)."""
    if arrays is None:
        return dict.fromkeys(("exact", "ci_low", "ci_high", "approximate", "percent", "percent_ci_low", "percent_ci_high"))
    exact = float(arrays.exact[0])
    low, high = sorted(interval[:2]) if interval else (np.nan, np.nan)
    out = {"exact": exact, "ci_low": low, "ci_high": high, "approximate": float(arrays.approximate[0])}
    if model.kind == "level":
        # 100·Δŷ/ŷ₀ at the start point; the interval scaled by the same ŷ₀.
        scale = 100.0 / eta0 if eta0 else np.nan
        bounds = sorted((low * scale, high * scale))
        out.update(percent=exact * scale, percent_ci_low=bounds[0], percent_ci_high=bounds[1])
    else:
        out.update(percent=exact, percent_ci_low=low, percent_ci_high=high)
    return out


def _second_pass(setup: _Setup, shift: engine.Shift, fits: list[_Fit], progress: Progress = None) -> None:
    """One pass over the rows for every model solved from the Gram matrix: residuals, the focus
    effect's robust variance and the sums behind the original-scale R².

    Per sub-block of rows, one matrix product gives every model's focus-effect projection s and
    weighted residuals u = sqrt(w)·e, a model per row (level kinds, then log kinds); Σ(u·s)² is
    the HC0 variance. A log kind's original-scale prediction is proportional to v = y·exp(-e):
    with E = exp(-e) formed in place, Σv and Σyv are one product [y, y²]'E and Σv² is
    (y²)'(E∘E). A level kind's prediction is y - e, so its sums (Σv, Σv², Σyv) follow from Σe,
    Σe², Σye; unweighted, those are known without the pass (Σe = 0 with an intercept, Σe² the
    SSR, Σye = Σe² as e is orthogonal to ŷ), so the pass only forms u·s."""
    fits = sorted(fits, key=lambda f: f.model.kind == "log")  # level kinds first, then log kinds
    q, m = len(setup.columns), len(fits)
    n_level = sum(f.model.kind == "level" for f in fits)
    resid_map = np.zeros((q + 1, m))
    proj_map = np.zeros((q + 1, m))
    for i, fit in enumerate(fits):
        resid_map[fit.outcome.cols[0], i] = 1.0
        resid_map[fit.cols, i] -= fit.gamma
        if fit.projection is not None:
            proj_map[fit.cols, i] = fit.projection
    # One product per sub-block gives s, then u: one wide call took half the time of three,
    # and a model per row keeps each model's numbers contiguous. The log kinds' map is negated:
    # their products are -u, and exp(-e) is then formed in place.
    resid_map[:, n_level:] *= -1.0
    both_maps = np.ascontiguousarray(np.hstack((proj_map, resid_map)).T)  # a model per row
    root_w = shift.root_w
    y_raw = setup.design.y_raw
    level_sums = root_w is not None  # weighted: Σe, Σe², Σye of the level kinds from the pass

    finished, blocks = itertools.count(1), -(-shift.n // engine.BLOCK_ROWS)

    def one(block: np.ndarray, start: int, stop: int) -> np.ndarray:
        out = np.zeros((4, m))  # Σ(u·s)², then Σv, Σv², Σyv (Σe, Σe², Σye for level kinds)
        for lo in range(0, stop - start, _SUB_ROWS):
            rows = block[lo : lo + _SUB_ROWS]
            y = y_raw[start + lo : start + lo + len(rows)]
            # A model per row of the product: each model's s and u are contiguous.
            # np.dot, not @: it releases the GIL, so both threads multiply at once.
            both = np.dot(both_maps, rows.T)
            s, u = both[:m], both[m:]
            level, logs = u[:n_level], u[n_level:]
            s *= u
            out[0] += np.einsum("ij,ij->i", s, s)
            if root_w is not None:
                u /= root_w[start + lo : start + lo + len(rows)]
            if level_sums:
                out[1, :n_level] += level.sum(1)
                out[2, :n_level] += np.einsum("ij,ij->i", level, level)
                out[3, :n_level] += np.dot(level, y)
            np.exp(logs, out=logs)
            squares = y * y
            out[(1, 3), n_level:] += np.dot(logs, np.column_stack((y, squares))).T
            logs *= logs
            out[2, n_level:] += np.dot(logs, squares)
        _report(progress, next(finished) / blocks)  # called from the passes' threads
        return out

    sums = sum(engine.map_blocks(shift, one))
    n = len(y_raw)
    ya, yy = float(y_raw.sum()), float(y_raw @ y_raw)
    if not level_sums:
        ssr = np.array([f.ssr for f in fits[:n_level]])
        sums[1, :n_level], sums[2, :n_level], sums[3, :n_level] = 0.0, ssr, ssr
    se, see, sye = sums[1, :n_level].copy(), sums[2, :n_level].copy(), sums[3, :n_level].copy()
    sums[1, :n_level], sums[2, :n_level], sums[3, :n_level] = ya - se, yy - 2.0 * sye + see, yy - sye
    for i, fit in enumerate(fits):
        k = len(fit.cols)
        sv, svv, syv = sums[1:, i]
        cov_yv = syv - ya * sv / n
        var_y, var_v = yy - ya * ya / n, svv - sv * sv / n
        fit.measures["r2_original_scale"] = float(np.clip(cov_yv / np.sqrt(var_y) / np.sqrt(var_v), -1, 1) ** 2)
        if fit.arrays is None:
            fit.effect = _effect(fit.model, None, None, np.nan)
            continue
        kind = setup.spec.covariance
        if kind == "classical":
            var = fit.ssr / (n - k) * float(fit.arrays.c[0] @ fit.projection)
        else:
            var = float(sums[0, i]) * (n / (n - k) if _ONE_PASS[kind] else 1.0)
        fit.effect = _effect_from_var(fit.model, fit.arrays, var, fit.eta0)


def _effect_from_var(model: Model, arrays: Any, var: float, eta0: float) -> dict[str, Any]:
    """The interval of ``core.inference.effects.exact_interval`` for level and log outcomes, from
    the variance of the index change."""
    t = model.t_crit
    d = float(arrays.delta_index[0])
    se = float(np.sqrt(max(var, 0.0)))
    low, high = d - t * se, d + t * se
    if model.kind == "log":
        low, high = 100.0 * np.expm1(low), 100.0 * np.expm1(high)
    return _effect(model, arrays, (low, high), eta0)


# --- the summary --------------------------------------------------------------------------------
def _summary(setup: _Setup, fits: list[_Fit]) -> dict[str, Any]:
    good = [f for f in fits if f.error is None]
    if not good:
        raise DataError(f"no model of the sweep could be fitted: {fits[0].error}")
    best = min(f.measures["aic_original_scale"] for f in good)
    models = []
    for f in sorted(good, key=lambda f: f.measures["aic_original_scale"]):
        models.append(
            {
                "transforms": f.transforms,
                **{k: f.effect[k] for k in ("exact", "ci_low", "ci_high", "approximate")},
                "units": f.model.units,
                **{k: f.effect[k] for k in ("percent", "percent_ci_low", "percent_ci_high")},
                **{
                    k: f.measures[k]
                    for k in ("aic_original_scale", "bic_original_scale", "r2_original_scale", "loglik_original_scale")
                },
                "delta_aic": f.measures["aic_original_scale"] - best,
            }
        )
    by_choice = []
    for column, choices in setup.choices.items():
        for choice in choices:
            found = [m["percent"] for m in models if m["transforms"][column] == choice.transform.code]
            values = [v for v in found if v is not None and np.isfinite(v)]
            by_choice.append(
                {
                    "column": column,
                    "transform": choice.transform.code,
                    "median_percent": float(np.median(values)) if values else None,
                    "min_percent": min(values) if values else None,
                    "max_percent": max(values) if values else None,
                    "n_models": len(found),
                }
            )
    return {
        "focus": {"column": setup.focus, "change": setup.change_text},
        "n_obs": len(setup.design.y),
        "n_left_out": setup.n_left_out,
        "left_out": setup.left_out,
        "n_models": len(models),
        "forms": setup.forms,
        "held": setup.held,
        "held_for_cap": setup.held_for_cap,
        "not_fitted": [{"transforms": f.transforms, "reason": f.error} for f in fits if f.error is not None],
        "models": models,
        "by_choice": by_choice,
    }
