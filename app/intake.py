"""Getting a table in, and the advisor on screen.

- reading an upload (and, for a workbook, the chosen sheet) once per file, with the notes on
  what reading changed and the column profiles of ``core.intake.profile``;
- the app's own cap on upload size (``FORMWISE_MAX_UPLOAD_MB``), below Streamlit's hard cap
  ``server.maxUploadSize``;
- the "Column profiles" view: what each column holds, its shape, and the transform the advisor
  suggests with its reasons and evidence;
- "Apply every suggestion", and identifier and date columns kept out of the model unless the
  user asks for them.

The rules live in ``core.intake.reader`` and ``core.intake.profile``; the pure helpers here (no widgets) only
turn them into grid edits and words, so they are tested without a browser. User text (column
names, notes, values) is shown through ``st.text`` and ``st.dataframe``, which render no
Markdown, or escaped for figures.
"""

from __future__ import annotations

import io
import math
import os
from collections.abc import Callable, Mapping
from typing import Any

import pandas as pd
import streamlit as st

import core
from app import keys
from app.gridspec import LOCKED_KINDS, _text, profile_entries, with_absorbed
from core.intake.advisor import suggest_with_notes
from core.intake.profile import profile_table
from core.intake.reader import read_table_with_notes
from core.model.transforms import menu_codes, menu_word
from core.output.escape import plain
from core.output.text import join_words, sentence_case

CAP_VARIABLE = "FORMWISE_MAX_UPLOAD_MB"
DEFAULT_CAP_MB = 200.0
_MB = 1024 * 1024

_LOCKED_PLURAL = {"identifier": "identifiers", "date": "dates"}


# --- reading, cached on the bytes ----------------------------------------------------------------
def read_upload(
    raw: bytes, name: str, sheet: str | None = None, stage: Callable[[str], None] | None = None
) -> tuple[pd.DataFrame, list[str], dict[str, Any]]:
    """The table, the notes on every conversion made while reading, and the column profiles
    (without each column's Box-Cox λ: the profiles view works out the one it shows).

    ``stage`` is told each step as it starts ("reading", "profiling"), for a progress display.
    Not cached: the caller reads each upload once, and a cache would hash the whole file and
    copy the table on every hit. Raises ``core.DataError`` (worded for the user) when the bytes
    are not a usable table."""
    say = stage or (lambda _: None)
    say("reading")
    frame, notes = read_table_with_notes(raw, name=name, sheet=sheet)
    # Header cells such as 2024 can arrive as numbers; the grid and the spec name columns as text.
    frame = frame.rename(columns=str)
    say("profiling")
    profile = profile_table(frame, notes, boxcox=False)
    # The reader's facts on each column now live in the profile; left on the frame, pandas would
    # deep-copy them into every column taken from it, at every refit.
    frame.attrs = {}
    return frame, notes, profile


def sheet_names(raw: bytes) -> list[str]:
    """The sheets of an .xlsx workbook; empty when it cannot be opened (the reader then says why)."""
    try:
        return [str(s) for s in pd.ExcelFile(io.BytesIO(raw), engine="openpyxl").sheet_names]
    except Exception:  # openpyxl raises many unrelated types for a broken workbook
        return []


@st.cache_data(max_entries=8, show_spinner="Choosing a starting model…")
def starting_model(
    _frame: pd.DataFrame, profile: dict[str, Any], _columns: core.ColumnCache | None = None
) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """The advisor's starting model for a new table and its notes (``core.suggest_with_notes``),
    cached on the table's profile (the frame itself is not hashed). ``_columns`` (the table's
    column cache) keeps what the advisor's trial fits converted and transformed for the first
    refit."""
    return suggest_with_notes(_frame, profile, _columns)


def starting_model_or_none(
    frame: pd.DataFrame, profile: dict[str, Any], columns: core.ColumnCache | None = None
) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """The starting model, or, for a table no model can be fitted to, an empty grid with the
    advisor's reason as its one note (the table is still shown, so the user sees why)."""
    try:
        return starting_model(frame, profile, columns)
    except core.DataError as exc:
        return {"outcome": {}, "regressors": []}, [{"column": None, "about": "no_model", "text": str(exc)}]


def has_sheets(upload: Any) -> bool:
    """Whether the upload is a workbook with more than one sheet (the picker is shown)."""
    known = st.session_state.get(keys.SHEET_LIST)
    return bool(known and known[0] == upload.file_id and len(known[1]) > 1)


def advice_notes(data: dict[str, Any]) -> None:
    """Under the grid: how the starting model was chosen (columns left out and why)."""
    advice = data.get("advice") or []
    for note in advice:
        if note.get("about") == "no_model":
            st.warning(plain(sentence_case(note["text"])))
    # The panel proposal has its own button (``absorb_offer``).
    advice = [note for note in advice if note.get("about") not in ("no_model", "absorb")]
    if not advice:
        return
    left_out = sum(1 for note in advice if note.get("about") in ("left_out", "removed"))
    title = "How the starting model was chosen" + (
        f" ({left_out} column{'s' if left_out != 1 else ''} left out)" if left_out else ""
    )
    with st.expander(title):
        st.caption("\n".join(f"- {plain(sentence_case(note['text']))}" for note in advice))
        st.caption("A column left out can be added again in the grid: set its role to 'regressor'.")


def sheet_picker(upload: Any) -> str | None:
    """For an uploaded workbook with several sheets, a picker (first sheet by default); else None.

    The sheet list is kept per upload in the session, so a rerun neither reopens the workbook
    nor hashes its bytes."""
    if not upload.name.lower().endswith(".xlsx"):
        return None
    ss = st.session_state
    known = ss.get(keys.SHEET_LIST)
    if not known or known[0] != upload.file_id:
        known = ss[keys.SHEET_LIST] = (upload.file_id, sheet_names(upload.getvalue()))
    sheets = known[1]
    if len(sheets) < 2:
        return None
    return st.selectbox(
        "Sheet",
        sheets,
        key=f"sheet_{upload.file_id}",
        help=f"This workbook has {len(sheets)} sheets; pick the one that holds the table.",
    )


# --- the size cap ----------------------------------------------------------------------------------
def upload_cap(environ: Mapping[str, str] | None = None) -> tuple[float, str | None]:
    """The app's cap on upload size in MB, and a note when the setting could not be used."""
    environ = os.environ if environ is None else environ
    text = (environ.get(CAP_VARIABLE) or "").strip()
    if not text:
        return DEFAULT_CAP_MB, None
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    if not math.isfinite(value) or value <= 0:
        return DEFAULT_CAP_MB, (
            f"{CAP_VARIABLE}={text} is not a positive number of megabytes; the default of {_mb_words(DEFAULT_CAP_MB)} applies."
        )
    return value, None


def size_problem(name: str, n_bytes: int, environ: Mapping[str, str] | None = None) -> str | None:
    """Why a file of ``n_bytes`` is refused, with how to raise the limit; None when it fits."""
    cap, _ = upload_cap(environ)
    if n_bytes <= cap * _MB:
        return None
    bigger = max(DEFAULT_CAP_MB, math.ceil(2 * n_bytes / _MB / 100) * 100)
    return (
        f"'{name}' is {_size_words(n_bytes)}, more than the {_mb_words(cap)} Formwise accepts. To load bigger files, set "
        f"the environment variable {CAP_VARIABLE} (for example {CAP_VARIABLE}={bigger:.0f}) and raise Streamlit's own "
        f"limit to match: start the app with --server.maxUploadSize {bigger:.0f}, or set maxUploadSize under [server] "
        "in .streamlit/config.toml."
    )


def _mb_words(mb: float) -> str:
    return f"{mb:,.0f} MB" if mb >= 10 or float(mb).is_integer() else f"{mb:g} MB"


def _size_words(n_bytes: int) -> str:
    if n_bytes >= 0.1 * _MB:
        return f"{n_bytes / _MB:,.1f} MB"
    if n_bytes >= 1024:
        return f"{n_bytes / 1024:,.1f} KB"
    return f"{n_bytes:,} bytes"


# --- pure helpers: suggestions, locks, words -----------------------------------------------------------
def locked_columns(profile: dict[str, Any] | None) -> dict[str, str]:
    """Identifier and date columns (name -> kind): not variables for the model by default."""
    return {c: e["kind"] for c, e in profile_entries(profile).items() if e.get("kind") in LOCKED_KINDS}


def lock_roles(grid: pd.DataFrame, locked: Mapping[str, str]) -> tuple[pd.DataFrame, list[str]]:
    """The grid with every locked column back to 'not used', and the columns that moved."""
    # An identifier may be absorbed (its levels' fixed effects swept out) without unlocking it.
    moved = [
        i
        for i in grid.index
        if _text(grid.at[i, "column"]) in locked and _text(grid.at[i, "role"]) not in ("", "not used", "absorb")
    ]
    if not moved:
        return grid, []
    fixed = grid.copy()
    for i in moved:
        fixed.at[i, "role"] = "not used"
    return fixed, [_text(grid.at[i, "column"]) for i in moved]


def apply_suggestions(grid: pd.DataFrame, profile: dict[str, Any] | None) -> tuple[pd.DataFrame, list[tuple[str, str, str]]]:
    """Every row's transform set to the advisor's suggestion, roles kept.

    Rows without a suggestion (identifiers, dates, text) keep theirs, and so does an outcome
    whose suggestion only a regressor can take (a category). Returns the new grid and the
    changes made as (column, old transform, new transform)."""
    entries = profile_entries(profile)
    out = grid.copy()
    changes: list[tuple[str, str, str]] = []
    for i in out.index:
        column = _text(out.at[i, "column"])
        suggested = (entries.get(column) or {}).get("suggested_transform")
        if not suggested:
            continue
        role = _text(out.at[i, "role"])
        allowed = menu_codes("outcome") if role == "outcome" else menu_codes("regressor")
        current = _text(out.at[i, "transform"]) or "level"
        if suggested in allowed and suggested != current:
            out.at[i, "transform"] = suggested
            changes.append((column, current, suggested))
    return out, changes


def transform_words(code: str | None) -> str:
    if not code:
        return "not used"
    return menu_word(code)


def note_order(notes: list[str], columns: list[str]) -> list[str]:
    """Notes about the whole file first, then the notes on each column in the table's order."""

    def position(note: str) -> int:
        for j, column in enumerate(columns):
            if note.startswith((f"{column}: ", f"column '{column}' ")):
                return j + 1
        return 0

    return sorted(notes, key=position)


def note_text(note: str, columns: list[str]) -> str:
    """A note as a sentence; one that starts with a column name keeps the name as written."""
    if any(note.startswith(f"{column}: ") for column in columns):
        return note
    return sentence_case(note)


# --- on screen: sidebar and grid ---------------------------------------------------------------------
def intake_notes(data: dict[str, Any]) -> None:
    """Under the data name: what reading the file changed, the file's notes first."""
    notes = data.get("notes")
    if notes is None:
        return
    with st.expander("What was changed while reading"):
        columns = [str(c) for c in data["frame"].columns]
        ordered = note_order(list(notes), columns)
        st.caption("\n".join(f"- {plain(note_text(note, columns))}" for note in ordered))
        if len(ordered) <= 1:
            st.caption("Nothing else needed converting.")


def cap_note() -> None:
    """A word under the uploader when the cap setting cannot be used."""
    _, problem = upload_cap()
    if problem:
        st.caption(f"⚠ {plain(problem)}")


def suggestion_button(restart: Callable[[pd.DataFrame], None]) -> None:
    """'Apply every suggestion' above the grid, and what it changed on the last click."""
    ss = st.session_state
    if not (ss.get(keys.DATA) or {}).get("profile"):
        return

    def apply() -> None:
        grid, changes = apply_suggestions(ss[keys.PREVIOUS_GRID], ss[keys.DATA]["profile"])
        if changes:
            restart(grid)
            listed = "; ".join(f"{c}: {transform_words(old)} → {transform_words(new)}" for c, old, new in changes)
            ss[keys.ADVICE_MESSAGE] = (
                f"Set {len(changes)} transform{'s' if len(changes) != 1 else ''} to the suggestion: {listed}."
            )
        else:
            ss[keys.ADVICE_MESSAGE] = "Every transform in the grid already follows the suggestions."

    st.button(
        "Apply every suggestion",
        key="apply_suggestions",
        on_click=apply,
        icon=":material/auto_fix_high:",
        help="Sets each variable's transform to the one the advisor suggests (its reasons are in the Column profiles "
        "view); roles stay as they are, and any transform can be changed again in the grid.",
        width="stretch",
    )


def advice_message() -> None:
    """What the last click on 'Apply every suggestion' changed, once."""
    message = st.session_state.pop(keys.ADVICE_MESSAGE, None)
    if message:
        st.caption(plain(message))


def keep_locked_out(grid: pd.DataFrame, restart: Callable[[pd.DataFrame], None]) -> None:
    """Identifier and date columns stay 'not used' unless the user ticks the box under the grid."""
    ss = st.session_state
    locked = locked_columns((ss.get(keys.DATA) or {}).get("profile"))
    if not locked:
        return
    if not ss.get(keys.UNLOCK_LOCKED):
        fixed, moved = lock_roles(grid, locked)
        if moved:
            ss[keys.LOCK_MESSAGE] = (
                f"{join_words(moved)} {'holds' if len(moved) == 1 else 'hold'} "
                f"{join_words(sorted({_LOCKED_PLURAL[locked[c]] for c in moved}))}, so "
                f"{'it stays' if len(moved) == 1 else 'they stay'} out of the model. Tick "
                "“Use identifier and date columns” to use "
                f"{'it' if len(moved) == 1 else 'them'}."
            )
            restart(fixed)
            st.rerun()
    message = ss.pop(keys.LOCK_MESSAGE, None)
    if message:
        st.info(plain(message), icon=":material/lock:")


def unlock_checkbox() -> None:
    """The box that lets identifier and date columns into the model."""
    locked = locked_columns((st.session_state.get(keys.DATA) or {}).get("profile"))
    if not locked:
        return
    names = plain(join_words(list(locked)))
    st.checkbox(
        "Use identifier and date columns",
        key=keys.UNLOCK_LOCKED,
        help=f"{names}: labels of rows rather than variables, so the grid keeps them 'not used'. An identifier can "
        "still group rows for clustered standard errors (sidebar).",
    )


def absorb_offer(grid: pd.DataFrame, restart: Callable[[pd.DataFrame], None]) -> None:
    """The advisor's panel proposal (absorb an identifier that repeats over time, cluster by it)
    as one button, while that identifier is not absorbed yet; ``grid`` the grid as last edited."""
    ss = st.session_state
    data = ss.get(keys.DATA) or {}
    note = next((n for n in data.get("advice") or [] if n.get("about") == "absorb"), None)
    roles = dict(zip(grid["column"].map(_text), grid["role"].map(_text), strict=False))
    if note is None or roles.get(note["column"]) == "absorb" or note["column"] not in roles:
        return
    column = note["column"]
    st.caption(plain(sentence_case(note["text"])))

    def take() -> None:
        # A callback runs before the next script run, so the sidebar's widgets may still be set.
        fixed, moved = with_absorbed(data["frame"], grid, column)
        ss[keys.COVARIANCE] = "cluster"
        ss[keys.CLUSTER_COLUMN] = column
        ss[keys.ABSORBED_SEEN] = [column]
        ss[keys.ABSORB_MESSAGE] = absorb_words(column, moved)
        restart(fixed)

    st.button(f"Absorb {column}", key="absorb_offer", on_click=take, help=f"Role 'absorb' for {column}; errors clustered by it.")


def absorb_words(column: str, moved: list[str]) -> str:
    """What absorbing ``column`` changed: the errors now clustered by it, and the regressors that
    left the model because they never change within its levels."""
    text = f"The fixed effects of {column} are absorbed and the standard errors clustered by {column}."
    if moved:
        verb = "does" if len(moved) == 1 else "do"
        text += (
            f" {join_words(moved)} {verb} not change within a {column}, so {'its' if len(moved) == 1 else 'their'} effect "
            f"is part of the fixed effects; {'it is' if len(moved) == 1 else 'they are'} set to 'not used'."
        )
    return text


def cluster_by_new_absorbed(grid: pd.DataFrame) -> None:
    """When an identifier is newly given the role 'absorb', cluster the errors by it (the usual
    choice with absorbed fixed effects), once, and say so; the user may change it back."""
    ss = st.session_state
    absorbed = [_text(c) for c, r in zip(grid["column"], grid["role"], strict=False) if _text(r) == "absorb"]
    new = [c for c in absorbed if c not in (ss.get(keys.ABSORBED_SEEN) or [])]
    ss[keys.ABSORBED_SEEN] = absorbed
    if new and ss.get(keys.COVARIANCE) != "cluster":
        # The sidebar's widgets were drawn already in this run: set them at the start of the next.
        ss[keys.PENDING_CLUSTER] = new[0]
        st.rerun()
    message = ss.pop(keys.ABSORB_MESSAGE, None)
    if message:
        st.info(plain(message))


def apply_pending_cluster() -> None:
    """Before the sidebar is drawn: cluster by the identifier ``cluster_by_new_absorbed`` named."""
    ss = st.session_state
    column = ss.pop(keys.PENDING_CLUSTER, None)
    if column:
        ss[keys.COVARIANCE] = "cluster"
        ss[keys.CLUSTER_COLUMN] = column
        ss[keys.ABSORB_MESSAGE] = (
            f"The standard errors are now clustered by {column}: rows of the same {column} usually share more than their "
            "fixed effect. Change it under Standard errors if the design says otherwise."
        )
