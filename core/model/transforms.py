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
from dataclasses import dataclass

import numpy as np

from core.errors import SpecError

OUTCOME_TRANSFORMS = ("level", "log", "ihs", "shifted_log:C", "sqrt", "boxcox:L")
REGRESSOR_TRANSFORMS = ("level", "log", "ihs", "shifted_log:C", "sqrt", "quadratic", "category")


@dataclass(frozen=True)
class Transform:
    """An elementwise transform g with its inverse and derivatives (identity here)."""

    name: str = "level"

    # --- words -------------------------------------------------------------------------
    @property
    def code(self) -> str:
        """The spec string that reproduces this transform, e.g. 'shifted_log:1'."""
        return self.name

    def label(self, column: str) -> str:
        """Plain words for the transformed variable, e.g. 'log of price'."""
        return column

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

    def powers(self) -> list[int | None]:
        return [None]

    @property
    def is_log_like(self) -> bool:
        """True when the textbook reads a coefficient on this scale as a percent effect."""
        return False


@dataclass(frozen=True)
class Log(Transform):
    name: str = "log"

    def label(self, column: str) -> str:
        return f"log of {column}"

    def forward(self, x):
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.log(np.asarray(x, dtype=float))

    def inverse(self, z):
        return np.exp(np.asarray(z, dtype=float))

    def derivative(self, x):
        return 1.0 / np.asarray(x, dtype=float)

    def inverse_derivative(self, z):
        return np.exp(np.asarray(z, dtype=float))

    def invalid(self, x):
        return ~(np.asarray(x, dtype=float) > 0), "log needs values above zero"

    @property
    def is_log_like(self) -> bool:
        return True


@dataclass(frozen=True)
class IHS(Transform):
    name: str = "ihs"

    def label(self, column: str) -> str:
        return f"inverse hyperbolic sine of {column}"

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

    @property
    def code(self) -> str:
        return f"shifted_log:{_fmt(self.shift)}"

    def label(self, column: str) -> str:
        return f"log of ({column} + {_fmt(self.shift)})"

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

    def label(self, column: str) -> str:
        return f"square root of {column}"

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

    @property
    def code(self) -> str:
        return f"boxcox:{_fmt(self.power)}"

    def label(self, column: str) -> str:
        return f"Box-Cox (lambda = {_fmt(self.power)}) of {column}"

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

    def label(self, column: str) -> str:
        return f"{column} and its square"

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

    def label(self, column: str) -> str:
        return f"{column} (categories)"


_SIMPLE: dict[str, Transform] = {
    "level": Transform(),
    "log": Log(),
    "ihs": IHS(),
    "sqrt": Sqrt(),
    "quadratic": Quadratic(),
    "category": Category(),
}
_PARAM = re.compile(r"^(shifted_log|boxcox)\s*:\s*(.+)$")


def parse_transform(text: object, role: str, where: str) -> Transform:
    """Turn a spec string such as 'log' or 'shifted_log:1' into a transform.

    ``role`` is 'outcome' or 'regressor'; ``where`` names the spec entry in error messages.
    """
    allowed = OUTCOME_TRANSFORMS if role == "outcome" else REGRESSOR_TRANSFORMS
    hint = f"use one of: {', '.join(allowed)}"
    if not isinstance(text, str) or not text.strip():
        raise SpecError(f"{where}: transform must be a word such as 'log'; {hint}.")
    key = text.strip().lower()
    if key in _SIMPLE:
        found = _SIMPLE[key]
        if role == "outcome" and key in ("quadratic", "category"):
            raise SpecError(f"{where}: '{key}' applies to regressors only; {hint}.")
        return found
    match = _PARAM.match(key)
    if match:
        kind, raw = match.groups()
        try:
            value = float(raw)
        except ValueError:
            raise SpecError(f"{where}: '{text}' needs a number after the colon, e.g. '{kind}:1'.") from None
        if not math.isfinite(value):
            raise SpecError(f"{where}: '{text}' needs a finite number after the colon.")
        if kind == "shifted_log":
            if value <= 0:
                raise SpecError(f"{where}: the shift in '{text}' must be above zero, e.g. 'shifted_log:1'.")
            return ShiftedLog(shift=value)
        if role != "outcome":
            raise SpecError(f"{where}: 'boxcox' applies to the outcome only; {hint}.")
        if abs(value) > 5:
            raise SpecError(f"{where}: a Box-Cox power of {_fmt(value)} is outside -5..5; pick a power in that range.")
        return BoxCox(power=value)
    raise SpecError(f"{where}: unknown transform '{text}'; {hint}.")


def _fmt(value: float) -> str:
    return f"{value:g}"
