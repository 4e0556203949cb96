"""Effects of regressor changes: exact, approximate, intervals. Written once for every pair.

A change moves one regressor from x0 to x1 in original units, with every other regressor
held at the reference point. The design rows X0 and X1 come from the same encoder the fit
used, so the linear index moves by Δη = (X1 - X0)·b for any regressor transform (level, log,
IHS, shifted log, square root, quadratic, category). The effect on y then depends only on
the outcome transform g (docs/contract.md §3):

- level y:      exact = Δη                          (difference of predictions, y's units)
- log y:        exact = 100·(exp(Δη) - 1)           (percent; Halvorsen & Palmquist 1980 for
                                                     dummies; Wooldridge, Introductory
                                                     Econometrics, 7th ed., §6.2 and eq. 7.10)
- any other g:  exact = 100·(S(η1)/S(η0) - 1)       (percent), S(η) = (1/n)·Σᵢ g⁻¹(η + êᵢ), the
                                                     smearing estimate of E[y | x] (Duan 1983).
                For log y the smearing factor cancels and this equals the line above.

The approximate effect is the first-order (derivative) effect times the change:
dη = (∂basis/∂x at x0 · b)·(x1 - x0); level y: dη; log y: 100·dη; other g:
100·S'(η0)·dη / S(η0). For the four level/log pairs this is the textbook reading
(Wooldridge, Table 2.3): b·Δx, 100·b·Δx %, (b/100)·%Δx, b·%Δx %. For a category or a
0/1 switch, where no derivative exists, dη is the index change itself (the 100·b % reading).

Intervals. Δη = c'b is linear in b, so its t interval (se = sqrt(c'Vc)) is exact under the
model's assumptions; for level and log y the exact effect is a monotone function of Δη, so
that interval is carried through the function (for one coefficient this is the
coefficient's own interval). For other g the delta method is used with residuals held fixed
(Greene, Econometric Analysis, 8th ed., Theorem D.22).

The small-sample adjusted dummy effect in a log model is 100·(exp(Δη - ½·Var(Δη)) - 1)
(Kennedy 1981, AER 71(4)).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

from core.inference.changes import default_change_text
from core.model.design import Block, match_level, unknown_level
from core.model.fitted import Model
from core.model.spec import MAX_GROUPS, Change, parse_change

# The sample-average effect is taken over a seeded random sample of rows when the data are
# larger than this (its sampling error is then far below the effect's own standard error) ...
_AVERAGE_ROWS = 20_000
# ... and, when smearing is needed, over fewer rows and residual quantiles, to bound the work.
_AVERAGE_ROWS_SMEARING = 2_000
_AVERAGE_RESIDUALS = 1_000


@dataclass
class EffectArrays:
    exact: np.ndarray
    approximate: np.ndarray
    delta_index: np.ndarray
    c: np.ndarray  # (m, k) rows X1 - X0
    gradient: np.ndarray  # (m, k) d exact / d b


def effect_arrays(
    model: Model, block: Block, x0: np.ndarray, x1: np.ndarray, base: dict[str, Any], m: int, resid: np.ndarray | None = None
) -> EffectArrays:
    """Exact and approximate effects of moving ``block``'s regressor from x0 to x1 (arrays of m)."""
    column = block.spec.column
    point0 = dict(base, **{column: x0})
    point1 = dict(base, **{column: x1})
    X0 = model.encode(point0, m)
    X1 = model.encode(point1, m)
    b = model.coef
    if block.is_category or block.binary:
        first_order = X1 @ b - X0 @ b  # the index change itself, as outcome_change computes it
    else:
        slope = model.design.encoder.index_slope(column, x0, X0, b)
        first_order = slope * (np.asarray(x1, dtype=float) - np.asarray(x0, dtype=float))
    return outcome_change(model, X0, X1, first_order, resid)


def _warn_many_groups(model: Model, block: Block, warnings: list[str]) -> None:
    """A category moderator with more levels than effects are given at by default."""
    by = block.spec.by
    if by is None or block.spec.by_at:
        return
    moderator = model.design.encoder.block(by)
    if moderator.is_category and len(moderator.levels) + 1 > MAX_GROUPS:
        warnings.append(
            f"'{by}' has {len(moderator.levels) + 1:,} levels; the effects of '{block.spec.column}' are given at the first "
            f"{MAX_GROUPS} (the reference first). Name the levels you want in the regressor's 'at'."
        )


def moderator_groups(model: Model, block: Block) -> list[dict[str, Any] | None]:
    """Where the effects of a crossed regressor are read: each value of its moderator as
    ``{moderator: value}`` (every level of a category, reference first; 0 and 1 of a dummy;
    else the spec's ``at`` values or the quartiles), or ``[None]`` for a regressor without one."""
    by = block.spec.by
    if by is None:
        return [None]
    moderator = model.design.encoder.block(by)
    if moderator.is_category:
        known = [moderator.reference_level, *moderator.levels]
        chosen = [match_level(v, known) for v in block.spec.by_at] if block.spec.by_at else known[:MAX_GROUPS]
        return [{by: level} for level in chosen]
    if block.spec.by_at:
        values = [float(v) for v in block.spec.by_at]
    elif moderator.binary:
        values = [0.0, 1.0]
    else:
        values = list(dict.fromkeys(float(v) for v in np.quantile(model.design.values[by], [0.25, 0.5, 0.75])))
    return [{by: value} for value in values]


def outcome_change(
    model: Model, X0: np.ndarray, X1: np.ndarray, first_order: np.ndarray, resid: np.ndarray | None = None
) -> EffectArrays:
    """The exact and approximate effect on y of moving the design rows from X0 to X1 (any number
    of regressors at once), given the first-order index change ``first_order``: the outcome
    transform maps Δη to y as the module docstring says."""
    b = model.coef
    c = X1 - X0
    eta0, eta1 = X0 @ b, X1 @ b
    delta = eta1 - eta0
    if model.kind == "level":
        return EffectArrays(delta, first_order, delta, c, c)
    if model.kind == "log":
        exact = 100.0 * np.expm1(delta)
        return EffectArrays(exact, 100.0 * first_order, delta, c, 100.0 * np.exp(delta)[:, None] * c)
    s0, ds0 = model.smear(eta0, resid)
    s1, ds1 = model.smear(eta1, resid)
    exact = 100.0 * (s1 / s0 - 1.0)
    approximate = 100.0 * ds0 * first_order / s0
    gradient = 100.0 * (ds1[:, None] * X1 * s0[:, None] - s1[:, None] * ds0[:, None] * X0) / (s0**2)[:, None]
    return EffectArrays(exact, approximate, delta, c, gradient)


def default_change(block: Block, x: np.ndarray) -> Change:
    """The change when the spec names none, by the one rule in ``core.inference.changes``
    (common practice, no source): 0->1 for dummies, +1 or a round step for whole numbers,
    +10 % on relative scales, else a round step near the typical spread."""
    # A design's values are finite: rows with missing or infinite cells were dropped.
    text = default_change_text(x, block.spec.transform.relative_change, binary=block.binary, finite=True)
    return parse_change(text, f"spec.regressors ({block.spec.column})")


def _start_end(change: Change, x_ref: Any) -> tuple[Any, Any]:
    if change.kind == "switch":
        return change.start, change.end
    return x_ref, change.apply(x_ref)


def compute_effects(model: Model, only: str | None = None, with_average: bool = True) -> tuple[list[dict[str, Any]], list[str]]:
    """One effect per regressor (one per level for categories without a named change)."""
    design = model.design
    out: list[dict[str, Any]] = []
    warnings: list[str] = []
    for block in design.encoder.blocks:
        column = block.spec.column
        if only is not None and column != only:
            continue
        if block.is_category:
            known = [block.reference_level, *block.levels]
            if block.spec.change is not None:
                ends = [match_level(v, known) for v in (block.spec.change.start, block.spec.change.end)]
                for given, level in zip((block.spec.change.start, block.spec.change.end), ends, strict=True):
                    if level is None:
                        raise_level(column, str(given), set(known))
                pairs = [(ends[0], ends[1], block.spec.change.text)]
            else:
                pairs = [(block.reference_level, lv, f"{block.reference_level}->{lv}") for lv in block.levels]
            for group in moderator_groups(model, block):
                for start, end, text in pairs:
                    out.append(_one_effect(model, block, start, end, text, warnings, with_average, group=group))
            continue
        change = block.spec.change or default_change(block, design.values[column])
        if change.kind == "switch" and not all(isinstance(v, float) for v in (change.start, change.end)):
            from core.errors import SpecError

            raise SpecError(f"spec.regressors ({column}): '{change.text}' must go between two numbers for a numeric column.")
        x0, x1 = _start_end(change, design.reference[column])
        _warn_many_groups(model, block, warnings)
        for group in moderator_groups(model, block):
            out.append(_one_effect(model, block, x0, x1, change.text, warnings, with_average, change, group))
    return out, warnings


def raise_level(column: str, level: str, known: set[str]) -> None:
    from core.errors import SpecError

    raise SpecError(unknown_level(f"spec.regressors ({column})", level, column, sorted(known)))


def _one_effect(
    model: Model,
    block: Block,
    x0: Any,
    x1: Any,
    text: str,
    warnings: list[str],
    with_average: bool = True,
    change: Change | None = None,
    group: dict[str, Any] | None = None,
) -> dict[str, Any]:
    """One effect entry (docs/contract.md §3.7); ``group`` holds the moderator's value for a
    crossed regressor, read into the reference point."""
    design = model.design
    column = block.spec.column
    base = dict(design.reference, **(group or {}))
    base[column] = x0
    entry: dict[str, Any] = {
        "column": column,
        "change": text,
        "units": model.units,
        "from": x0,
        "to": x1,
        "level": x1 if block.is_category else None,
        "group": group,
        "reference": base,
    }
    if not block.is_category:
        bad0, reason = block.spec.transform.invalid(np.array([x0], dtype=float))
        bad1, _ = block.spec.transform.invalid(np.array([x1], dtype=float))
        if bad0[0] or bad1[0]:
            warnings.append(
                f"the change {text} of '{column}' (from {x0:g} to {x1:g}) leaves the range its transform takes: {reason}."
            )
            empty = ("elasticity", "approximate", "exact", "ci_low", "ci_high", "adjusted", "average", "gap", "interval_method")
            entry.update(dict.fromkeys(empty), extrapolated=True)
            return entry
    arrays = effect_arrays(
        model,
        block,
        np.array([x0], dtype=object if block.is_category else float),
        np.array([x1], dtype=object if block.is_category else float),
        base,
        1,
    )
    exact = float(arrays.exact[0])
    approximate = float(arrays.approximate[0])
    var_delta = float(arrays.c[0] @ model.cov @ arrays.c[0])
    low, high, method = exact_interval(model, arrays, exact)
    adjusted = None
    if (
        model.kind == "log"
        and (block.is_category or block.binary)
        and {float(x0) if not block.is_category else 0, float(x1) if not block.is_category else 1} == {0.0, 1.0}
    ):
        adjusted = float(100.0 * np.expm1(float(arrays.delta_index[0]) - 0.5 * var_delta))
    entry.update(
        elasticity=None if (block.is_category or block.binary) else elasticity(model, block, base),
        approximate=approximate,
        exact=exact,
        ci_low=float(min(low, high)),
        ci_high=float(max(low, high)),
        adjusted=adjusted,
        average=_average_effect(model, block, x0, x1, text, exact, change, group) if with_average else None,
        gap=approximate - exact,
        interval_method=method,
        extrapolated=_outside(design.observed_range(column), x0, x1) if not block.is_category else False,
    )
    _mark_outside(model, entry, warnings)
    if not np.isfinite(exact):
        warnings.append(
            f"the exact effect of {text} in '{column}' cannot be computed: it is too large for floating-point numbers or "
            "leaves the range the outcome's transform maps back to; it is shown empty (see the approximate effect)."
        )
    return entry


def exact_interval(model: Model, arrays: EffectArrays, exact: float) -> tuple[float, float, str]:
    """The exact effect's interval and how it was found: the t interval of the index change
    carried through the monotone map for level and log outcomes, the delta method otherwise."""
    c = arrays.c[0]
    t = model.t_crit
    if model.kind == "smearing":
        g = arrays.gradient[0]
        se = float(np.sqrt(g @ model.cov @ g))
        return exact - t * se, exact + t * se, "delta method"
    se_delta = float(np.sqrt(c @ model.cov @ c))
    d = float(arrays.delta_index[0])
    low, high = d - t * se_delta, d + t * se_delta
    if model.kind == "log":
        low, high = 100.0 * np.expm1(low), 100.0 * np.expm1(high)
    single = int(np.count_nonzero(np.abs(c) > 0)) == 1
    return low, high, "coefficient interval carried through" if single else "interval of the index change carried through"


def elasticity(model: Model, block: Block, point: dict[str, Any]) -> float | None:
    """Elasticity of E[y | x] with respect to the regressor at ``point``:
    ξ = ∂E[y|x]/∂x · x / E[y|x] (Bellemare & Wichman 2020, eqs. 5-10, for IHS terms; the same
    definition for every transform). With dη/dx = ∂basis/∂x · b: level y, ξ = dη/dx · x / η;
    log y, ξ = dη/dx · x; any other g, ξ = S'(η)/S(η) · dη/dx · x with S the smearing mean."""
    column = block.spec.column
    x = float(point[column])
    row = model.encode(point, 1)
    eta = float((row @ model.coef)[0])
    slope = float(model.design.encoder.index_slope(column, np.array([x]), row, model.coef)[0])
    if model.kind == "level":
        return slope * x / eta if eta != 0 else None
    if model.kind == "log":
        return slope * x
    level, derivative = model.smear(np.array([eta]))
    return float(derivative[0] / level[0] * slope * x)


def _mark_outside(model: Model, entry: dict[str, Any], warnings: list[str]) -> None:
    """Warn of an effect that reaches outside the observed range of its regressor, or is read at
    a numeric moderator's value outside that one's range (then marked extrapolated too)."""
    text, column = entry["change"], entry["column"]
    if entry["extrapolated"]:
        warnings.append(
            f"the effect of {text} in '{column}' reaches outside the observed range of '{column}'; it is an extrapolation."
        )
    for by, value in (entry["group"] or {}).items():
        if not model.design.encoder.block(by).is_category and _outside(model.design.observed_range(by), value, value):
            entry["extrapolated"] = True
            warnings.append(
                f"the effect of {text} in '{column}' at {by} = {value:g} reads the model outside the observed range of "
                f"'{by}'; it is an extrapolation."
            )


def _outside(observed: tuple[float, float], x0: float, x1: float) -> bool:
    low, high = observed
    return bool(min(x0, x1) < low or max(x0, x1) > high)


@functools.lru_cache(maxsize=8)
def _average_rows(n: int, limit: int) -> np.ndarray:
    """The rows the sample average is taken over: all of them, or a seeded random sample (the
    same for every effect and every refit of n rows, so drawn once; read-only)."""
    rows = np.arange(n) if n <= limit else np.sort(np.random.default_rng(0).choice(n, limit, replace=False))
    rows.flags.writeable = False
    return rows


def _average_effect(
    model: Model,
    block: Block,
    x0: Any,
    x1: Any,
    text: str,
    at_reference: float,
    change: Change | None = None,
    group: dict[str, Any] | None = None,
) -> float | None:
    """The effect averaged over the sample's rows (each row's own values, the change applied
    to it), where it differs from the effect at the reference point; else None. Large samples
    are averaged over a seeded random sample of rows (see ``_AVERAGE_ROWS``).

    For level and log outcomes a row's exact effect depends on that row only through the
    changed regressor's own columns: Δηᵢ = (basis(x1ᵢ) - basis(x0ᵢ))·b_block. A category
    change, an A->B switch, and a change the transform steps evenly (``Transform.even_step``: +10 %
    of a log, +1 in levels) move every row by the same Δη, so the average equals the effect at
    the reference point and None is returned without evaluating any row. ``change`` is the
    regressor's change when the caller has it (``default_change`` reads the column).

    A crossed regressor's Δηᵢ also depends on the row's other factor, so it takes the general
    path: every sampled row's own values, with the moderator held at ``group``.
    """
    design = model.design
    column = block.spec.column
    closed_form = model.kind in ("level", "log") and not design.encoder.crossed(column)
    switch = block.is_category or text.find("->") >= 0
    if closed_form and switch:
        return None
    if not switch:
        change = change or block.spec.change or default_change(block, design.values[column])
        if closed_form and block.spec.transform.even_step() == change.kind:
            return None
    n = len(design.y)
    rows = _average_rows(n, _AVERAGE_ROWS_SMEARING if model.kind == "smearing" else _AVERAGE_ROWS)
    if closed_form:
        start = design.values[column][rows].astype(float)
        end = change.apply(start)
        bad, _ = block.spec.transform.invalid(end)
        if bad.any():
            start, end = start[~bad], end[~bad]
        if len(start) == 0:
            return None
        transform = block.spec.transform
        delta = (transform.basis(end) - transform.basis(start)) @ model.coef[block.start : block.stop]
        exact = delta if model.kind == "level" else 100.0 * np.expm1(delta)
        if np.max(np.abs(exact - at_reference)) <= 1e-6 * (1.0 + abs(at_reference)):
            return None
        return float(np.mean(exact))
    resid = None
    if model.kind == "smearing" and n > _AVERAGE_RESIDUALS:
        resid = np.quantile(model.resid, (np.arange(_AVERAGE_RESIDUALS) + 0.5) / _AVERAGE_RESIDUALS)
    base = {col: vals[rows] for col, vals in design.values.items()}
    m = len(rows)
    for by, value in (group or {}).items():
        base[by] = np.full(m, value, dtype=object if isinstance(value, str) else float)
    if switch:
        start = np.full(m, x0, dtype=object if block.is_category else float)
        end = np.full(m, x1, dtype=object if block.is_category else float)
    else:
        start = base[column].astype(float)
        end = change.apply(start)
        bad, _ = block.spec.transform.invalid(end)
        if bad.any():
            keep = ~bad
            start, end = start[keep], end[keep]
            base = {col: vals[keep] for col, vals in base.items()}
            m = int(keep.sum())
    if m == 0:
        return None
    arrays = effect_arrays(model, block, start, end, base, m, resid)
    average = float(np.mean(arrays.exact))
    if np.max(np.abs(arrays.exact - at_reference)) <= 1e-6 * (1.0 + abs(at_reference)):
        return None
    return average


def gap_curves(model: Model, block: Block) -> list[dict[str, Any]]:
    """The regressor's gap curve, or one per value of its moderator (``moderator_groups``)."""
    found = [gap_curve(model, block, group=group) for group in moderator_groups(model, block)]
    return [curve for curve in found if curve is not None]


def gap_curve(model: Model, block: Block, points: int = 61, group: dict[str, Any] | None = None) -> dict[str, Any] | None:
    """Approximate and exact effect across change sizes, for the gap chart.

    Percent changes run from -50 % to +100 %; unit changes from -L to +2L with L the larger
    of the chosen change and one standard deviation. Categories and 0/1 switches have no
    continuum of changes and get no curve.
    """
    if block.is_category or block.binary:
        return None
    design = model.design
    column = block.spec.column
    change = block.spec.change or default_change(block, design.values[column])
    if change.kind == "percent":
        x_ref = float(design.reference[column])
        sizes = np.union1d(np.linspace(-50.0, 100.0, points), [change.amount])
        x1 = x_ref * (1.0 + sizes / 100.0)
    else:
        if change.kind == "switch":
            x_ref, amount = float(change.start), float(change.end) - float(change.start)
        else:
            x_ref, amount = float(design.reference[column]), change.amount
        span = max(abs(amount), float(np.std(design.values[column])))
        sizes = np.union1d(np.linspace(-span, 2.0 * span, points), [amount])
        x1 = x_ref + sizes
    bad, _ = block.spec.transform.invalid(x1)
    sizes, x1 = sizes[~bad & (sizes != 0)], x1[~bad & (sizes != 0)]
    arrays = effect_arrays(model, block, np.full(len(sizes), x_ref), x1, dict(design.reference, **(group or {})), len(sizes))
    return {
        "column": column,
        "group": group,
        "kind": "percent" if change.kind == "percent" else "units",
        "units": model.units,
        "from": x_ref,
        "chosen": change.amount if change.kind != "switch" else amount,
        "sizes": sizes.tolist(),
        "approximate": arrays.approximate.tolist(),
        "exact": arrays.exact.tolist(),
    }


def slope_tests(model: Model) -> list[dict[str, Any]]:
    """For each crossed regressor, the Wald test that its slope is the same at every value of
    its moderator: H₀ all its product coefficients are zero, W = b_R'(V_RR)⁻¹b_R with V the
    model's chosen covariance, reported as F = W/q on (q, df) degrees of freedom, df the one the
    model's t intervals use (Greene, Econometric Analysis, 8th ed., §5.3.2 and eq. 5-16)."""
    out = []
    for product in model.design.encoder.products:
        cols = np.arange(product.start, product.stop)
        b = model.coef[cols]
        V = model.cov[np.ix_(cols, cols)]
        q = len(cols)
        try:
            wald = float(b @ np.linalg.solve(V, b))
        except np.linalg.LinAlgError:
            wald = float(b @ np.linalg.pinv(V) @ b)
        statistic = wald / q
        out.append(
            {
                "column": product.column,
                "by": product.by,
                "statistic": statistic,
                "chi2": wald,
                "df_num": q,
                "df_denom": model.df,
                "p_value": float(stats.f.sf(statistic, q, model.df)),
            }
        )
    return out
