"""Reader of the NIST StRD linear-regression files stored beside this module.

Each ``<Name>.txt`` holds one data set of NIST Statistical Reference Datasets, linear regression
(https://www.itl.nist.gov/div898/strd/lls/lls.shtml): the data and NIST's certified estimates,
standard deviations of the estimates, residual standard deviation and R², copied as NIST prints
them. The text of every number is kept, so a check can also work in exact rational arithmetic.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path

import numpy as np
from scipy.linalg import solve_triangular

HERE = Path(__file__).resolve().parent
NAMES = ("Norris", "Pontius", "Longley", "Filip", "Wampler1", "Wampler2", "Wampler3", "Wampler4", "Wampler5")


@dataclass(frozen=True)
class StRD:
    """One NIST StRD linear data set: the regressors (the intercept excluded) and the certified values."""

    name: str
    columns: list[str]  # regressor names: x, x^2, ... for a polynomial model, else the file's columns
    degree: int | None  # the polynomial degree, None for a model on several columns
    y_text: list[str]
    x_text: list[list[str]]  # rows of the file's predictor columns, as printed
    coef_text: list[str]
    se_text: list[str]
    residual_sd: float
    r_squared: float

    @property
    def y(self) -> np.ndarray:
        return np.array([float(v) for v in self.y_text])

    @property
    def regressors(self) -> np.ndarray:
        """n x p regressors without the intercept; polynomial powers formed in floating point."""
        raw = np.array([[float(v) for v in row] for row in self.x_text])
        if self.degree is None:
            return raw
        return np.column_stack([raw[:, 0] ** j for j in range(1, self.degree + 1)])

    @property
    def design(self) -> np.ndarray:
        """The design matrix with the intercept first (Fortran order, as core builds it)."""
        return np.asfortranarray(np.column_stack([np.ones(len(self.y_text)), self.regressors]))

    @property
    def coef(self) -> np.ndarray:
        return np.array([float(v) for v in self.coef_text])

    @property
    def se(self) -> np.ndarray:
        return np.array([float(v) for v in self.se_text])

    def exact_rows(self) -> list[list[Fraction]]:
        """Design rows in exact rational arithmetic (intercept first)."""
        out = []
        for row in self.x_text:
            values = [Fraction(v) for v in row]
            if self.degree is not None:
                values = [values[0] ** j for j in range(1, self.degree + 1)]
            out.append([Fraction(1), *values])
        return out


def load(name: str) -> StRD:
    """Read ``<name>.txt`` (see the module docstring)."""
    columns: list[str] = []
    degree = None
    coef, se, ys, xs = [], [], [], []
    residual_sd = r_squared = float("nan")
    in_data = False
    for line in (HERE / f"{name}.txt").read_text().splitlines():
        if not line.strip() or line.startswith("#"):
            continue
        parts = line.split()
        if in_data:
            ys.append(parts[0])
            xs.append(parts[1:])
        elif parts[0] == "model" and parts[1] == "polynomial":
            degree = int(parts[2])
            columns = ["x" if j == 1 else f"x^{j}" for j in range(1, degree + 1)]
        elif parts[0] == "model":
            columns = parts[2:]
        elif parts[0] == "certified":
            coef.append(parts[2])
            se.append(parts[3])
        elif parts[0] == "residual_sd":
            residual_sd = float(parts[1])
        elif parts[0] == "r_squared":
            r_squared = float(parts[1])
        elif parts[0] == "data":
            in_data = True
    return StRD(name, columns, degree, ys, xs, coef, se, residual_sd, r_squared)


def lre(value: float, certified: float) -> float:
    """Log relative error, about the number of correct significant digits, capped at 15 (NIST's
    certified values carry 15): -log10(|value - certified| / |certified|), and -log10|value| where
    the certified value is 0 (McCullough 1998, "Assessing the reliability of statistical
    software: Part I", The American Statistician 52(4))."""
    if not np.isfinite(value):
        return float("nan")
    error = abs(value - certified) / abs(certified) if certified != 0 else abs(value)
    return 15.0 if error == 0 else float(min(15.0, -np.log10(error)))


def householder_fit(X: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The textbook reference: coefficients and classical standard errors from a Householder QR
    of the raw design (numpy.linalg.qr, LAPACK dgeqrf), b = R⁻¹Q'y, SE = s·‖row j of R⁻¹‖."""
    q, r = np.linalg.qr(X)
    coef = solve_triangular(r, q.T @ y)
    resid = y - X @ coef
    s2 = float(resid @ resid) / (X.shape[0] - X.shape[1])
    r_inv = solve_triangular(r, np.eye(X.shape[1]))
    return coef, np.sqrt(s2 * (r_inv**2).sum(axis=1))


def exact_least_squares(rows: list[list[Fraction]], y: list[Fraction]) -> list[Fraction]:
    """Least squares in exact rational arithmetic: Gauss-Jordan on the normal equations."""
    k = len(rows[0])
    system = [
        [sum(r[i] * r[j] for r in rows) for j in range(k)] + [sum(r[i] * v for r, v in zip(rows, y, strict=True))]
        for i in range(k)
    ]
    for col in range(k):
        pivot = next(r for r in range(col, k) if system[r][col] != 0)
        system[col], system[pivot] = system[pivot], system[col]
        for r in range(k):
            if r != col and system[r][col] != 0:
                factor = system[r][col] / system[col][col]
                system[r] = [a - factor * b for a, b in zip(system[r], system[col], strict=True)]
    return [system[i][k] / system[i][i] for i in range(k)]
