"""Fuzzing: generated spec documents through the spec-file parser, the validator and the whole
analysis. Only the project's own clear errors (FormwiseError) may ever come out."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import core
from core.model.specfile import parse_spec_document

COLUMNS = ["y", "x", "z", "group", "zeros"]
TRANSFORMS = [
    "level",
    "log",
    "ihs",
    "sqrt",
    "quadratic",
    "category",
    "shifted_log:1",
    "boxcox:0.5",
    "shifted_log:-1",
    "boxcox:x",
    "",
    "LOG",
]
CHANGES = ["+10%", "-25%", "+1", "-0.5", "0->1", "a->b", "+0%", "-100%", "1e400", "x", "->", "+", "%"]


def _frame() -> pd.DataFrame:
    # Invented data for fuzzing only.
    rng = np.random.default_rng(11)
    n = 60
    x = rng.lognormal(0, 0.5, n)
    return pd.DataFrame(
        {
            "y": np.exp(0.3 * np.log(x) + rng.normal(0, 0.2, n)),
            "x": x,
            "z": rng.normal(size=n),
            "group": rng.choice(["a", "b", "c"], n),
            "zeros": np.where(rng.random(n) < 0.4, 0.0, rng.lognormal(0, 1, n)),
        }
    )


DATA = _frame()

json_leaf = st.one_of(
    st.none(), st.booleans(), st.integers(-5, 5), st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=8)
)
json_value = st.recursive(
    json_leaf,
    lambda inner: st.one_of(st.lists(inner, max_size=3), st.dictionaries(st.text(max_size=6), inner, max_size=3)),
    max_leaves=8,
)

regressor = st.fixed_dictionaries(
    {"column": st.one_of(st.sampled_from(COLUMNS), json_leaf)},
    optional={
        "transform": st.one_of(st.sampled_from(TRANSFORMS), json_leaf),
        "change": st.one_of(st.sampled_from(CHANGES), json_leaf),
        "reference": st.one_of(st.sampled_from(["a", "b", "zz"]), json_leaf),
        "extra": json_value,
    },
)
spec_strategy = st.fixed_dictionaries(
    {},
    optional={
        "outcome": st.one_of(
            st.fixed_dictionaries({"column": st.sampled_from(COLUMNS)}, optional={"transform": st.sampled_from(TRANSFORMS)}),
            json_value,
        ),
        "regressors": st.one_of(st.lists(regressor, max_size=4), json_value),
        "estimator": st.one_of(st.sampled_from(["ols", "ppml", "OLS"]), json_leaf),
        "covariance": st.one_of(st.sampled_from(["classical", "HC0", "HC1", "HC2", "HC3", "cluster", "hc9"]), json_leaf),
        "cluster": st.one_of(st.sampled_from(COLUMNS), json_leaf),
        "weights": st.one_of(st.sampled_from(COLUMNS), json_leaf),
        "at": st.one_of(st.dictionaries(st.sampled_from(COLUMNS), json_leaf, max_size=2), json_value),
        "predict": st.one_of(st.lists(st.dictionaries(st.sampled_from(COLUMNS), json_leaf, max_size=2), max_size=2), json_value),
        "name": json_leaf,
        "mystery": json_value,
    },
)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(spec_strategy)
def test_generated_specs_only_raise_clear_errors(spec: dict) -> None:
    try:
        result = core.analyze(DATA, spec, parts={"terms", "fit", "effects", "predictions"})
    except core.FormwiseError as error:
        message = str(error)
        assert message and "Traceback" not in message and len(message) < 2000
    else:
        json.dumps(result, allow_nan=False)


@settings(max_examples=200, deadline=None)
@given(
    st.one_of(st.binary(max_size=300), st.text(max_size=300).map(str.encode), json_value.map(lambda v: json.dumps(v).encode()))
)
def test_spec_file_text_only_raises_clear_errors(raw: bytes) -> None:
    try:
        spec, saved = parse_spec_document(raw)
    except core.FormwiseError:
        return
    assert isinstance(spec, dict) and isinstance(saved, dict)


near_valid_regressor = st.fixed_dictionaries(
    {"column": st.sampled_from(COLUMNS[1:])},
    optional={
        "transform": st.sampled_from(TRANSFORMS[:8]),
        "change": st.sampled_from(CHANGES[:6]),
        "reference": st.sampled_from(["a", "b"]),
    },
)
near_valid_spec = st.fixed_dictionaries(
    {
        "outcome": st.fixed_dictionaries(
            {
                "column": st.sampled_from(["y", "zeros"]),
                "transform": st.sampled_from(["level", "log", "ihs", "sqrt", "boxcox:0.3"]),
            }
        ),
        "regressors": st.lists(near_valid_regressor, min_size=1, max_size=4, unique_by=lambda r: r["column"]),
    },
    optional={
        "covariance": st.sampled_from(["classical", "HC0", "HC1", "HC2", "HC3"]),
        "estimator": st.sampled_from(["ols", "ppml"]),
        "at": st.dictionaries(st.sampled_from(["x", "z"]), st.floats(-3, 3), max_size=1),
        "predict": st.lists(st.dictionaries(st.sampled_from(["x", "z"]), st.floats(-3, 30), max_size=2), max_size=2),
    },
)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(near_valid_spec)
def test_near_valid_specs_fit_or_explain_every_section(spec: dict) -> None:
    """Specs that mostly make sense must either produce every section or a clear error."""
    try:
        result = core.analyze(DATA, spec)
    except core.FormwiseError as error:
        assert str(error)
    else:
        json.dumps(result, allow_nan=False)
