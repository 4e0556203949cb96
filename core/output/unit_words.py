"""A column's unit in words: the one rule that readings, axis titles, tables and footers follow.

The user names a column's unit in the spec (docs/contract.md §2.3) and it is shown as written,
read in one of two ways:

- a **noun**: lower-case letters, spaces, hyphens or apostrophes only, at least three letters,
  and not a rate (no word "per"), such as "square foot", "year" or "visitor". A reading says
  "one more square foot of sqrft"; an amount takes the plural unless it is exactly 1
  ("+1 year", "+100 square feet"); a label names the plural ("sqrft (square feet)").
- a **symbol, code or rate**: anything else, such as "$", "kg", "USD", "°C", "km/h" or
  "$ per week". It stands after the number as written: "+1 $ in drink_price",
  "+2,178 $ per week", "drink_price ($)".

Without a unit the words stay the unit-free ones ("one more unit of x", a number alone).
"""

from __future__ import annotations

import re
from typing import Any

_NOUN = re.compile(r"^[a-z][a-z' -]*$")
_LAST_WORD = re.compile(r"[a-z']+$")
# The irregular plurals a unit is likely to end in (common English, no source).
_IRREGULAR = {
    "foot": "feet",
    "person": "people",
    "child": "children",
    "man": "men",
    "woman": "women",
    "tooth": "teeth",
    "mouse": "mice",
    "goose": "geese",
}


def is_noun(unit: str) -> bool:
    """Whether ``unit`` reads as a noun ("one more year") rather than a symbol or rate ("+1 $")."""
    letters = sum(ch.isalpha() for ch in unit)
    return bool(_NOUN.match(unit)) and letters >= 3 and "per" not in unit.split()


def _plural_word(word: str) -> str:
    if word in _IRREGULAR:
        return _IRREGULAR[word]
    if word.endswith("s") or not any(v in word for v in "aeiouy"):
        return word  # already plural, or an abbreviation such as "mph" or "sqft"
    if word.endswith("y") and word[-2:-1] not in "aeiou":
        return word[:-1] + "ies"
    if word.endswith(("x", "z", "ch", "sh")):
        return word + "es"
    return word + "s"


def plural(unit: str) -> str:
    """The unit as it names several: a noun's last word in the plural, a symbol as written."""
    if not is_noun(unit):
        return unit
    match = _LAST_WORD.search(unit)
    if match is None:
        return unit
    return unit[: match.start()] + _plural_word(match.group())


def one_more_phrase(unit: str | None) -> str:
    """'one more unit', 'one more square foot' or '+1 $ per week'."""
    if not unit:
        return "one more unit"
    return f"one more {unit}" if is_noun(unit) else f"+1 {unit}"


def one_more(x: str, unit: str | None) -> str:
    """'one more unit of x', 'one more square foot of x' or '+1 $ in x'."""
    joint = "in" if unit and not is_noun(unit) else "of"
    return f"{one_more_phrase(unit)} {joint} {x}"


def amount(number: str, unit: str | None, space: str = " ") -> str:
    """A printed number in a column's unit: '+2,178 $ per week', '+1 year', '+2.5 years';
    the number alone without a unit (or when it is a dash, not a number)."""
    if not unit or not any(ch.isdigit() for ch in number):
        return number
    single = number.lstrip("+-\u2212") == "1"
    return f"{number}{space}{unit if single else plural(unit)}"


def label(name: str, unit: str | None, fallback: str | None = None) -> str:
    """An axis title or column name with its unit: 'drink_price ($)', 'sqrft (square feet)';
    'name (fallback)' or the name alone without a unit."""
    shown = plural(unit) if unit else fallback
    return f"{name} ({shown})" if shown else name


def spec_units(spec: dict[str, Any] | None) -> dict[str, str]:
    """Column -> unit from a plain spec's outcome and regressor entries (blank: none)."""
    spec = spec or {}
    entries = [spec.get("outcome") or {}, *(spec.get("regressors") or [])]
    found = {str(e.get("column")): " ".join(str(e.get("unit") or "").split()) for e in entries if isinstance(e, dict)}
    return {column: unit for column, unit in found.items() if unit}


def units_of(result: dict[str, Any] | None, spec: dict[str, Any] | None = None) -> dict[str, str]:
    """The units a result was computed with (its ``column_units``, docs/contract.md §3.1), else
    the spec's."""
    given = (result or {}).get("column_units")
    return dict(given) if given else spec_units(spec)
