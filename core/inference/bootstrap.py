"""Bootstrap intervals for effects, scenarios and predictions (docs/contract.md §2.12, §3.15).

Resampling. A pairs bootstrap draws n rows with replacement; with ``cluster`` it draws G whole
groups (Efron & Tibshirani 1993, An Introduction to the Bootstrap, §9.5; Cameron & Miller 2015
§VI.A). A resample is its counts cᵢ (how often each unit is drawn), so a refit is weighted least
squares with weights cᵢ·wᵢ and needs only the sufficient statistics X'CWX and X'CWy: for every
draw at once they are the product of the (draws x units) count matrix with the units' summed
cross products, taken over chunks of units, never a resampled copy of the data. The design is
first centred and scaled (Z = [1, (X - mean)/sd], y likewise), which keeps those small systems
well conditioned; coefficients map back linearly.

Counts. Per seed, in fixed chunks of ``CHUNK_UNITS`` units: each draw's total per chunk from a
multinomial over the chunks, then that many uniform picks inside the chunk (together exactly a
multinomial draw of n units over all units). The same seed and draws give the same counts, and so
the same intervals, on any machine.

Statistics. Each target is the model's expected outcome at design rows: an effect or scenario
moves from X0 to X1, a prediction is the level at X1. Level outcome: the index x'b. Log outcome:
percent changes are 100·(exp Δη - 1) (the smearing factor cancels), levels exp(x'b)·φ with φ the
mean of exp of the draw's own residuals. Other outcomes: the smearing mean S(x'b) of the draw's
own residuals eᵢ* = yᵢ - xᵢ'b* weighted by the counts (Duan 1983), so the interval carries the
estimation noise of the residuals as well as of the coefficients. Up to ``EXACT_ROWS`` rows the
smearing mean is recomputed over every row in every draw; above, it is linearised in the
coefficient shift δ = b* - b̂: S* ≈ Σ cᵢ vᵢ / Σ cᵢ + d'δ with vᵢ = g⁻¹(η̂ + êᵢ) and d = mean of
(g⁻¹)'(η̂ + êᵢ)·(x - xᵢ), an error of order 1/n against a spread of order 1/√n.

Intervals (Efron 1987, JASA 82; Efron & Tibshirani 1993, §13.3 and §14.3): percentile, the α and
1 - α quantiles of the draws (numpy's linear interpolation); BCa, the quantiles at
Φ(z₀ + (z₀ + z_α)/(1 - a(z₀ + z_α))), z₀ = Φ⁻¹(share of draws below the estimate), a =
Σ dᵤ³/(6(Σ dᵤ²)^{3/2}) with dᵤ = mean - θ₍ᵤ₎ over the leave-one-unit-out (jackknife) values.
The jackknife refits come from the same sufficient statistics (one row left out: the
Sherman-Morrison update; one group: the group's cross products subtracted); the smearing mean in
them is linearised as above (error of order 1/n² per value).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from core.errors import FormwiseError
from core.model.fitted import Model

# Units (rows, or groups) per chunk of the passes and of the count generation: fixed, so that a
# seed gives the same counts whatever the machine.
CHUNK_UNITS = 4096
# Draws per block of counts (a block is at most CHUNK_UNITS x DRAW_BLOCK counts, 32 MB).
DRAW_BLOCK = 1024
# Rows per block when unit sums are formed, and (rows x draws) cells per block of the exact
# smearing pass.
ROW_BLOCK = 65_536
CELLS = 4_000_000
# Up to this many rows each draw's smearing mean is computed over every row (module docstring).
EXACT_ROWS = 20_000
# Draws whose resampled cross-product matrix is this close to singular are left out.
SINGULAR = 1e-10

Progress = Callable[[float], Any] | None


def within(progress: Progress, start: float, span: float) -> Progress:
    """``progress`` for a piece of work that covers ``span`` of the whole from ``start`` on."""
    if progress is None:
        return None
    return lambda share: progress(min(start + span * share, 1.0))


@dataclass(frozen=True)
class Target:
    """What one entry's bootstrap is about: the model's expected outcome moving from the design
    row ``start`` to ``end``, or its level at ``end`` (a prediction) when ``start`` is None."""

    end: np.ndarray
    start: np.ndarray | None = None


@dataclass
class Replicates:
    """The estimates, the usable draws (draws x targets) and the jackknife values (units x targets)."""

    estimate: np.ndarray
    draws: np.ndarray
    jackknife: np.ndarray
    failed: int


def _stopped() -> FormwiseError:
    return FormwiseError("the bootstrap was stopped before it finished; no bootstrap intervals were computed.")


# --- the centred basis and the units -----------------------------------------------------------------
@dataclass
class _Basis:
    """Z = [1, (X - mean)/sd] and ỹ = (y - mean)/sd; b = A·γ + a maps coefficients back."""

    mean: np.ndarray
    sd: np.ndarray
    y_mean: float
    y_sd: float

    @classmethod
    def of(cls, X: np.ndarray, y: np.ndarray) -> _Basis:
        mean, sd = X[:, 1:].mean(axis=0), X[:, 1:].std(axis=0)
        return cls(mean, np.where(sd > 0, sd, 1.0), float(y.mean()), float(y.std()) or 1.0)

    def rows(self, X: np.ndarray) -> np.ndarray:
        Z = np.empty(X.shape)
        Z[:, 0] = 1.0
        Z[:, 1:] = (X[:, 1:] - self.mean) / self.sd
        return Z

    def to_coef(self, gamma: np.ndarray) -> np.ndarray:
        """Coefficients in X's basis from those in Z's (rows of ``gamma``)."""
        b = np.empty_like(gamma)
        b[:, 1:] = self.y_sd * gamma[:, 1:] / self.sd
        b[:, 0] = self.y_mean + self.y_sd * (gamma[:, 0] - gamma[:, 1:] @ (self.mean / self.sd))
        return b


@dataclass
class _Units:
    """The resampled units: rows (pairs) or groups; ``order`` lists the rows unit by unit and
    ``first[u]`` is where unit u starts in it."""

    count: int
    order: np.ndarray
    first: np.ndarray
    of_row: np.ndarray  # unit of each row, in ``order``

    @classmethod
    def of(cls, n: int, groups: np.ndarray | None) -> _Units:
        if groups is None:
            rows = np.arange(n)
            return cls(n, rows, np.arange(n + 1), rows)
        codes, uniques = pd.factorize(np.asarray(groups).astype(str), sort=True)
        order = np.argsort(codes, kind="stable")
        sizes = np.bincount(codes, minlength=len(uniques))
        return cls(len(uniques), order, np.concatenate([[0], np.cumsum(sizes)]), codes[order])

    @property
    def pairs(self) -> bool:
        return self.count == len(self.order)

    def chunks(self) -> range:
        return range(0, self.count, CHUNK_UNITS)


def count_blocks(seed: int, units: int, draws: int) -> Iterator[tuple[int, int, int, np.ndarray]]:
    """(first unit, first draw, draws in block, counts) for every chunk of units and block of
    draws, in that order; counts[b, u] is how often draw b picks unit u (module docstring)."""
    rng = np.random.default_rng(seed)
    starts = np.arange(0, units, CHUNK_UNITS)
    sizes = np.diff(np.append(starts, units))
    totals = rng.multinomial(units, sizes / units, size=draws)
    for chunk, (start, size) in enumerate(zip(starts, sizes, strict=True)):
        for first in range(0, draws, DRAW_BLOCK):
            wanted = totals[first : first + DRAW_BLOCK, chunk]
            # 32-bit picks offset by each draw's row of the block (at most 2^22 cells): a third of
            # the time of 64-bit ones.
            picks = rng.integers(0, size, int(wanted.sum()), dtype=np.int32)
            picks += np.repeat(np.arange(0, len(wanted) * size, size, dtype=np.int32), wanted)
            counts = np.bincount(picks, minlength=len(wanted) * size).reshape(len(wanted), size)
            yield int(start), first, len(wanted), counts.astype(np.float64)


# --- what is computed per unit -----------------------------------------------------------------------
@dataclass
class _Problem:
    """Everything the passes read: the model's rows in the centred basis, the units, and the
    points where the smearing mean is needed (``points`` rows; the zero row for a log outcome's φ)."""

    model: Model
    basis: _Basis
    units: _Units
    points: np.ndarray  # (P, k) design rows needing a smearing mean; (0, k) when none
    upper: tuple[np.ndarray, np.ndarray]

    @property
    def k(self) -> int:
        return self.model.design.X.shape[1]

    @property
    def width(self) -> int:
        """Columns of the unit sums: cross products (upper triangle), Z'y, the row count, and
        vᵢ = g⁻¹(η̂ₚ + êᵢ) per smearing point."""
        return len(self.upper[0]) + self.k + 1 + len(self.points)

    def unit_sums(self, first: int, last: int) -> np.ndarray:
        """The summed columns of units first..last-1, by blocks of rows."""
        design, model = self.model.design, self.model
        rows = self.units.order[self.units.first[first] : self.units.first[last]]
        out = np.zeros((last - first, self.width))
        eta = self.points @ model.coef
        for start in range(0, len(rows), ROW_BLOCK):
            block = rows[start : start + ROW_BLOCK]
            Z = self.basis.rows(design.X[block])
            Zw = Z if design.weights is None else Z * design.weights[block, None]
            y = (design.y[block] - self.basis.y_mean) / self.basis.y_sd
            columns = [Z[:, self.upper[0]] * Zw[:, self.upper[1]], Zw * y[:, None], np.ones((len(block), 1))]
            if len(self.points):
                columns.append(model.outcome.inverse(eta[None, :] + model.resid[block, None]))
            values = np.hstack(columns)
            if self.units.pairs:
                out[start : start + len(block)] = values
            else:
                owner = self.units.of_row[self.units.first[first] + start :][: len(block)] - first
                for j in range(self.width):
                    out[:, j] += np.bincount(owner, weights=values[:, j], minlength=last - first)
        return out

    def solve(self, sums: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Coefficients (X's basis) for rows of summed columns, and which systems were usable."""
        k, (i, j) = self.k, self.upper
        gram = np.zeros((len(sums), k, k))
        gram[:, i, j] = sums[:, : len(i)]
        gram[:, j, i] = sums[:, : len(i)]
        right = sums[:, len(i) : len(i) + k]
        diagonal = np.sqrt(np.clip(np.einsum("bii->bi", gram), 1e-300, None))
        scaled = gram / diagonal[:, :, None] / diagonal[:, None, :]
        eigen = np.linalg.eigvalsh(scaled)
        usable = eigen[:, 0] > SINGULAR * eigen[:, -1]
        gamma = np.full((len(sums), k), np.nan)
        if usable.any():
            gamma[usable] = np.linalg.solve(gram[usable], right[usable, :, None])[:, :, 0]
        return self.basis.to_coef(gamma), usable

    def leave_one_row_out(self, first: int, last: int, full: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Pairs jackknife: each row left out by the Sherman-Morrison update of the full fit,
        γ₍ᵢ₎ = γ̂ - G⁻¹zᵢ·wᵢẽᵢ/(1 - hᵢ), hᵢ = wᵢzᵢ'G⁻¹zᵢ; rows of leverage 1 are not usable."""
        design, k, (i, j) = self.model.design, self.k, self.upper
        gram = np.zeros((k, k))
        gram[i, j] = full[: len(i)]
        gram[j, i] = full[: len(i)]
        inverse = np.linalg.inv(gram)
        gamma = inverse @ full[len(i) : len(i) + k]
        rows = self.units.order[first:last]
        Z = self.basis.rows(design.X[rows])
        w = np.ones(len(rows)) if design.weights is None else design.weights[rows]
        resid = (design.y[rows] - self.basis.y_mean) / self.basis.y_sd - Z @ gamma
        moved = Z @ inverse
        leverage = w * np.einsum("ij,ij->i", moved, Z)
        usable = leverage < 1.0 - SINGULAR
        step = (w * resid / np.where(usable, 1.0 - leverage, 1.0))[:, None] * moved
        return self.basis.to_coef(gamma[None, :] - step), usable

    def smear_derivatives(self) -> np.ndarray:
        """d_p = mean over rows of (g⁻¹)'(η̂ₚ + êᵢ)·(xₚ - xᵢ), the smearing mean's gradient in b."""
        model, X = self.model, self.model.design.X
        n = X.shape[0]
        eta = self.points @ model.coef
        total, weighted = np.zeros(len(self.points)), np.zeros((len(self.points), self.k))
        for start in range(0, n, ROW_BLOCK):
            slope = model.outcome.inverse_derivative(eta[None, :] + model.resid[start : start + ROW_BLOCK, None])
            total += slope.sum(axis=0)
            weighted += slope.T @ X[start : start + ROW_BLOCK]
        return (self.points * total[:, None] - weighted) / n


def _problem(model: Model, targets: list[Target], groups: np.ndarray | None) -> _Problem:
    k = model.design.X.shape[1]
    if model.kind == "smearing":
        points = np.vstack([row for t in targets for row in ((t.start, t.end) if t.start is not None else (t.end,))])
    elif model.kind == "log" and any(t.start is None for t in targets):
        points = np.zeros((1, k))
    else:
        points = np.zeros((0, k))
    basis = _Basis.of(model.design.X, model.design.y)
    return _Problem(model, basis, _Units.of(len(model.design.y), groups), points, np.triu_indices(k))


def _slots(model: Model, targets: list[Target]) -> list[tuple[int | None, int]]:
    """For each target, the smearing points of its start and end (as ``_problem`` stacks them)."""
    slots, next_point = [], 0
    for target in targets:
        if model.kind != "smearing":
            slots.append((None, 0))
        elif target.start is None:
            slots.append((None, next_point))
            next_point += 1
        else:
            slots.append((next_point, next_point + 1))
            next_point += 2
    return slots


def _statistics(model: Model, targets: list[Target], coefs: np.ndarray, smear: np.ndarray) -> np.ndarray:
    """Each target's value (columns) for rows of coefficients and of smearing means."""
    out = np.empty((len(coefs), len(targets)))
    for t, (target, (start, end)) in enumerate(zip(targets, _slots(model, targets), strict=True)):
        if model.kind == "smearing":
            level = smear[:, end]
            out[:, t] = level if start is None else 100.0 * (level / smear[:, start] - 1.0)
        elif target.start is None:
            eta = coefs @ target.end
            out[:, t] = eta if model.kind == "level" else np.exp(eta) * smear[:, 0]
        else:
            delta = coefs @ (target.end - target.start)
            out[:, t] = delta if model.kind == "level" else 100.0 * np.expm1(delta)
    return out


# --- the passes ------------------------------------------------------------------------------------------
class _Steps:
    """Progress over the passes; a callback returning False stops the bootstrap."""

    def __init__(self, progress: Progress, total: int) -> None:
        self.progress, self.total, self.done = progress, max(total, 1), 0

    def step(self) -> None:
        self.done += 1
        if self.progress is not None and self.progress(min(self.done / self.total, 1.0)) is False:
            raise _stopped()


def _draw_sums(problem: _Problem, draws: int, seed: int, steps: _Steps) -> tuple[np.ndarray, np.ndarray]:
    """Every draw's summed columns (counts x unit sums, chunk by chunk) and the full-sample sums."""
    units = problem.units.count
    sums, full = np.zeros((draws, problem.width)), np.zeros(problem.width)
    current, chunk = -1, np.zeros((0, problem.width))
    for start, first, m, counts in count_blocks(seed, units, draws):
        if start != current:
            current, chunk = start, problem.unit_sums(start, min(start + CHUNK_UNITS, units))
            full += chunk.sum(axis=0)
        sums[first : first + m] += counts @ chunk
        steps.step()
    return sums, full


def _exact_smear(problem: _Problem, coefs: np.ndarray, seed: int, steps: _Steps) -> np.ndarray:
    """Each draw's smearing means over every row: the counts regenerated from the seed, the draw's
    own residuals yᵢ - xᵢ'b*, Σ cᵢ g⁻¹(xₚ'b* + eᵢ*) / Σ cᵢ (small samples; module docstring)."""
    design, units, outcome = problem.model.design, problem.units, problem.model.outcome
    draws, P = len(coefs), len(problem.points)
    coefs = np.where(np.isfinite(coefs), coefs, problem.model.coef)  # unusable draws: any finite value
    totals, weight = np.zeros((draws, P)), np.zeros(draws)
    for start, first, m, counts in count_blocks(seed, units.count, draws):
        last = min(start + CHUNK_UNITS, units.count)
        rows = units.order[units.first[start] : units.first[last]]
        owner = units.of_row[units.first[start] : units.first[last]] - start
        per_block = max(1, CELLS // max(len(rows), 1))
        for low in range(0, m, per_block):
            high = min(low + per_block, m)
            b = coefs[first + low : first + high]
            row_counts = counts[low:high][:, owner]
            resid = design.y[rows][None, :] - b @ design.X[rows].T
            eta = b @ problem.points.T
            for p in range(P):
                totals[first + low : first + high, p] += (row_counts * outcome.inverse(eta[:, p, None] + resid)).sum(axis=1)
            weight[first + low : first + high] += row_counts.sum(axis=1)
        steps.step()
    return totals / weight[:, None]


def _linear_smear(
    problem: _Problem, sums: np.ndarray, coefs: np.ndarray, d: np.ndarray, drop: np.ndarray | None = None
) -> np.ndarray:
    """Smearing means S ≈ Σ cᵢvᵢ / Σ cᵢ + d'(b - b̂) from summed columns (module docstring);
    ``drop``, the left-out units' own sums, is subtracted first (jackknife)."""
    P = len(problem.points)
    if P == 0:
        return np.zeros((len(coefs), 0))
    count = problem.width - P - 1
    left = sums if drop is None else sums[None, :] - drop
    return left[:, count + 1 :] / left[:, count, None] + (coefs - problem.model.coef) @ d.T


def _jackknife(problem: _Problem, targets: list[Target], full: np.ndarray, d: np.ndarray, steps: _Steps) -> np.ndarray:
    """Leave-one-unit-out values of every target, from the full sums minus each unit's own."""
    out = []
    for start in problem.units.chunks():
        last = min(start + CHUNK_UNITS, problem.units.count)
        own = problem.unit_sums(start, last)
        if problem.units.pairs:
            coefs, usable = problem.leave_one_row_out(start, last, full)
        else:
            coefs, usable = problem.solve(full[None, :] - own)
        smear = _linear_smear(problem, full, coefs, d, own)
        values = _statistics(problem.model, targets, coefs, smear)
        out.append(values[usable])
        steps.step()
    return np.vstack(out)


def replicate(
    model: Model, targets: list[Target], draws: int, seed: int, groups: np.ndarray | None = None, progress: Progress = None
) -> Replicates:
    """The bootstrap draws and jackknife values of every target (module docstring). ``groups``
    (one label per row used) resamples whole groups; ``progress`` is called with the share done
    and stops the work, raising ``FormwiseError``, when it returns False."""
    problem = _problem(model, targets, groups)
    chunks = len(problem.units.chunks())
    blocks = chunks * -(-draws // DRAW_BLOCK)
    exact = len(problem.points) > 0 and len(model.design.y) <= EXACT_ROWS
    steps = _Steps(progress, blocks * (2 if exact else 1) + chunks)
    sums, full = _draw_sums(problem, draws, seed, steps)
    coefs, usable = problem.solve(sums)
    d = problem.smear_derivatives() if len(problem.points) else np.zeros((0, problem.k))
    smear = _exact_smear(problem, coefs, seed, steps) if exact else _linear_smear(problem, sums, coefs, d)
    values = _statistics(model, targets, coefs, smear)
    estimate_smear = model.smear(problem.points @ model.coef)[0][None, :] if len(problem.points) else np.zeros((1, 0))
    estimate = _statistics(model, targets, model.coef[None, :], estimate_smear)[0]
    jackknife = _jackknife(problem, targets, full, d, steps)
    return Replicates(estimate, values[usable], jackknife, int(np.count_nonzero(~usable)))


# --- intervals ---------------------------------------------------------------------------------------------
def percentile_interval(draws: np.ndarray, confidence: float = 0.95) -> list[float]:
    alpha = (1.0 - confidence) / 2.0
    return [float(v) for v in np.quantile(draws, [alpha, 1.0 - alpha])]


def acceleration(jackknife: np.ndarray) -> float:
    """a = Σ d³ / (6 (Σ d²)^{3/2}), d = mean - θ₍ᵤ₎ (Efron 1987, eq. 6.6 with jackknife values)."""
    spread = jackknife.mean() - jackknife
    squares = float(np.sum(spread**2))
    return float(np.sum(spread**3)) / (6.0 * squares**1.5) if squares > 0 else 0.0


def bca_interval(draws: np.ndarray, estimate: float, jackknife: np.ndarray, confidence: float = 0.95) -> list[float] | None:
    """The BCa interval (Efron 1987); None when every draw lies on one side of the estimate."""
    share = float(np.mean(draws < estimate))
    if not 0.0 < share < 1.0:
        return None
    z0, a = float(stats.norm.ppf(share)), acceleration(jackknife)
    z = stats.norm.ppf([(1.0 - confidence) / 2.0, (1.0 + confidence) / 2.0])
    levels = stats.norm.cdf(z0 + (z0 + z) / (1.0 - a * (z0 + z)))
    return [float(v) for v in np.quantile(draws, levels)]


def intervals(replicates: Replicates, confidence: float = 0.95) -> list[dict[str, Any]]:
    """Per target: ``{draws, percentile, bca}`` (docs/contract.md §3.15)."""
    out = []
    for t, estimate in enumerate(replicates.estimate):
        draws = replicates.draws[:, t]
        draws = draws[np.isfinite(draws)]
        jackknife = replicates.jackknife[:, t]
        jackknife = jackknife[np.isfinite(jackknife)]
        if len(draws) < 2 or not np.isfinite(estimate):
            out.append({"draws": len(draws), "percentile": None, "bca": None})
            continue
        out.append(
            {
                "draws": len(draws),
                "percentile": percentile_interval(draws, confidence),
                "bca": bca_interval(draws, float(estimate), jackknife, confidence) if len(jackknife) > 2 else None,
            }
        )
    return out


# --- the result entries -------------------------------------------------------------------------------------
def effect_target(model: Model, entry: dict[str, Any]) -> Target:
    """An effect entry (§3.7): from its ``reference`` point to the same with ``to``."""
    start = dict(entry["reference"])
    return Target(model.encode(dict(start, **{entry["column"]: entry["to"]}), 1)[0], model.encode(start, 1)[0])


def scenario_target(model: Model, entry: dict[str, Any]) -> Target:
    """A scenario entry (§3.14): before and after its changes."""
    before = dict(model.design.reference, **{c["column"]: c["from"] for c in entry["changes"]})
    after = dict(before, **{c["column"]: c["to"] for c in entry["changes"]})
    return Target(model.encode(after, 1)[0], model.encode(before, 1)[0])


def prediction_target(model: Model, entry: dict[str, Any]) -> Target:
    """A prediction entry (§3.11): the expected outcome at its point."""
    return Target(model.encode(entry["values"], 1)[0])
