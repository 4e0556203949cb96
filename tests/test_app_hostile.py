"""Issue 19's cases through the app (AppTest): each hostile upload or spec file gets our own
message, no exception element is ever shown, and the last good result stays on screen.
Invented data (seeded)."""

from __future__ import annotations

import json
import random
from typing import Any

import numpy as np
import pandas as pd
from streamlit.testing.v1 import AppTest

from tests.app_support import edit_grid, show, start


def _upload(at: AppTest, name: str, raw: bytes) -> AppTest:
    at.file_uploader[0].set_value((name, raw, "text/csv")).run()
    assert not at.exception, at.exception
    return at


def _upload_spec(at: AppTest, spec: dict[str, Any] | bytes) -> AppTest:
    version = at.session_state["spec_upload_version"] if "spec_upload_version" in at.session_state else 0
    raw = spec if isinstance(spec, bytes) else json.dumps(spec).encode()
    at.file_uploader(key=f"spec_upload_{version}").set_value(("hostile.json", raw, "application/json")).run()
    assert not at.exception, at.exception
    return at


def _words(elements: Any) -> list[str]:
    """Texts of message elements as read on screen (Markdown escapes removed)."""
    return [str(e.value).replace("\\", "") for e in elements]


def _coefficients(at: AppTest) -> pd.DataFrame:
    found = [t.value for t in at.table if "What it means" in t.value.columns]
    assert found, "no coefficient table"
    return found[0]


def _sales(n: int = 300, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    x = rng.normal(5, 1, n)
    region = rng.choice(["North", "South", "East"], n)
    return pd.DataFrame({"sales": np.exp(0.3 * x + rng.normal(0, 0.3, n)), "price": x, "region": region})


SPEC = {
    "outcome": {"column": "sales", "transform": "log"},
    "regressors": [{"column": "price"}, {"column": "region", "transform": "category"}],
}


def test_a_file_with_carriage_return_line_ends_reads_as_its_columns() -> None:
    at = start()
    raw = _sales().to_csv(index=False, lineterminator="\r").encode()
    _upload(at, "old_mac.csv", raw)
    assert list(at.session_state["data"]["frame"].columns) == ["sales", "price", "region"]
    assert len(at.session_state["data"]["frame"]) == 300
    assert not at.error and not at.exception
    assert at.session_state["last_good"]["data_name"] == "old_mac.csv"


def test_residual_checks_on_a_190_level_category_say_which_white_test_ran() -> None:
    rng = random.Random(19)
    lines = ["units,price,shop"]
    for i in range(2_000):
        price = round(rng.uniform(2, 6), 2)
        lines.append(f"{round(40 / price + (i % 190) * 0.05 + rng.gauss(0, 1), 2)},{price},shop{i % 190:03d}")
    at = start()
    _upload(at, "shops190.csv", ("\n".join(lines) + "\n").encode())
    edit_grid(at, {"shop": {"role": "regressor", "transform": "category"}})
    assert sum("shop" in t for t in _coefficients(at)["Term"]) == 189  # every level but the reference
    show(at, "Residual checks")
    assert not at.exception and not at.error, _words(at.error)
    text = " ".join(_words(at.markdown))
    # The spread card names the form and why (18,336 auxiliary columns for the full form).
    assert "fitted values and their squares" in text and "18,336 auxiliary columns" in text


def test_weights_naming_a_category_in_a_spec_file_are_refused_and_the_screen_kept() -> None:
    at = start()
    _upload(at, "sales.csv", _sales().to_csv(index=False).encode())
    good = _coefficients(at)
    _upload_spec(at, {**SPEC, "weights": "region"})
    errors = _words(at.sidebar.error)
    assert len(errors) == 1 and "spec.weights: 'region' is a category regressor" in errors[0], errors
    assert "The screen is unchanged" in errors[0]
    pd.testing.assert_frame_equal(_coefficients(at), good)


def test_a_spec_file_predicting_at_ten_to_the_400_is_refused() -> None:
    at = start()
    _upload(at, "sales.csv", _sales().to_csv(index=False).encode())
    good = _coefficients(at)
    # Python's json writes 10**400 as its 401 digits, as a hand-written spec file may.
    _upload_spec(at, {**SPEC, "predict": [{"price": 10**400}]})
    errors = _words(at.sidebar.error)
    assert len(errors) == 1 and "integer of 401 digits" in errors[0], errors
    pd.testing.assert_frame_equal(_coefficients(at), good)


def test_an_unknown_level_in_a_restored_spec_names_the_levels_and_keeps_the_last_result() -> None:
    at = start()
    _upload(at, "sales.csv", _sales().to_csv(index=False).encode())
    good = at.session_state["last_good"]
    _upload_spec(at, {**SPEC, "at": {"region": "Nowhere"}, "predict": [{"region": "Nowhere"}]})
    errors = _words(at.error)
    words = "'Nowhere' is not a level of 'region'; levels are 'East', 'North', 'South'."
    assert any(words in e for e in errors), errors
    assert at.session_state["last_good"]["spec"] == good["spec"]
    # the spec's prediction points are left out of the app, and said so
    assert any("prediction points are left out" in c for c in _words(at.sidebar.caption))


def test_a_prediction_beyond_floating_point_in_the_predict_view_says_why_it_is_empty() -> None:
    at = start()
    _upload(at, "sales.csv", _sales().to_csv(index=False).encode())
    _upload_spec(at, SPEC)  # a log outcome: exp of the index at price = 1e200 overflows
    show(at, "Predict")
    at.number_input(key="predict_price").set_value(1e200).run()
    assert not at.exception
    warnings = _words(at.warning)
    assert any(w.startswith("Prediction 1 (") and "too large for floating-point numbers" in w for w in warnings), warnings
    assert any("Expected sales: —" in m for m in _words(at.markdown))
