"""The least-squares engine (core.model.ols, core.model.engine): its two solvers, the refinement,
the collinearity screen, weights, and the row blocks split over threads.

References: statsmodels as reference library (its QR solver, OLS and WLS); numpy.linalg for
matrix identities (inverse, Householder QR). Thresholds on the rank tolerance come from the
values measured below; data are invented (seeded), as in the property tests.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import core
from core.errors import DataError
from core.model import engine, ols
from core.model.ols import NEAR_COLLINEAR, fit_ols

N_BLOCKS = 5 * engine.BLOCK_ROWS + 777  # several blocks on each thread, and a part block


def _design(n: int, seed: int = 1) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    x1 = rng.lognormal(1.0, 0.5, n)
    x2 = rng.uniform(1950.0, 2020.0, n)  # a large offset against its spread
    x3 = (rng.random(n) < 0.3).astype(float)
    X = np.asfortranarray(np.column_stack([np.ones(n), np.log(x1), x2, x3]))
    y = X @ np.array([1.0, -0.7, 0.01, 0.2]) + rng.normal(0.0, 0.3 + 0.2 * x3, n)
    return X, y


def _rel(a: np.ndarray, b: np.ndarray) -> float:
    return float(np.max(np.abs(np.asarray(a) - np.asarray(b)) / np.maximum(np.abs(b), 1e-300)))


@pytest.fixture(scope="module")
def big() -> tuple[np.ndarray, np.ndarray]:
    return _design(N_BLOCKS)


@pytest.mark.parametrize("weighted", [False, True])
def test_both_solvers_agree_with_statsmodels(big, weighted, monkeypatch):
    X, y = big
    w = np.random.default_rng(2).uniform(0.5, 2.0, len(y)) if weighted else None
    ref = (sm.WLS(y, X, weights=w) if weighted else sm.OLS(y, X)).fit(method="qr")  # statsmodels as reference library
    fits = {"normal equations": fit_ols(X, y, w)}
    monkeypatch.setattr(ols, "NORMAL_EQUATIONS_MAX_CONDITION", 0.0)  # force the QR path
    fits["tall-skinny QR"] = fit_ols(X, y, w)
    for solver, fit in fits.items():
        assert fit.solver == solver
        assert _rel(fit.coef, ref.params) < 1e-11
        assert _rel(np.sqrt(np.diag(fit.xtx_inv)) * fit.sigma, ref.bse) < 1e-10
        assert _rel(fit.ssr, ref.ssr) < 1e-11
        assert _rel(fit.r2, ref.rsquared) < 1e-11
        assert _rel(fit.loglik, ref.llf) < 1e-11
        assert _rel(fit.fitted, ref.fittedvalues) < 1e-11
        assert np.allclose(fit.resid, y - X @ fit.coef, rtol=0, atol=1e-12)
        gram = X.T @ (X * (w[:, None] if weighted else 1.0))
        assert np.array_equal(fit.xtx_inv, fit.xtx_inv.T)
        assert _rel(fit.xtx_inv, np.linalg.inv(gram)) < 1e-6  # numpy: the inverse (of a Gram matrix with κ ≈ 1e9)


def test_threads_and_blocks_do_not_change_the_fit(big, monkeypatch):
    X, y = big
    two = fit_ols(X, y)
    monkeypatch.setattr(engine, "THREADS", 1)
    one = fit_ols(X, y)
    monkeypatch.setattr(engine, "BLOCK_ROWS", len(y))
    whole = fit_ols(X, y)
    for fit in (one, whole):
        assert _rel(fit.coef, two.coef) < 1e-13
        assert _rel(fit.xtx_inv, two.xtx_inv) < 1e-12
        assert _rel(fit.ssr, two.ssr) < 1e-13
    assert np.array_equal(fit_ols(X, y).coef, fit_ols(X, y).coef)  # partial sums added in a fixed order


def test_unrepresentative_first_block_is_still_accurate(big):
    """The shift is taken from the first block; sorting a column puts its extreme values there."""
    X, y = big
    order = np.argsort(X[:, 2])
    Xs, ys = np.asfortranarray(X[order]), y[order]
    fit = fit_ols(Xs, ys)
    unsorted = fit_ols(X, y)  # the same least-squares problem, rows in another order
    assert _rel(fit.coef, unsorted.coef) < 1e-12
    assert _rel(fit.xtx_inv, unsorted.xtx_inv) < 1e-11
    ref = sm.OLS(ys, Xs).fit(method="qr")  # statsmodels as reference library
    assert _rel(fit.coef, ref.params) < 1e-10
    assert _rel(fit.sigma * np.sqrt(np.diag(fit.xtx_inv)), ref.bse) < 1e-10


def test_extended_refinement_beats_working_precision():
    """A Wampler-like polynomial (x = 0..20, degree 5) with an exactly known solution: the QR
    path with extended-precision residuals recovers it far beyond a Householder QR."""
    x = np.arange(21.0)
    X = np.asfortranarray(np.column_stack([x**j for j in range(6)]))
    y = X @ np.ones(6) + 1e4 * np.where(np.arange(21) % 2 == 0, 1.0, -1.0)  # large residuals
    fit = fit_ols(X, y)
    exact = np.linalg.lstsq(X.astype(np.longdouble).astype(float), y, rcond=None)[0]  # numpy lstsq (SVD)
    assert fit.solver == "tall-skinny QR" and fit.condition_number > NEAR_COLLINEAR
    assert fit.refinements >= 1
    assert np.max(np.abs(fit.coef - exact) / np.abs(exact)) < 1e-6


@pytest.mark.parametrize(
    "case",
    ["log(100p) and log(p)", "12x and x", "x1 + x2 beside both", "a dummy for every level"],
)
def test_exact_collinearity_is_refused_naming_the_columns(case):
    n = N_BLOCKS
    rng = np.random.default_rng(4)
    p, x, z = rng.lognormal(1, 0.5, n), rng.normal(10, 2, n), rng.normal(size=n)
    level = rng.integers(0, 3, n)
    columns, names, named = {
        "log(100p) and log(p)": ([np.log(100 * p), np.log(p), z], ["log(cents)", "log(p)", "z"], {"log(cents)", "log(p)"}),
        "12x and x": ([12 * x, x, z], ["months", "years", "z"], {"months", "years"}),
        "x1 + x2 beside both": ([x, z, x + z], ["x", "z", "x+z"], {"x", "z", "x+z"}),
        "a dummy for every level": (
            [x, *[(level == j).astype(float) for j in range(3)]],
            ["x", "d0", "d1", "d2"],
            {"d0", "d1", "d2"},
        ),
    }[case]
    X = np.asfortranarray(np.column_stack([np.ones(n), *columns]))
    y = X[:, 1] + rng.normal(size=n)
    # How close to singular these are, in the screen's own terms (the values RANK_TOLERANCE is
    # set against): a few units of rounding.
    R = engine.tsqr_pass(engine.shift_for(X, y, None))[: X.shape[1], : X.shape[1]]
    singular, _ = ols._singular(R, X.shape[1])
    assert singular[-1] / singular[0] < 1e-14
    with pytest.raises(DataError) as caught:
        fit_ols(X, y, names=["intercept", *names])
    message = str(caught.value)
    assert "collinear" in message
    for name in named:
        assert name in message
    assert "perfectly" not in message and "exact combination" not in message


def test_near_collinear_design_is_fitted_with_a_warning():
    """Condition number about 1e8: fitted, the condition number reported, the app warned."""
    rng = np.random.default_rng(6)
    n = 3000
    x, z = rng.normal(10, 2, n), rng.normal(size=n)
    table = pd.DataFrame({"x": x, "x2": x + 4e-8 * rng.normal(size=n), "z": z})
    table["y"] = 1 + 2 * x + 0.5 * z + rng.normal(size=n)
    spec = {
        "outcome": {"column": "y", "transform": "level"},
        "regressors": [{"column": c, "transform": "level"} for c in ("x", "x2", "z")],
        "covariance": "classical",
    }
    result = core.analyze(table, spec, parts={"terms", "fit"})
    condition = result["fit"]["condition_number"]
    assert 3e7 < condition < 3e8
    warning = [w for w in result["warnings"] if "collinear" in w]
    assert warning and "exact" not in warning[0] and "perfectly" not in warning[0]
    ref = sm.OLS(table["y"], sm.add_constant(table[["x", "x2", "z"]])).fit(method="qr")  # statsmodels as reference library
    estimates = {t["name"]: t["estimate"] for t in result["terms"]}
    # Both solutions carry errors of order κu ≈ 1e-8 of the largest coefficient.
    assert abs(estimates["z"] - ref.params["z"]) < 1e-6
    assert abs(estimates["x"] + estimates["x2"] - ref.params["x"] - ref.params["x2"]) < 1e-6


def test_precision_warning_beyond_1e10():
    rng = np.random.default_rng(7)
    n = 500
    x = rng.normal(10, 2, n)
    X = np.asfortranarray(np.column_stack([np.ones(n), x, x + 1e-11 * rng.normal(size=n)]))
    fit = fit_ols(X, x + rng.normal(size=n))
    assert fit.condition_number > 1e10
    assert fit.warnings and "significant digits" in fit.warnings[0]
    well = fit_ols(*_design(500))
    assert well.warnings == [] and well.solver == "normal equations" and well.condition_number < 10


def test_intercept_only_and_one_block():
    rng = np.random.default_rng(8)
    y = rng.normal(5, 1, 50)
    fit = fit_ols(np.ones((50, 1)), y)
    assert abs(fit.coef[0] - y.mean()) < 1e-14
    assert fit.condition_number == 1.0
    assert abs(fit.xtx_inv[0, 0] - 1 / 50) < 1e-17


def test_blas_threads_are_restored_after_a_fit(big):
    """The passes run BLAS on one thread each (engine.single_threaded_blas) and give the caller's
    setting back afterwards, also when a fit raises."""
    controls = engine._openblas_thread_controls()
    before = [get() for get, _ in controls]
    X, y = big
    fit_ols(X, y)
    with pytest.raises(DataError):
        fit_ols(np.asfortranarray(np.column_stack([X, X[:, 1]])), y)
    assert [get() for get, _ in controls] == before
    with engine.single_threaded_blas:
        assert all(get() == 1 for get, _ in controls)


def test_values_too_large_to_square_are_refused():
    rng = np.random.default_rng(9)
    X = np.asfortranarray(np.column_stack([np.ones(100), rng.normal(size=100) * 1e160]))
    with pytest.raises(DataError, match="the values of column 1 are too large to work with in double precision"):
        fit_ols(X, rng.normal(size=100))


def test_a_forked_child_fits_with_threads(big):
    """A child forked after the pool exists gets a pool of its own (the parent's threads are not
    copied by fork)."""
    import multiprocessing

    X, y = big
    expected = fit_ols(X, y).coef  # makes the pool in this process
    context = multiprocessing.get_context("fork")
    with context.Pool(1) as pool:
        coef = pool.apply_async(_child_fit, (X, y)).get(timeout=60)
    assert np.array_equal(coef, expected)


def _child_fit(X: np.ndarray, y: np.ndarray) -> np.ndarray:
    return fit_ols(X, y).coef


def test_weighted_ill_conditioned_fit_matches_exact_arithmetic():
    """Weighted least squares on the extended-precision path against the exact weighted solution
    (rational arithmetic on the same doubles: (X'WX)b = X'Wy solved by Gauss-Jordan)."""
    from fractions import Fraction

    rng = np.random.default_rng(10)
    x = np.arange(21.0)
    X = np.asfortranarray(np.column_stack([x**j for j in range(6)]))
    y = X @ np.ones(6) + rng.normal(0, 1e3, 21)
    w = rng.uniform(0.5, 2.0, 21)
    fit = fit_ols(X, y, w)
    assert fit.solver == "tall-skinny QR" and fit.condition_number > NEAR_COLLINEAR
    rows = [[Fraction(float(v)) for v in row] for row in X]
    wf, yf = [Fraction(float(v)) for v in w], [Fraction(float(v)) for v in y]
    k = 6
    system = [
        [sum(wi * r[i] * r[j] for wi, r in zip(wf, rows, strict=True)) for j in range(k)]
        + [sum(wi * r[i] * yi for wi, r, yi in zip(wf, rows, yf, strict=True))]
        for i in range(k)
    ]
    for col in range(k):
        for r in range(k):
            if r != col:
                factor = system[r][col] / system[col][col]
                system[r] = [a - factor * b for a, b in zip(system[r], system[col], strict=True)]
    exact = np.array([float(system[i][k] / system[i][i]) for i in range(k)])
    # Measured 1.2e-15 (numpy.linalg.lstsq on the sqrt(w)-scaled rows: 3e-11).
    assert np.max(np.abs(fit.coef - exact) / np.abs(exact)) < 1e-13


@pytest.mark.parametrize("weighted", [False, True])
def test_the_meat_summed_in_the_residual_pass_is_the_covariance_s_own(big, weighted):
    """HC0/HC1: the score Gram the last residual pass sums in the shifted parametrisation and
    maps back (engine.residual_pass) equals Σ (wᵢeᵢ)² xᵢxᵢ' summed over the raw rows, and the
    HC1 errors built on it are statsmodels' (reference library)."""
    X, y = big
    w = np.random.default_rng(5).uniform(0.5, 2.0, len(y)) if weighted else None
    fused = fit_ols(X, y, w, score_gram=True)
    plain = fit_ols(X, y, w)
    assert plain.score_gram is None and fused.score_gram is not None
    factor = fused.resid * (w if weighted else 1.0)
    direct = (X * factor[:, None]).T @ (X * factor[:, None])
    assert _rel(fused.score_gram, direct) < 1e-11
    assert np.array_equal(fused.coef, plain.coef) and np.array_equal(fused.resid, plain.resid)
    ref = (sm.WLS(y, X, weights=w) if weighted else sm.OLS(y, X)).fit(cov_type="HC1")  # statsmodels as reference library
    n, k = X.shape
    cov = n / (n - k) * fused.xtx_inv @ fused.score_gram @ fused.xtx_inv
    assert _rel(np.sqrt(np.diag(cov)), ref.bse) < 1e-10


def test_the_residual_pass_writes_the_fitted_values(big):
    X, y = big
    fit = fit_ols(X, y)
    assert np.array_equal(fit.fitted, y - fit.resid)


@pytest.mark.parametrize("weighted", [False, True])
def test_a_design_held_as_columns_gives_the_gram_matrix_of_the_array(big, weighted):
    # The sweep's wide table is held as separate columns (engine.ColumnShift); its blocks must
    # be those of the array, so the augmented Gram matrix equals both the array's (same engine)
    # and X'WX, X'Wy computed directly (numpy as reference for the matrix identity).
    X, y = big
    w = np.random.default_rng(3).uniform(0.5, 2.0, len(y)) if weighted else None
    columns = tuple(np.ascontiguousarray(X[:, j]) for j in range(X.shape[1]))
    by_columns = engine.column_shift_for(columns, y, w)
    by_array = engine.shift_for(X, y, w)
    np.testing.assert_allclose(by_columns.c, by_array.c, rtol=1e-13, atol=0)
    gram = engine.gram_pass(by_columns)
    # The two shifts can differ in their last bit (a dot product per column against one matrix
    # product), and the Gram matrix moves with the shift at the level of its cancellation.
    np.testing.assert_allclose(gram, engine.gram_pass(by_array), rtol=1e-10, atol=1e-9)
    # Back from the shifted, weighted design B = sqrt(w)[1, X - c, y - c_y] to X'WX and X'Wy.
    k = X.shape[1]
    T = np.eye(k + 1)
    T[0, 1:k] = by_columns.c[1:]
    T[0, k] = by_columns.c_y
    raw = T.T @ gram @ T
    Z = np.column_stack([X, y])
    weight = w if weighted else np.ones(len(y))
    direct = Z.T @ (Z * weight[:, None])
    np.testing.assert_allclose(raw, direct, rtol=1e-9)
    assert by_columns.n == len(y) and by_columns.k == k
