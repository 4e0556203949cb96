"""Variable transforms: the one place that knows what each transform does.

A transform is a small object. For an outcome it gives the forward map g, its inverse,
the derivative of the inverse (for first-order effects on the original scale) and the
log-Jacobian ln|g'(y)| (so likelihoods of different outcome transforms are comparable,
Box & Cox 1964). For a regressor it gives the basis columns the transform adds to the
design matrix and their derivatives with respect to the original variable. Every transform
also names the rows it cannot take and carries a plain-word label.

Exact effects, approximations, retransformation and curves are written once against this
interface (see ``core.inference.effects``), so a new transform is added here and nowhere else.

Formulas (x the original variable, C > 0 a shift, L the Box-Cox power):

- level        g(x) = x
- log          g(x) = ln x                               (x > 0)
- ihs          g(x) = asinh x = ln(x + sqrt(x^2 + 1))    (any x; Burbidge, Magee & Robb 1988)
- shifted_log  g(x) = ln(x + C)                          (x > -C)
- sqrt         g(x) = sqrt x                             (x >= 0; derivative needs x > 0)
- boxcox       g(y) = (y^L - 1)/L, ln y at L = 0         (y > 0; Box & Cox 1964), outcome only
- quadratic    basis [x, x^2], derivative [1, 2x]        regressor only
- category     one 0/1 column per level but the reference  regressor only
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from core.errors import SpecError


@dataclass(frozen=True)
class Transform:
    """An elementwise transform g with its inverse and derivatives (identity here).

    Besides the maths, a transform declares what the rest of Formwise reads from it, so a new
    one is added here and nowhere else: the roles it can take (``roles``); whether a
    regressor's effect of the same real change is the same whatever the units it is recorded
    in (``unit_invariant``; IHS and shifted logs are not, Aihounton & Henningsen 2021); whether
    its default change is relative, +10 %, rather than one unit (``relative_change``); the code
    and words offered in the app's menus (``menu_code``, ``menu_word``); and its label and phrase.
    """

    name: str = "level"

    roles: ClassVar[frozenset[str]] = frozenset({"outcome", "regressor"})
    unit_invariant: ClassVar[bool] = True
    relative_change: ClassVar[bool] = False
    # The spec code offered in menus (None: not offered), and its words there.
    menu_code: ClassVar[str | None] = "level"
    menu_word: ClassVar[str] = "level (as is)"
    # Whether a regressor's coefficient reads per 1 % higher x (the log-like readings).
    reads_per_percent: ClassVar[bool] = False
    # The numpy ufunc that computes ``forward``, where one does: the design column is then
    # written in place (``write_basis``) instead of through a temporary (at a million rows the
    # temporary and its copy cost as much as the logarithm).
    ufunc: ClassVar[np.ufunc | None] = None

    # --- words -------------------------------------------------------------------------
    @property
    def code(self) -> str:
        """The spec string that reproduces this transform, e.g. 'shifted_log:1'."""
        return self.name

    def label(self, column: str) -> str:
        """Plain words for the transformed variable, e.g. 'log of price'; the bare name in levels."""
        return column

    def phrase(self, column: str) -> str:
        """The variable taken this way, e.g. 'price as a log' (for 'compare with ...')."""
        return f"{column} in levels" if self.name == "level" else f"{column} as {self.label(column)}"

    def reading_caveat(self, column: str) -> str:
        """Where a regressor's per-1 % reading holds, appended to it ('' when it always does)."""
        return ""

    # --- the map -------------------------------------------------------------------------
    def forward(self, x: np.ndarray) -> np.ndarray:
        return np.asarray(x, dtype=float)

    def inverse(self, z: np.ndarray) -> np.ndarray:
        return np.asarray(z, dtype=float)

    def derivative(self, x: np.ndarray) -> np.ndarray:
        """g'(x)."""
        return np.ones_like(np.asarray(x, dtype=float))

    def inverse_derivative(self, z: np.ndarray) -> np.ndarray:
        """d g^{-1}(z) / dz."""
        return np.ones_like(np.asarray(z, dtype=float))

    def log_jacobian(self, y: np.ndarray) -> np.ndarray:
        """ln|g'(y)| per observation (Box & Cox 1964, eq. 7)."""
        return np.log(np.abs(self.derivative(y)))

    def log_jacobian_sum(self, y: np.ndarray, transformed: np.ndarray | None = None) -> float:
        """Σ ln|g'(yᵢ)|; ``transformed`` is g(y) when the caller has it (a log reads the sum off it)."""
        return float(np.sum(self.log_jacobian(y)))

    # --- domain ------------------------------------------------------------------------
    def invalid(self, x: np.ndarray) -> tuple[np.ndarray, str]:
        """Rows this transform cannot take, and the reason in plain words."""
        return np.zeros(len(x), dtype=bool), ""

    # --- regressor basis -----------------------------------------------------------------
    @property
    def width(self) -> int:
        return 1

    def basis(self, x: np.ndarray) -> np.ndarray:
        """Design columns contributed by this regressor, shape (n, width)."""
        return self.forward(x).reshape(-1, 1)

    def basis_derivative(self, x: np.ndarray) -> np.ndarray:
        """d basis / dx, shape (n, width)."""
        return self.derivative(x).reshape(-1, 1)

    def write_basis(self, x: np.ndarray, out: np.ndarray) -> None:
        """``basis(x)`` written into ``out`` (n x width, the regressor's columns of a design)."""
        if self.ufunc is not None and out.shape[1] == 1:
            with np.errstate(divide="ignore", invalid="ignore"):
                self.ufunc(x, out=out[:, 0])
        elif self._is_identity():
            np.copyto(out[:, 0], x)
        else:
            out[...] = self.basis(x)

    def even_step(self) -> str | None:
        """The kind of change ('units', 'percent'; see ``core.model.spec.Change``) that moves the
        basis by the same amount at every x, or None: x + a in levels, and x·(1 + p) on a log,
        where log(x·(1 + p)) - log(x) = log(1 + p). Under it every row's effect is the same."""
        return "units" if self._is_identity() else None

    def _is_identity(self) -> bool:
        return type(self).basis is Transform.basis and type(self).forward is Transform.forward

    def powers(self) -> list[int | None]:
        return [None]

    @property
    def is_log_like(self) -> bool:
        """True when the textbook reads a coefficient on this scale as a percent effect."""
        return False


@dataclass(frozen=True)
class Log(Transform):
    name: str = "log"
    relative_change: ClassVar[bool] = True
    menu_code: ClassVar[str | None] = "log"
    menu_word: ClassVar[str] = "log"
    ufunc: ClassVar[np.ufunc | None] = np.log
    reads_per_percent: ClassVar[bool] = True

    def label(self, column: str) -> str:
        return f"log of {column}"

    def phrase(self, column: str) -> str:
        return f"{column} as a log"

    def forward(self, x):
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.log(np.asarray(x, dtype=float))

    def inverse(self, z):
        return np.exp(np.asarray(z, dtype=float))

    def derivative(self, x):
        return 1.0 / np.asarray(x, dtype=float)

    def log_jacobian(self, y):
        # ln|1/y| = -ln y for y > 0: one pass instead of a division, an abs and a log.
        with np.errstate(divide="ignore", invalid="ignore"):
            return -np.log(np.asarray(y, dtype=float))

    def log_jacobian_sum(self, y: np.ndarray, transformed: np.ndarray | None = None) -> float:
        # Σ ln|1/yᵢ| = -Σ log yᵢ, which the model's outcome already holds.
        return -float(np.sum(transformed)) if transformed is not None else float(np.sum(self.log_jacobian(y)))

    def inverse_derivative(self, z):
        return np.exp(np.asarray(z, dtype=float))

    def invalid(self, x):
        return ~(np.asarray(x, dtype=float) > 0), "log needs values above zero"

    def even_step(self) -> str | None:
        return "percent"

    @property
    def is_log_like(self) -> bool:
        return True


@dataclass(frozen=True)
class IHS(Transform):
    name: str = "ihs"
    unit_invariant: ClassVar[bool] = False
    relative_change: ClassVar[bool] = True
    menu_code: ClassVar[str | None] = "ihs"
    menu_word: ClassVar[str] = "IHS (asinh)"
    ufunc: ClassVar[np.ufunc | None] = np.arcsinh
    reads_per_percent: ClassVar[bool] = True

    def label(self, column: str) -> str:
        return f"IHS of {column}"

    def reading_caveat(self, column: str) -> str:
        # Bellemare & Wichman 2020: asinh x ≈ ln 2x only for x well above 1.
        return f" for values of {column} well above 1 (IHS behaves like a log there); near zero the effect depends on {column}'s units"

    def phrase(self, column: str) -> str:
        return f"{column} as IHS"

    def forward(self, x):
        return np.arcsinh(np.asarray(x, dtype=float))

    def inverse(self, z):
        return np.sinh(np.asarray(z, dtype=float))

    def derivative(self, x):
        x = np.asarray(x, dtype=float)
        return 1.0 / np.sqrt(x * x + 1.0)

    def inverse_derivative(self, z):
        return np.cosh(np.asarray(z, dtype=float))


@dataclass(frozen=True)
class ShiftedLog(Transform):
    name: str = "shifted_log"
    shift: float = 1.0
    unit_invariant: ClassVar[bool] = False
    relative_change: ClassVar[bool] = True
    menu_code: ClassVar[str | None] = "shifted_log:1"
    menu_word: ClassVar[str] = "log(x + 1)"
    reads_per_percent: ClassVar[bool] = True

    def reading_caveat(self, column: str) -> str:
        return " where the shift is small next to " + column + "; otherwise see the effects table"

    @property
    def code(self) -> str:
        return f"shifted_log:{_fmt(self.shift)}"

    def label(self, column: str) -> str:
        return f"log({column} + {_fmt(self.shift)})"

    def forward(self, x):
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.log(np.asarray(x, dtype=float) + self.shift)

    def inverse(self, z):
        return np.exp(np.asarray(z, dtype=float)) - self.shift

    def derivative(self, x):
        return 1.0 / (np.asarray(x, dtype=float) + self.shift)

    def inverse_derivative(self, z):
        return np.exp(np.asarray(z, dtype=float))

    def invalid(self, x):
        return (
            ~(np.asarray(x, dtype=float) + self.shift > 0),
            f"log of (value + {_fmt(self.shift)}) needs values above {_fmt(-self.shift)}",
        )


@dataclass(frozen=True)
class Sqrt(Transform):
    name: str = "sqrt"
    relative_change: ClassVar[bool] = True
    menu_code: ClassVar[str | None] = "sqrt"
    menu_word: ClassVar[str] = "square root"
    ufunc: ClassVar[np.ufunc | None] = np.sqrt

    def label(self, column: str) -> str:
        return f"square root of {column}"

    def phrase(self, column: str) -> str:
        return f"{column} as a square root"

    def forward(self, x):
        with np.errstate(invalid="ignore"):
            return np.sqrt(np.asarray(x, dtype=float))

    def inverse(self, z):
        # The inverse of sqrt on its range; negative fitted values map to 0 via z^2 only if z >= 0,
        # so z^2 is used as the model's own retransform (common practice, no source).
        return np.square(np.asarray(z, dtype=float))

    def derivative(self, x):
        with np.errstate(divide="ignore"):
            return 0.5 / np.sqrt(np.asarray(x, dtype=float))

    def inverse_derivative(self, z):
        return 2.0 * np.asarray(z, dtype=float)

    def invalid(self, x):
        return ~(np.asarray(x, dtype=float) >= 0), "square root needs values of zero or more"


@dataclass(frozen=True)
class BoxCox(Transform):
    name: str = "boxcox"
    power: float = 1.0
    roles: ClassVar[frozenset[str]] = frozenset({"outcome"})
    menu_code: ClassVar[str | None] = None  # its power comes from the Box-Cox profile, not a menu

    @property
    def code(self) -> str:
        return f"boxcox:{_fmt(self.power)}"

    def label(self, column: str) -> str:
        return f"Box-Cox (λ = {_fmt(self.power)}) of {column}"

    def forward(self, x):
        x = np.asarray(x, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            if self.power == 0:
                return np.log(x)
            return np.expm1(self.power * np.log(x)) / self.power

    def inverse(self, z):
        z = np.asarray(z, dtype=float)
        if self.power == 0:
            return np.exp(z)
        with np.errstate(invalid="ignore"):
            base = np.maximum(1.0 + self.power * z, 0.0)
            return np.power(base, 1.0 / self.power)

    def derivative(self, x):
        x = np.asarray(x, dtype=float)
        return np.power(x, self.power - 1.0)

    def inverse_derivative(self, z):
        z = np.asarray(z, dtype=float)
        if self.power == 0:
            return np.exp(z)
        base = np.maximum(1.0 + self.power * z, 0.0)
        with np.errstate(divide="ignore"):
            return np.power(base, 1.0 / self.power - 1.0)

    def log_jacobian(self, y):
        return (self.power - 1.0) * np.log(np.asarray(y, dtype=float))

    def invalid(self, x):
        return ~(np.asarray(x, dtype=float) > 0), "Box-Cox needs values above zero"

    @property
    def is_log_like(self) -> bool:
        return self.power == 0


@dataclass(frozen=True)
class Quadratic(Transform):
    name: str = "quadratic"
    roles: ClassVar[frozenset[str]] = frozenset({"regressor"})
    menu_code: ClassVar[str | None] = "quadratic"
    menu_word: ClassVar[str] = "quadratic (x and x²)"

    def label(self, column: str) -> str:
        return f"{column} and its square"

    def phrase(self, column: str) -> str:
        return f"{column} as a quadratic"

    @property
    def width(self) -> int:
        return 2

    def basis(self, x):
        x = np.asarray(x, dtype=float)
        return np.column_stack([x, x * x])

    def basis_derivative(self, x):
        x = np.asarray(x, dtype=float)
        return np.column_stack([np.ones_like(x), 2.0 * x])

    def powers(self) -> list[int | None]:
        return [1, 2]


@dataclass(frozen=True)
class Category(Transform):
    """Dummies for every level but the reference. Levels are handled in ``core.model.design``."""

    name: str = "category"
    roles: ClassVar[frozenset[str]] = frozenset({"regressor"})
    menu_code: ClassVar[str | None] = "category"
    menu_word: ClassVar[str] = "category (dummies)"

    def label(self, column: str) -> str:
        return f"{column} (categories)"


# The registry: spec name -> how to make the transform from the text after the colon (None for
# a plain name). Menus, readings, the units check and spec validation all read it.
Maker = Callable[[str | None, str, str], Transform]
_REGISTRY: dict[str, tuple[type[Transform], Maker, str | None]] = {}


def register(kind: type[Transform], make: Maker | None = None, parameter: str | None = None) -> type[Transform]:
    """Add a transform class to the registry under its ``name``. ``make(parameter, text,
    where)`` builds an instance from the text after the colon, and ``parameter`` names that
    number in messages ('C' in 'shifted_log:C'); without them the class takes no parameter."""
    _REGISTRY[kind.name] = (kind, make or _plain_maker(kind), parameter)
    return kind


def unregister(name: str) -> None:
    """Remove a transform (tests register temporary ones)."""
    _REGISTRY.pop(name, None)


def _plain_maker(kind: type[Transform]) -> Maker:
    instance = kind()

    def make(parameter: str | None, text: str, where: str) -> Transform:
        if parameter is not None:
            raise SpecError(f"{where}: '{text}' takes no number after a colon; write '{instance.name}'.")
        return instance

    return make


def _number(parameter: str | None, text: str, where: str, example: str) -> float:
    if parameter is None:
        raise SpecError(f"{where}: '{text}' needs a number after a colon, e.g. '{example}'.")
    try:
        value = float(parameter)
    except ValueError:
        raise SpecError(f"{where}: '{text}' needs a number after the colon, e.g. '{example}'.") from None
    if not math.isfinite(value):
        raise SpecError(f"{where}: '{text}' needs a finite number after the colon.")
    return value


def _make_shifted_log(parameter: str | None, text: str, where: str) -> Transform:
    value = _number(parameter, text, where, "shifted_log:1")
    if value <= 0:
        raise SpecError(f"{where}: the shift in '{text}' must be above zero, e.g. 'shifted_log:1'.")
    return ShiftedLog(shift=value)


# Smallest non-zero Box-Cox power taken (see ``_make_boxcox``).
BOXCOX_MIN_POWER = 1e-6


def _make_boxcox(parameter: str | None, text: str, where: str) -> Transform:
    value = _number(parameter, text, where, "boxcox:0.5")
    if abs(value) > 5:
        raise SpecError(f"{where}: a Box-Cox power of {_fmt(value)} is outside -5..5; pick a power in that range.")
    if value != 0 and abs(value) < BOXCOX_MIN_POWER:
        # (1 + λz)^(1/λ) loses about eps/|λ| of its digits: below 1e-6 the inverse is unreliable.
        raise SpecError(
            f"{where}: a Box-Cox power of {_fmt(value)} is too close to 0 to compute with; use 'boxcox:0' (the log) "
            f"or a power of at least {BOXCOX_MIN_POWER:g} in size."
        )
    return BoxCox(power=value)


# The identity ('level'), for code that needs a transform where none is named.
IDENTITY = Transform()

# In menu order.
register(Transform)
register(Log)
register(IHS)
register(ShiftedLog, _make_shifted_log, "C")
register(Sqrt)
register(Quadratic)
register(Category)
register(BoxCox, _make_boxcox, "L")


def spec_forms(role: str) -> list[str]:
    """The spec forms a role accepts, for messages: 'log', 'shifted_log:C', 'boxcox:L', ..."""
    return [
        name if parameter is None else f"{name}:{parameter}"
        for name, (kind, _, parameter) in _REGISTRY.items()
        if role in kind.roles
    ]


def menu_codes(role: str) -> list[str]:
    """The transform codes the app offers for a role, in registry order."""
    return [kind.menu_code for kind, _, _ in _REGISTRY.values() if role in kind.roles and kind.menu_code]


def menu_word(code: str) -> str:
    """The words for a transform code in the app's menus ('IHS (asinh)'); the code itself if unknown."""
    name = code.split(":", 1)[0].strip().lower()
    found = _REGISTRY.get(name)
    if found and found[0].menu_code == code:
        return found[0].menu_word
    return code


def lookup(code: str, role: str = "regressor") -> Transform | None:
    """The transform a code names, or None when it names none (no error)."""
    try:
        return parse_transform(code, role, "transform")
    except SpecError:
        return None


def variable_label(column: str, code: str | None, role: str = "regressor") -> str:
    """Short plain name of a transformed variable ('log of price', 'IHS of spend'); the code
    itself for an unknown one, so a label never fails."""
    found = lookup((code or "level").strip(), role) or lookup((code or "level").strip(), "outcome")
    return found.label(column) if found is not None else f"{code} of {column}"


def phrase(column: str, code: str) -> str:
    """'price in levels', 'price as a log', 'visits as log(visits + 1)'."""
    found = lookup(code)
    return found.phrase(column) if found is not None else f"{column} as {code}"


_CODE = re.compile(r"^([a-z_][a-z0-9_]*)\s*(?::\s*(.+))?$")


def parse_transform(text: object, role: str, where: str) -> Transform:
    """Turn a spec string such as 'log' or 'shifted_log:1' into a transform.

    ``role`` is 'outcome' or 'regressor'; ``where`` names the spec entry in error messages.
    """
    hint = f"use one of: {', '.join(spec_forms(role))}"
    if not isinstance(text, str) or not text.strip():
        raise SpecError(f"{where}: transform must be a word such as 'log'; {hint}.")
    match = _CODE.match(text.strip().lower())
    found = _REGISTRY.get(match.group(1)) if match else None
    if found is None:
        raise SpecError(f"{where}: unknown transform '{text}'; {hint}.")
    kind, make, _ = found
    if role not in kind.roles:
        only = "regressors" if role == "outcome" else "the outcome"
        raise SpecError(f"{where}: '{match.group(1)}' applies to {only} only; {hint}.")
    return make(match.group(2), text, where)


def _fmt(value: float) -> str:
    return f"{value:g}"
