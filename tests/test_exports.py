"""Exports: tables that cannot run as spreadsheet formulas, LaTeX and HTML that escape user text,
and a report that fetches nothing from the network."""

from __future__ import annotations

import csv
import io
import re

import numpy as np
import pandas as pd
import pytest

import core
from core.output.escape import csv_cell as neutralise
from core.output.report import STAGE_ANALYSIS, STAGE_WRITING, build_report
from core.output.tables import coefficient_table, comparison_table, effects_table, plain_number, render, to_csv, to_latex

HOSTILE_Y = '=HYPERLINK("http://example.invalid","x")'
HOSTILE_X = "<script>alert(1)</script>"
HOSTILE_CAT = "@SUM(A1:A9)"


def _hostile_frame() -> pd.DataFrame:
    # Invented data whose names are hostile on purpose.
    rng = np.random.default_rng(5)
    n = 120
    x = rng.lognormal(1, 0.4, n)
    group = np.where(rng.random(n) < 0.5, "-2+3", "<img src=x onerror=alert(2)>")
    y = np.exp(0.5 + 0.7 * np.log(x) + 0.2 * (group == "-2+3") + rng.normal(0, 0.2, n))
    return pd.DataFrame({HOSTILE_Y: y, HOSTILE_X: x, HOSTILE_CAT: group})


def _hostile_spec() -> dict:
    return {
        "name": "<b>model</b>",
        "outcome": {"column": HOSTILE_Y, "transform": "log"},
        "regressors": [
            {"column": HOSTILE_X, "transform": "log", "change": "+10%"},
            {"column": HOSTILE_CAT, "transform": "category"},
        ],
    }


def test_neutralise_prefixes_formula_text_and_keeps_numbers() -> None:
    # OWASP, "CSV Injection": cells starting with = + - @ tab or carriage return.
    for text in ("=1+1", "+1", "-1+2", "@SUM(A1)", "\tx", "\rx"):
        assert neutralise(text) == "'" + text
    assert neutralise("plain") == "plain"
    assert neutralise(-1.5) == -1.5


def test_csv_tables_cannot_run_formulas_and_numbers_stay_numbers() -> None:
    result = core.analyze(_hostile_frame(), _hostile_spec())
    for table in (coefficient_table(result), effects_table(result)):
        text = to_csv(table)
        for row in csv.reader(io.StringIO(text)):
            for cell in row:
                if cell and cell[0] in "=+-@\t\r":
                    float(cell)  # only plain numbers may start with a sign
    effects = list(csv.reader(io.StringIO(to_csv(effects_table(result)))))
    column = effects[0].index("Exact")
    exact = float(effects[1][column])  # a number, written as a number: the screen's, as printed
    assert exact == pytest.approx(next(e["exact"] for e in result["effects"] if e["change"] == "+10%"), rel=5e-3)
    assert effects[1][column] == plain_number(effects_table(result).rows[0][3])


def test_latex_escapes_special_characters() -> None:
    result = core.analyze(_hostile_frame(), _hostile_spec())
    text = to_latex(coefficient_table(result))
    assert r"\begin{tabularx}" in text and r"\toprule" in text and r"\bottomrule" in text
    assert "SUM(A1:A9)" in text and "@SUM" in text
    assert r"95 \% interval" in text
    assert re.search(r"(?<!\\)[%#$]", text) is None  # special characters escaped (& is the column separator)


def test_report_escapes_user_text_and_fetches_nothing() -> None:
    data = _hostile_frame()
    spec = _hostile_spec()
    html = build_report(data, spec, data_name="<i>file</i>.csv", saved={"<u>a</u>": spec})
    assert "<script>" not in html and "<img" not in html and "<b>model" not in html and "<i>file" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    # No network reference: nothing with a scheme or protocol-relative source, no script tag at all.
    assert re.search(r"""(src|href)\s*=\s*["']?(https?:)?//""", html) is None
    assert "<link" not in html and "@import" not in html and "url(" not in html
    assert "example.invalid" in html  # the hostile name is shown as text, escaped
    assert 'href="http' not in html


def test_comparison_table_renders_in_every_format() -> None:
    data = _hostile_frame()
    spec = _hostile_spec()
    level = dict(spec, outcome={"column": HOSTILE_Y, "transform": "level"})
    results = {"log": core.analyze(data, spec), "level": core.analyze(data, level)}
    table = comparison_table(results)
    for fmt in ("csv", "markdown"):
        assert "R² on the original scale" in render([table], fmt)
    assert r"R\textsuperscript{2} on the original scale" in render([table], "latex")


def test_markdown_tables_keep_user_text_literal() -> None:
    from core.output.tables import Table, to_markdown

    table = Table(
        "t",
        ["name"],
        [["![px](http://127.0.0.1:9/p.png)"], ["<img src=x>"], ["[a](javascript:alert(1))"], ["www.example.invalid"]],
    )
    text = to_markdown(table)
    # Every bracket, angle bracket and bang is escaped, and no URL survives whole.
    assert re.search(r"(?<!\\)[\[\]()<>!]", text.replace("**t**", "")) is None
    assert r"\!\[px\]\(" in text and r"\<img" in text
    assert "://" not in text and "www." not in text


def test_report_progress_moves_forward_names_its_stages_and_false_stops_it(kiosks: pd.DataFrame, default_spec: dict) -> None:
    seen: list[tuple[float, str]] = []
    html = build_report(
        kiosks, default_spec, "kiosks.csv", {"saved": default_spec}, lambda share, stage: seen.append((share, stage))
    )
    shares = [share for share, _ in seen]
    assert html.startswith("<!DOCTYPE html>")
    assert shares == sorted(shares) and shares[0] == 0.0 and 0.9 < shares[-1] <= 1.0
    stages = [stage for _, stage in seen]
    assert stages[0] == STAGE_ANALYSIS and stages[-1] == STAGE_WRITING
    drawing = [s for s in stages if s.startswith("Drawing the charts")]
    assert drawing[0] == f"Drawing the charts (1 of {len(drawing)})" and "Fitting the saved models (1 of 1)" in stages
    # The analysis itself reports its sections: more than one share inside the analysis stage.
    assert len({share for share, stage in seen if stage == STAGE_ANALYSIS}) > 3
    # Stopping at the charts leaves no report, with the reason worded for the user.
    with pytest.raises(core.FormwiseError, match="report was stopped"):
        build_report(kiosks, default_spec, "kiosks.csv", None, lambda share, stage: not stage.startswith("Drawing"))
