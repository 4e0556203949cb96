"""The Cautions section under the results: the report's words on screen, small samples flagged."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from streamlit.testing.v1 import AppTest

from app import cautions
from core.output.report import CAUTION_REVIEW
from tests.helpers import shown

MAIN = str(Path(__file__).resolve().parent.parent / "app" / "main.py")


def start() -> AppTest:
    at = AppTest.from_file(MAIN, default_timeout=120)
    at.run()
    assert not at.exception, at.exception
    return at


def test_cautions_section_is_on_screen_with_the_reports_words() -> None:
    at = start()
    text = shown("\n".join(m.value for m in at.markdown))
    assert "##### Cautions" in text
    assert "not causal effects by themselves" in text
    assert "extrapolations and are marked" in text
    assert "'Approximate' effects are the first-order (textbook) readings" in text
    assert CAUTION_REVIEW in text
    assert not any("Small sample" in shown(w.value) for w in at.warning)


def test_small_samples_are_flagged() -> None:
    assert cautions.sample_lines({"n_obs": 1500, "terms": [{}] * 9}) == []
    lines = cautions.sample_lines({"n_obs": 25, "terms": [{}] * 2})
    assert len(lines) == 1 and lines[0].startswith("Small sample: 25 rows")
    lines = cautions.sample_lines({"n_obs": 60, "terms": [{}] * 7})
    assert len(lines) == 1 and "60 rows for 7 coefficients" in lines[0]
    rng = np.random.default_rng(5)
    frame = pd.DataFrame({"y": np.exp(rng.normal(2, 0.3, 24)), "x": rng.uniform(1, 5, 24)})
    at = start()
    at.file_uploader[0].set_value(("small.csv", frame.to_csv(index=False).encode(), "text/csv")).run()
    assert not at.exception, at.exception
    warnings = [shown(w.value) for w in at.warning]
    assert any(w.startswith("Small sample: 24 rows. Treat every figure as fragile.") for w in warnings), warnings
