"""User text made literal for each place it is shown: one escaper per target.

- ``plain``: Streamlit's Markdown (GitHub-flavoured plus its own ``:color[...]`` directives,
  emoji shortcodes and ``$...$`` LaTeX), for everything the app renders as Markdown.
- ``markdown``: CommonMark/GFM documents (the Markdown exports).
- ``html``: HTML text and attribute values (Plotly's labels read a few HTML tags too).
- ``latex``: LaTeX text.
- ``csv_cell``: a spreadsheet cell that must not run as a formula (OWASP, "CSV Injection").
"""

from __future__ import annotations

import re
from html import escape as _html_escape
from typing import Any

# Characters Streamlit's Markdown (GitHub-flavoured, plus its own :color[...] directives, emoji
# shortcodes and $...$ LaTeX) gives a meaning; each is shown literally when backslash-escaped.
_SCREEN_SPECIAL = re.compile(r"([\\`*_{}\[\]()#+\-.!|<>$~:&])")


# Bare URLs and e-mail addresses are linked *after* parsing (GFM autolink literals), so an
# escape does not stop them; an invisible word joiner after 'http:', 'www' or '@' does.
_AUTOLINK_START = re.compile(r"(?i)(?<=:)(?=//)|(?<=www)(?=\.)|(?<=@)")


WORD_JOINER = "\u2060"


def plain(text: Any) -> str:
    """User text (column names, category levels, file and model names, cell values, messages
    that quote them) as literal text in anything Streamlit renders as Markdown: st.markdown,
    st.caption, st.error and the other alerts, st.table cells and headers, widget labels.

    Without it a column named ``![x](http://host/p.png)`` fetches an image, ``[x](javascript:…)``
    makes a link, ``:red[x]`` colours text and ``$x$`` typesets LaTeX. Line breaks become
    spaces so a name cannot start a heading or a list.
    """
    flat = " ".join(str(text).splitlines())
    return _SCREEN_SPECIAL.sub(r"\\\1", _AUTOLINK_START.sub(WORD_JOINER, flat))


FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


_LATEX_SPECIAL = {
    "\\": r"\textbackslash{}",
    "&": r"\&",
    "%": r"\%",
    "$": r"\$",
    "#": r"\#",
    "_": r"\_",
    "{": r"\{",
    "}": r"\}",
    "~": r"\textasciitilde{}",
    "^": r"\textasciicircum{}",
}


def csv_cell(cell: Any) -> Any:
    """Text a spreadsheet would run as a formula gets a leading apostrophe; numbers pass."""
    if isinstance(cell, str) and cell.startswith(FORMULA_STARTS):
        return "'" + cell
    return cell


# Characters that change meaning inside a Markdown table cell or paragraph (CommonMark §2.4).
_MARKDOWN_SPECIAL = set("\\`*_{}[]()#+!|<>$~")


def markdown(text: str) -> str:
    """User text as literal Markdown: special characters backslash-escaped, line breaks folded,
    and bare URLs broken with a word joiner so no renderer turns them into links or images."""
    escaped = "".join("\\" + ch if ch in _MARKDOWN_SPECIAL else ch for ch in text.replace("\r", " ").replace("\n", " "))
    return escaped.replace("://", ":\u2060//").replace("www", "w\u2060ww").replace("@", "@\u2060")


# Characters the screen uses that plain LaTeX (no unicode engine) cannot set.
_LATEX_UNICODE = {
    "\u2212": r"\textminus{}",
    "\u00a0": "~",
    "≈": r"\ensuremath{\approx}",
    "²": r"\textsuperscript{2}",
    "¹": r"\textsuperscript{1}",
    "⚠": "(!)",
    "→": r"\ensuremath{\to}",
    "★": r"\ensuremath{\star}",
    "λ": r"\ensuremath{\lambda}",
    "—": "---",
}


def latex(text: str) -> str:
    """Text as literal LaTeX: special characters escaped, the screen's symbols set in math."""
    return "".join(_LATEX_SPECIAL.get(ch) or _LATEX_UNICODE.get(ch, ch) for ch in text)


def html(text: Any) -> str:
    """Text as literal HTML text content ('&', '<', '>'); also for Plotly's titles, labels and
    legends, which read a few HTML tags."""
    return _html_escape(str(text), quote=False)
