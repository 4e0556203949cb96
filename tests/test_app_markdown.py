"""User text on screen stays literal text: ``app.plain`` and every place the app shows a
name, a level, a file name or a message that quotes them.

Streamlit renders Markdown in st.markdown, st.caption, the alerts, st.table cells and headers
and widget labels: a column named ``![x](http://host/p.png)`` would fetch an image (a tracking
pixel), ``[x](javascript:…)`` would make a link, ``:red[x]`` colours and ``$x$`` typesets. The
browser-side check of the same file is in tests/test_browser.py.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from streamlit.testing.v1 import AppTest

from app import tables
from core.output.escape import plain
from tests.helpers import shown

ROOT = Path(__file__).resolve().parent.parent
MAIN = str(ROOT / "app" / "main.py")
TIMEOUT = 120

HOSTILE_COLUMNS = [
    "![px](http://127.0.0.1:9/p.png)",
    "[click](javascript:alert(1))",
    "http://example.invalid/x",
    ":red[alarm]",
    "$x^2$",
]
HOSTILE_LEVELS = ["[lvl](http://example.invalid/l)", ":blue[b]"]
# Fragments that must never reach a Markdown source unescaped.
RAW = [r"\]\(", r"!\[", r"(?i)https?://", r"(?<!\\):red\[", r"(?<!\\):blue\[", r"(?<!\\)\$x", r"(?i)www\.example"]


def hostile_frame(n: int = 60) -> pd.DataFrame:
    rng = np.random.default_rng(3)
    data = {"sales": np.exp(4 + rng.normal(0, 0.3, n))}
    for i, name in enumerate(HOSTILE_COLUMNS):
        data[name] = rng.uniform(1 + i, 5 + 2 * i, n).round(3)
    data["zone"] = [HOSTILE_LEVELS[i % 2] for i in range(n)]
    return pd.DataFrame(data)


# --- plain() ---------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("weekly_revenue", r"weekly\_revenue"),
        ("![px](http://h/p.png)", "\\!\\[px\\]\\(http\\:\u2060//h/p\\.png\\)"),
        ("[click](javascript:alert(1))", r"\[click\]\(javascript\:alert\(1\)\)"),
        (":red[alarm]", r"\:red\[alarm\]"),
        ("$x^2$", r"\$x^2\$"),
        ("a|b <i> {c} ~d~ #e +f -g `h` *i* &amp;", r"a\|b \<i\> \{c\} \~d\~ \#e \+f \-g \`h\` \*i\* \&amp;"),
        ("back\\slash", r"back\\slash"),
        ("www.example.invalid", "www\u2060\\.example\\.invalid"),
        ("mail me@example.invalid", "mail me@\u2060example\\.invalid"),
        ("line one\nline two\r\n# three", r"line one line two \# three"),
        (3.5, r"3\.5"),
    ],
)
def test_plain_escapes_markdown(text: object, expected: str) -> None:
    assert plain(text) == expected


@pytest.mark.parametrize(
    "text",
    [
        *HOSTILE_COLUMNS,
        *HOSTILE_LEVELS,
        "HTTPS://Example.invalid",
        "x www.y.z",
        "a@b.co",
        "1. item",
        "- item",
        "> quote",
        "plain",
    ],
)
def test_plain_reads_back_as_the_same_text(text: str) -> None:
    escaped = plain(text)
    # What the reader sees is the text itself; no raw link, image or directive syntax is left.
    assert shown(escaped) == text
    assert not re.search(r"(?<!\\)[\[\]()!:$]", escaped.replace("\\\\", ""))
    assert not re.search(r"(?i)https?://|www\.|@[a-z]", escaped)


def test_tables_escape_cells_and_headers_for_st_table() -> None:
    table = pd.DataFrame({"Term": [HOSTILE_COLUMNS[0]], HOSTILE_COLUMNS[3]: ["1.5"]})
    styled = tables.styled(table, numbers_in=[HOSTILE_COLUMNS[3]])
    data = styled.data
    assert list(data.columns) == [plain("Term"), plain(HOSTILE_COLUMNS[3])]
    assert data.iloc[0, 0] == plain(HOSTILE_COLUMNS[0])
    # The number column is still right-aligned under its escaped name.
    assert "text-align: right" in styled.to_html()


# --- the whole screen through AppTest ------------------------------------------------------------------
def sources(at: AppTest) -> list[str]:
    """Every Markdown source on screen: texts, alerts, table cells and headers, widget labels."""
    out = [e.value for kind in ("markdown", "caption", "error", "warning", "info", "success") for e in at.get(kind)]
    for element in at.table:
        frame = element.value
        out += [str(c) for c in frame.columns]
        out += [str(v) for v in frame.to_numpy().ravel() if isinstance(v, str)]
    for kind in ("selectbox", "number_input", "toggle", "checkbox", "text_input", "slider", "radio", "button"):
        out += [getattr(w, "label", "") or "" for w in at.get(kind)]
    return out


def test_hostile_names_are_shown_literally_in_every_view() -> None:
    at = AppTest.from_file(MAIN, default_timeout=TIMEOUT)
    at.run()
    frame = hostile_frame()
    at.file_uploader[0].set_value(("www.example.invalid.csv", frame.to_csv(index=False).encode(), "text/csv")).run()
    assert not at.exception, at.exception
    assert at.session_state["data"]["name"] == "www.example.invalid.csv"
    grid = at.session_state["grid_base"]
    # Make sure every hostile column and the hostile category are in the model.
    rows = {str(c): i for i, c in enumerate(grid["column"])}
    edits = {rows[c]: {"role": "regressor", "transform": "level"} for c in HOSTILE_COLUMNS}
    edits[rows["zone"]] = {"role": "regressor", "transform": "category"}
    edits[rows["sales"]] = {"role": "outcome", "transform": "log"}
    at.session_state[at.session_state["grid_key"]] = {"edited_rows": edits, "added_rows": [], "deleted_rows": []}
    at.run()
    assert not at.exception, at.exception
    seen = "\n".join(shown(s) for s in sources(at))
    assert HOSTILE_COLUMNS[0] in seen and "www.example.invalid.csv" in seen
    views = at.segmented_control(key="view").options
    for view in views:
        at.segmented_control(key="view").set_value(view).run()
        assert not at.exception, (view, at.exception)
        for source in sources(at):
            for fragment in RAW:
                assert not re.search(fragment, source), f"{view}: unescaped {fragment!r} in {source!r}"
