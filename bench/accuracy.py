"""Numerical accuracy on every NIST StRD linear-regression data set, side by side.

    .venv/bin/python bench/accuracy.py

For Norris, Pontius, Longley, Filip and Wampler1-5 (NIST Statistical Reference Datasets, linear
regression; data and certified values in tests/data/nist/, each file naming its source) this
prints the log relative error (LRE, about the number of correct significant digits; 15 means
equal to the 15 digits NIST certifies; for a certified 0 it is -log10 of the absolute value) of
the worst certified coefficient and the worst certified standard deviation of a coefficient, for

  Formwise     core.analyze(...) with every regressor 'level' (polynomial powers given as
               columns x1..xd) and classical standard errors: the app's own path
  sm pinv      statsmodels OLS, its default solver (Moore-Penrose pseudo-inverse)
  sm qr        statsmodels OLS(...).fit(method="qr")
  Householder  numpy.linalg.qr of the raw design (LAPACK dgeqrf), b = R^-1 Q'y
  exact        (coefficients only) the least-squares solution of the same double-precision design
               in exact rational arithmetic: the most any solver can reach from these doubles

plus the condition number Formwise reports, the solver it chose and its refinement steps, and
the issue's thresholds. Then how core reacts to near-collinear designs (x beside x + d·noise).
"""

from __future__ import annotations

import time
import warnings
from fractions import Fraction

import numpy as np
import pandas as pd
from _common import machine_line

import core  # noqa: E402  (path set up by _common)
from core.model.ols import fit_ols
from tests.data.nist import NAMES, StRD, exact_least_squares, householder_fit, load, lre

# The "done when": fixed floors, or at least the Householder QR's digits less one.
FLOORS = {"Norris": 11.0, "Pontius": 11.0, "Longley": 11.0, "Filip": 7.0}


def worst(values, certified) -> float:
    return min(lre(float(v), float(c)) for v, c in zip(values, certified, strict=True))


def exact_coefficients(dataset: StRD) -> np.ndarray:
    """Least squares of the double-precision design in rational arithmetic (normal equations,
    Gauss-Jordan): the ceiling for any floating-point solver given these doubles."""
    rows = [[Fraction(float(v)) for v in row] for row in dataset.design]
    y = [Fraction(float(v)) for v in dataset.y]
    return np.array([float(b) for b in exact_least_squares(rows, y)])


def formwise(dataset: StRD) -> tuple[np.ndarray, np.ndarray, dict]:
    columns = dataset.columns if dataset.degree is None else [f"x{j}" for j in range(1, dataset.degree + 1)]
    table = pd.DataFrame(dataset.regressors, columns=columns)
    table["y"] = dataset.y
    spec = {
        "outcome": {"column": "y", "transform": "level"},
        "regressors": [{"column": c, "transform": "level"} for c in columns],
        "covariance": "classical",
    }
    result = core.analyze(table, spec, parts={"terms", "fit"})
    terms = result["terms"]
    return np.array([t["estimate"] for t in terms]), np.array([t["std_error"] for t in terms]), result


def nist_table() -> None:
    import statsmodels.api as sm

    print("NIST StRD linear regression: worst LRE over the certified coefficients | over their standard deviations")
    print("(LRE ~ correct significant digits, at most 15)\n")
    methods = ["Formwise", "sm pinv", "sm qr", "Householder"]
    header = (
        f"{'data set':<10}{'cond.':>9}  {'solver':<16}"
        + "".join(f"{m:>12}" for m in methods)
        + f"{'exact':>8}   |"
        + "".join(f"{m:>12}" for m in methods)
        + "   target (coef, SE)"
    )
    print(header)
    print("-" * len(header))
    verdicts = []
    for name in NAMES:
        dataset = load(name)
        X, y = dataset.design, dataset.y
        ours, ours_se, result = formwise(dataset)
        direct = fit_ols(X, y)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # statsmodels' pinv calls Filip's design rank-deficient
            pinv = sm.OLS(y, X).fit()
            qr = sm.OLS(y, X).fit(method="qr")
        house, house_se = householder_fit(X, y)
        coef = [
            worst(ours, dataset.coef),
            worst(pinv.params, dataset.coef),
            worst(qr.params, dataset.coef),
            worst(house, dataset.coef),
        ]
        se = [worst(ours_se, dataset.se), worst(pinv.bse, dataset.se), worst(qr.bse, dataset.se), worst(house_se, dataset.se)]
        ceiling = worst(exact_coefficients(dataset), dataset.coef)
        if name in FLOORS:
            target_coef = FLOORS[name]
            target_se = FLOORS[name] if name != "Filip" else None
        else:
            target_coef, target_se = coef[3] - 1, se[3] - 1
        met = coef[0] >= target_coef and (target_se is None or se[0] >= target_se)
        verdicts.append((name, met))
        target = f">= {target_coef:.1f}, " + ("-" if target_se is None else f">= {target_se:.1f}")
        solver = (
            f"{direct.solver.replace('tall-skinny QR', 'TSQR').replace('normal equations', 'normal eq.')} +{direct.refinements}"
        )
        print(
            f"{name:<10}{result['fit']['condition_number']:>9.2g}  {solver:<16}"
            + "".join(f"{v:>12.1f}" for v in coef)
            + f"{ceiling:>8.1f}   |"
            + "".join(f"{v:>12.1f}" for v in se)
            + f"   {target}: {'met' if met else 'MISSED'}"
        )
    print(
        "\ncond. = condition number of the design with centred, unit-length columns (what core reports); "
        "solver = the path core took and its refinement steps (+n)"
    )
    missed = [name for name, ok in verdicts if not ok]
    print(f"targets: {'all met' if not missed else 'MISSED on ' + ', '.join(missed)}")


def near_collinear() -> None:
    import statsmodels.api as sm

    print("\nNear-collinear designs (n = 500; y = 1 + 2x + 0.5z + e; x2 = x + d·noise)")
    rng = np.random.default_rng(7)
    n = 500
    x = rng.normal(10.0, 2.0, n)
    z = rng.normal(0.0, 1.0, n)
    y = 1.0 + 2.0 * x + 0.5 * z + rng.normal(0.0, 1.0, n)
    cases = [
        ("x2 = x (exact copy)", x.copy()),
        ("x2 = 12x (exact multiple)", 12.0 * x),
        ("x2 = x + 1e-11*noise", x + 1e-11 * rng.normal(size=n)),
        ("x2 = x + 1e-9*noise", x + 1e-9 * rng.normal(size=n)),
        ("x2 = x + 1e-6*noise", x + 1e-6 * rng.normal(size=n)),
        ("x2 = x + 1e-1*noise", x + 1e-1 * rng.normal(size=n)),
    ]
    for label, x2 in cases:
        data = pd.DataFrame({"y": y, "x": x, "x2": x2, "z": z})
        spec = {
            "outcome": {"column": "y", "transform": "level"},
            "regressors": [{"column": c, "transform": "level"} for c in ("x", "x2", "z")],
            "covariance": "classical",
        }
        print(f"\n  {label}")
        try:
            result = core.analyze(data, spec, parts={"terms", "fit"})
            terms = {t["name"]: t for t in result["terms"]}
            print(
                f"    core: fitted; condition number {result['fit']['condition_number']:,.3g}; "
                f"coef x {terms['x']['estimate']:.6g}, x2 {terms['x2']['estimate']:.6g}, sum {terms['x']['estimate'] + terms['x2']['estimate']:.6g}"
            )
            for w in result["warnings"]:
                print(f"    core warning: {w}")
        except core.FormwiseError as exc:
            print(f"    core: {type(exc).__name__}: {exc}")
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            fitted = sm.OLS(y, sm.add_constant(data[["x", "x2", "z"]])).fit()
        note = "; ".join(sorted({f"{w.category.__name__}: {str(w.message).splitlines()[0][:80]}" for w in caught})) or "none"
        print(
            f"    statsmodels: fitted; condition number {fitted.condition_number:,.3g}; "
            f"coef x {fitted.params['x']:.6g}, x2 {fitted.params['x2']:.6g}; Python warnings: {note}"
        )


def main() -> None:
    started = time.perf_counter()
    print("Formwise accuracy benchmark")
    print(machine_line() + "\n")
    nist_table()
    near_collinear()
    print(f"\ntotal {time.perf_counter() - started:.1f} s")


if __name__ == "__main__":
    main()
