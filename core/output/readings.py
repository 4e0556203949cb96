"""Plain-language readings of coefficients, matched to the transform pair.

The four level/log readings follow Wooldridge, Introductory Econometrics, 7th ed., Table 2.3;
the dummy reading in a log model follows Halvorsen & Palmquist (1980); IHS readings follow
Bellemare & Wichman (2020). Every reading says "goes with", not "causes": a coefficient is
an association in this data, other regressors held fixed.
"""

from __future__ import annotations

import math

from core.model.design import Block, Term
from core.model.transforms import Transform, lookup
from core.output.unit_words import amount, label, one_more, one_more_phrase

HELD = "other regressors held fixed"


def _num(value: float) -> str:
    if not math.isfinite(value):
        return "n/a"
    magnitude = abs(value)
    if magnitude >= 1000:
        return f"{value:,.0f}" if magnitude < 1e15 else f"{value:.3g}"
    if magnitude >= 1:
        return f"{value:.3g}" if magnitude < 100 else f"{value:.1f}"
    return f"{value:.3g}"


def _signed_pct(value: float) -> str:
    return f"{'+' if value >= 0 else ''}{_num(value)} %"


def _capital(text: str) -> str:
    return text[:1].upper() + text[1:]


def _exact_pct(b: float) -> float:
    """100·(e^b − 1), infinite rather than an overflow error for a huge coefficient."""
    return 100.0 * math.expm1(b) if b < 700 else math.inf


def _outcome_move(outcome: Transform, y: str, b: float, unit: str | None = None) -> str:
    """How a one-unit move in the index reads on the outcome."""
    if outcome.code == "level":
        return f"a change of {amount(_num(b), unit)} in {y}"
    if outcome.is_log_like:
        exact = _exact_pct(b)
        if not math.isfinite(exact):
            return f"about {_signed_pct(100 * b)} in {y} (exactly a factor of e^{_num(b)}: too large to show)"
        return f"about {_signed_pct(100 * b)} in {y} (exactly {_signed_pct(exact)})"
    return f"a change of {_num(b)} in the {outcome.label(y)}; see the effects table for {y} itself"


def reading(
    term: Term, estimate: float, outcome: Transform, y: str, block: Block | None, units: dict[str, str] | None = None
) -> str:
    """One sentence that reads ``estimate`` for ``term`` in a model whose outcome is g(y);
    ``units`` names the columns' units where the user gave them (docs/contract.md §2)."""
    units = units or {}
    y_unit = units.get(y)
    if term.column is None:
        scale = label(y, y_unit) if outcome.code == "level" else outcome.label(y)
        return (
            f"Predicted {scale} when every regressor term is zero (categories at their reference level); "
            "often outside the data and not meaningful on its own."
        )
    x = term.column
    if term.by is not None:
        return _product_reading(term, estimate)
    if term.level is not None:
        ref = block.reference_level if block else "the reference level"
        return f"Compared with {x} = {ref}, {x} = {term.level} goes with {_outcome_move(outcome, y, estimate, y_unit)}, {HELD}."
    if block is not None and block.binary and term.transform == "level":
        return f"Rows with {x} = 1 compared with {x} = 0 go with {_outcome_move(outcome, y, estimate, y_unit)}, {HELD}."
    if term.power == 1:
        return (
            f"Together with the square term, the effect of {x} depends on its level: {one_more_phrase(units.get(x))} at {x} = 0 goes "
            f"with {_outcome_move(outcome, y, estimate, y_unit)}; use the effects table at the reference point."
        )
    if term.power == 2:
        shape = "flattens then reverses" if estimate < 0 else "steepens"
        return f"Curvature: as {x} grows its effect {shape} (square term {_num(estimate)} on the model's scale)."
    transform = block.spec.transform if block is not None else lookup(term.transform or "level")
    if transform is None or transform.code == "level":
        return f"{_capital(one_more(x, units.get(x)))} goes with {_outcome_move(outcome, y, estimate, y_unit)}, {HELD}."
    if transform.reads_per_percent:
        caveat = transform.reading_caveat(x)
        if outcome.code == "level":
            return f"A 1 % higher {x} goes with a change of about {amount(_num(estimate / 100), y_unit)} in {y}{caveat}, {HELD}."
        if outcome.is_log_like:
            return f"A 1 % higher {x} goes with about {_signed_pct(estimate)} in {y} (an elasticity){caveat}, {HELD}."
        return f"A 1 % higher {x} moves the {outcome.label(y)} by about {_num(estimate / 100)}{caveat}, {HELD}."
    return f"One more unit of the {transform.label(x)} goes with {_outcome_move(outcome, y, estimate, y_unit)}, {HELD}."


def _product_reading(term: Term, estimate: float) -> str:
    """A product term: how much the regressor's own coefficient differs with its moderator."""
    own, other = term.name.split(" × ", 1)
    if term.by_level is not None:
        where = f"for {term.by} = {term.by_level} than for {term.by} at its reference level"
    else:
        where = f"per unit more of {other}"
    direction = "higher" if estimate >= 0 else "lower"
    return (
        f"The coefficient of {own} is {_num(abs(estimate))} {direction} {where} (on the model's scale); "
        f"the effects table gives the effect at each value of {term.by}."
    )
