"""Formwise in the browser: widgets -> spec -> core.analyze -> tables and figures.

Run from the repository root with ``streamlit run app/main.py``. The rules (grid <-> spec,
defaults, wording) live in ``app.gridspec`` (the grid) and ``core.output.text`` (sentences) and ``app.tables``; figures in ``app.charts``.
"""

from __future__ import annotations

import json
import sys
from contextlib import nullcontext
from pathlib import Path
from typing import Any

# `streamlit run app/main.py` puts app/ on sys.path, not the repository root that holds core/.
ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

import pandas as pd
import streamlit as st

import core
from app import cautions, context, exports, history, intake, keys, upload_progress, views
from app.grid_columns import grid_column_config
from app.gridspec import (
    GridError,
    grid_to_spec,
    outcome_column,
    resolve_outcome,
    spec_json,
    spec_to_grid,
    transform_options,
    with_outcome_level,
    with_time_and_scenarios,
)
from core.inference.choices import suggest_cluster, suggest_time, time_columns, zero_note
from core.intake.advisor import panel_notes
from core.model.covariance import COVARIANCE_KINDS
from core.output.escape import plain
from core.output.text import (
    dropped_lines,
    fit_sentence,
    join_words,
    model_sentence,
    rows_sentence,
    sentence_case,
    zero_sentence,
)

DEMO_CSV = ROOT / "demo_data" / "kiosks.csv"
DEMO_SPEC = ROOT / "demo_data" / "default_spec.json"
DEMO_ID = "demo:kiosks.csv"
GRID_ROWS_SHOWN = 5


# --- data and grid state ------------------------------------------------------------------------
def use_data(
    data_id: str,
    name: str,
    frame: pd.DataFrame,
    spec: dict[str, Any],
    notes: list[str] | None = None,
    profile: dict[str, Any] | None = None,
    advice: list[dict[str, Any]] | None = None,
) -> None:
    """Make ``frame`` the working data, with the grid and error choices taken from ``spec``;
    ``notes`` say what reading changed, ``profile`` holds the advisor's column profiles and
    ``advice`` its notes on the starting model (``core.suggest_with_notes``)."""
    ss = st.session_state
    ss[keys.DATA] = {"id": data_id, "name": name, "frame": frame, "notes": notes, "profile": profile, "advice": advice}
    ss[keys.GRID_BASE] = spec_to_grid(spec, frame, profile)
    # A new table starts with its identifier and date columns locked out again.
    ss.pop(keys.UNLOCK_LOCKED, None)
    # The Forms view's choices (the variables to vary, the focus) belong to the old table's columns.
    ss.pop(keys.SWEEP_VARY, None)
    ss.pop(keys.SWEEP_FOCUS, None)
    ss[keys.PREVIOUS_GRID] = ss[keys.GRID_BASE]
    history.forget()
    # A fresh editor key discards the old grid's pending edits.
    ss[keys.GRID_VERSION] = ss.get(keys.GRID_VERSION, 0) + 1
    ss[keys.GRID_KEY] = f"variables_{ss[keys.GRID_VERSION]}"
    ss[keys.AT] = dict(spec.get("at") or {})
    ss[keys.COVARIANCE] = spec.get("covariance") or "HC1"
    clusters = spec.get("cluster")
    clusters = [c for c in (clusters if isinstance(clusters, list) else [clusters]) if c] or [None]
    ss[keys.CLUSTER_COLUMN] = clusters[0] or suggest_cluster(frame)
    ss[keys.CLUSTER_SECOND] = clusters[1] if len(clusters) > 1 else "none"
    absorb = spec.get("absorb") or []
    ss[keys.ABSORBED_SEEN] = [absorb] if isinstance(absorb, str) else list(absorb)
    ss[keys.TIME_COLUMN], ss[keys.LAGS] = spec.get("time") or suggest_time(frame), spec.get("lags")
    ss[keys.SCENARIOS] = list(spec.get("scenarios") or [])
    ss[keys.PPML] = spec.get("estimator") == "ppml"


def load_demo() -> None:
    frame, notes, profile = intake.read_upload(DEMO_CSV.read_bytes(), DEMO_CSV.name)
    # The demo's model is given, not suggested: of the advice only the panel proposal applies.
    advice = panel_notes(frame, profile)
    use_data(DEMO_ID, "demo: coffee kiosks (invented)", frame, json.loads(DEMO_SPEC.read_text()), notes, profile, advice)


def take_upload(upload: Any) -> None:
    """Switch to an uploaded file (or another sheet of it) once; a file that is too big or
    cannot be read leaves the current data and results in place, with the reason on screen.

    The upload counts as taken only once it is loaded or refused: a newer upload arriving while
    this one is read interrupts the run, and the next run reads the newest file instead of
    skipping it as already seen."""
    ss = st.session_state
    too_big = intake.size_problem(upload.name, upload.size)
    sheet = None if too_big else intake.sheet_picker(upload)
    seen = (upload.file_id, sheet)
    if seen == ss.get(keys.UPLOAD_SEEN):
        return
    ss[keys.UPLOAD_ERROR] = None
    if too_big:
        ss[keys.UPLOAD_ERROR], ss[keys.UPLOAD_SEEN] = too_big, seen
        return
    raw = upload.getvalue()
    digest = upload_progress.digest_meanwhile(raw)
    box, stage = upload_progress.start(upload.name)
    try:
        frame, notes, profile = intake.read_upload(raw, upload.name, sheet, stage)
        stage("choosing")
        data_id = f"upload:{upload.name}:{sheet or ''}:{digest()}"
        spec, advice = intake.starting_model_or_none(frame, profile, context.column_cache(data_id))
    except (core.FormwiseError, GridError) as exc:
        box.update(label=f"Could not load {upload.name}", state="error", expanded=False)
        # Most reader messages name the file already; say it once.
        said = str(exc)
        said = sentence_case(said) if f"'{upload.name}'" in said else f"Could not use '{upload.name}': {said}"
        if intake.has_sheets(upload):
            said += " This workbook has several sheets: pick the one that holds the table in the Sheet picker above."
        ss[keys.UPLOAD_ERROR], ss[keys.UPLOAD_SEEN] = said, seen
        return
    except Exception as exc:  # a reader bug must not become a traceback or lose the current data
        box.update(label=f"Could not load {upload.name}", state="error", expanded=False)
        ss[keys.UPLOAD_ERROR] = f"Could not use '{upload.name}' because of an internal problem ({type(exc).__name__}: {exc})."
        ss[keys.UPLOAD_SEEN] = seen
        return
    ss[keys.UPLOAD_SEEN] = seen
    use_data(data_id, upload.name + (f" · sheet {sheet}" if sheet else ""), frame, spec, notes, profile, advice)
    stage("fitting")
    ss[keys.JUST_LOADED] = len(frame)
    if not intake.has_sheets(upload):
        # Emptied: while it holds the file, each rerun copies its bytes (0.7 s at 170 MB).
        ss[keys.UPLOADER_VERSION] = ss.get(keys.UPLOADER_VERSION, 0) + 1
        ss[keys.UPLOAD_SEEN] = None
    st.rerun()  # draw the page (data name, notes) for the new table from the top


# --- sidebar --------------------------------------------------------------------------------------
def sidebar() -> None:
    ss = st.session_state
    frame: pd.DataFrame = ss[keys.DATA]["frame"]
    with st.sidebar:
        st.markdown(
            "## Formwise\n:gray[Try a transform per variable and see at once how the estimates, effects and "
            "their approximations change.]"
        )
        st.markdown("### Data")
        st.markdown(f"**{plain(ss[keys.DATA]['name'])}**  \n{len(frame):,} rows × {frame.shape[1]} columns")
        intake.intake_notes(ss[keys.DATA])
        upload = st.file_uploader(
            "Load your own table",
            type=["csv", "tsv", "txt", "xlsx"],
            key=f"upload_{ss.get(keys.UPLOADER_VERSION, 0)}",
            help=f"CSV, TSV or Excel (.xlsx), up to {intake.upload_cap()[0]:g} MB. The file is read, never changed.",
        )
        intake.cap_note()
        if upload is not None:
            take_upload(upload)
        if ss.get(keys.UPLOAD_ERROR):
            st.error(plain(ss[keys.UPLOAD_ERROR]))
            st.caption(f"Still working with: {plain(ss[keys.DATA]['name'])}.")
        if ss[keys.DATA]["id"] != DEMO_ID and st.button("Back to the demo data", width="stretch"):
            load_demo()
            ss[keys.UPLOADER_VERSION] = ss.get(keys.UPLOADER_VERSION, 0) + 1
            ss[keys.UPLOAD_SEEN] = None
            ss[keys.UPLOAD_ERROR] = None
            st.rerun()

        st.markdown("### Standard errors")
        st.selectbox(
            "How to measure uncertainty",
            list(COVARIANCE_KINDS),
            key=keys.COVARIANCE,
            format_func=lambda c: COVARIANCE_KINDS[c].words,
        )
        if ss[keys.COVARIANCE] == "cluster":
            columns = [str(c) for c in frame.columns]
            # The picker's state is dropped while it is hidden, so fall back to a good guess.
            if ss.get(keys.CLUSTER_COLUMN) not in columns:
                ss[keys.CLUSTER_COLUMN] = suggest_cluster(frame) or columns[0]
            st.selectbox("Groups are defined by", columns, key=keys.CLUSTER_COLUMN)
            others = ["none", *(c for c in columns if c != ss[keys.CLUSTER_COLUMN])]
            if ss.get(keys.CLUSTER_SECOND) not in others:
                ss[keys.CLUSTER_SECOND] = "none"
            st.selectbox(
                "And also by (two-way)",
                others,
                key=keys.CLUSTER_SECOND,
                format_func=lambda c: "no second grouping" if c == "none" else c,
                help="Rows that share either group may move together, such as a store's weeks and a week's stores "
                "(Cameron, Gelbach & Miller 2011).",
            )
        if COVARIANCE_KINDS[ss[keys.COVARIANCE]].needs_time and (times := time_columns(frame)):
            if ss.get(keys.TIME_COLUMN) not in times:
                ss[keys.TIME_COLUMN] = suggest_time(frame) or times[0]
            st.selectbox("Rows are ordered in time by", times, key=keys.TIME_COLUMN)
        if ss.get(keys.PREVIOUS_GRID) is not None:
            intake.absorb_offer(ss[keys.PREVIOUS_GRID], restart_grid)
        st.caption(
            "Intervals are 95 % confidence intervals and p-values test a zero coefficient, both using the "
            "standard errors chosen here. Robust (HC) errors allow the noise to differ between rows; "
            "clustered errors also let rows of the same group move together; Newey-West and Driscoll-Kraay errors, "
            "rows close in time (lags counted in periods of the time column, chosen from the data)."
        )


# --- the variables grid -----------------------------------------------------------------------------
def variables_grid() -> pd.DataFrame:
    ss = st.session_state
    st.caption(
        "**Variables**: one outcome, its regressors and a transform for each; **Change** is the move the effects "
        "are worked out for (blank: a sensible default)"
    )
    # The controls above the grid are filled in after it, so Undo knows of the edit just made.
    bar = st.container()
    options = transform_options(ss[keys.GRID_BASE])
    # Tall enough to show every row of a typical file without an inner scrollbar.
    # Five rows at most before the grid scrolls, so the results start on the first screen.
    height = min(38 + 35 * len(ss[keys.GRID_BASE]), 38 + 35 * GRID_ROWS_SHOWN)
    grid = st.data_editor(
        ss[keys.GRID_BASE],
        height=height,
        key=ss[keys.GRID_KEY],
        hide_index=True,
        num_rows="fixed",
        disabled=["column", "about"],
        width="stretch",
        column_config=grid_column_config(options, ss[keys.GRID_BASE]["column"].map(str).tolist()),
    )
    resolved = resolve_outcome(grid, ss[keys.PREVIOUS_GRID])
    if resolved is not grid:
        # A second outcome was picked: restart the editor on the resolved grid.
        restart_grid(resolved)
        st.rerun()
    history.record(ss[keys.PREVIOUS_GRID], grid)
    ss[keys.PREVIOUS_GRID] = grid
    with bar:
        cols = st.columns([2.3, 1.9, 2.3, 3.1], vertical_alignment="center")
        with cols[0]:
            intake.suggestion_button(restart_grid)
        with cols[1]:
            history.undo_button(show_grid)
        with cols[2]:
            history.redo_button(show_grid)
        with cols[3]:
            intake.unlock_checkbox()
    intake.advice_message()
    intake.keep_locked_out(grid, restart_grid)
    intake.cluster_by_new_absorbed(grid)
    intake.advice_notes(ss[keys.DATA])
    context.levels_caption(ss[keys.DATA], grid)
    return grid


# --- the PPML offer -------------------------------------------------------------------------------
def restart_grid(grid: pd.DataFrame) -> None:
    """Show ``grid`` in a fresh editor (pending edits are already part of it), as an edit that
    Undo can take back."""
    history.record(st.session_state.get(keys.PREVIOUS_GRID), grid)
    show_grid(grid)


def show_grid(grid: pd.DataFrame) -> None:
    """Show ``grid`` in a fresh editor, without touching the undo history."""
    ss = st.session_state
    ss[keys.GRID_BASE] = grid
    ss[keys.GRID_VERSION] += 1
    ss[keys.GRID_KEY] = f"variables_{ss[keys.GRID_VERSION]}"
    ss[keys.PREVIOUS_GRID] = grid


def ppml_switched() -> None:
    # PPML takes the outcome in levels: show that in the grid rather than overriding it silently.
    if st.session_state.get(keys.PPML):
        restart_grid(with_outcome_level(st.session_state[keys.PREVIOUS_GRID]))


def zeros_offer(grid: pd.DataFrame) -> str:
    """Next to an outcome with zeros: how many rows a log would drop, and the PPML switch.
    Returns the estimator the spec should use."""
    note = zero_note(st.session_state[keys.DATA]["frame"], outcome_column(grid))
    if note is None:
        return "ols"
    with st.container(border=True):
        text = plain(zero_sentence(note))
        if note["ppml_possible"]:
            text += (
                " Poisson pseudo-maximum likelihood keeps those rows: it models the mean of "
                f"{plain(note['column'])} directly (no log of the outcome), and its effects read as % changes."
            )
            st.markdown(text)
            st.toggle("Model the mean directly (Poisson pseudo-maximum likelihood)", key=keys.PPML, on_change=ppml_switched)
        else:
            st.markdown(text)
            st.caption("Poisson pseudo-maximum likelihood needs an outcome of zero or more; this one has negative values.")
    return "ppml" if note["ppml_possible"] and st.session_state.get(keys.PPML) else "ols"


# --- results --------------------------------------------------------------------------------------
def show_results(good: dict[str, Any]) -> None:
    result, spec, data_name = good["result"], good["spec"], good["data_name"]
    with st.container(border=True):
        st.markdown(f"##### {plain(sentence_case(model_sentence(result)))}")
        estimator = spec.get("estimator") or "ols"
        st.markdown(
            plain(
                f"{rows_sentence(result)} · data: {data_name} · "
                + ("estimated by Poisson pseudo-maximum likelihood · " if estimator == "ppml" else "")
                + f"standard errors: {COVARIANCE_KINDS[result['covariance']].short}"
                + (f" by {cluster_words(spec.get('cluster'))}" if result["covariance"] == "cluster" else "")
                + (f" over {ts['time']}, {ts['lags']} lag(s)" if (ts := result.get("time_series")) else "")
                + fit_sentence(result, estimator)
            )
        )
        for line in dropped_lines(result):
            st.caption(plain(f"Left out: {line}"))
        st.caption(
            "Effects are associations in this data, not proof of cause · “First-order approximation” is the "
            "textbook shortcut, “Exact” follows the fitted model · ⚠ marks changes that reach beyond the observed data"
        )
    for warning in result.get("warnings") or []:
        st.warning(plain(sentence_case(warning)))
    views.show(context.Context(result=result, spec=spec, frame=good["frame"], data_id=good["data_id"], data_name=data_name))
    cautions.section(result)


# --- page ------------------------------------------------------------------------------------------
def main() -> None:
    """The page behind a last-resort handler: an error no check caught becomes our message, never
    a traceback page (which would show server paths); the session's data, saved models and last
    good result stay for the next run. Streamlit's rerun and stop are BaseExceptions and pass."""
    try:
        _page()
    except core.FormwiseError as exc:
        st.error(plain(sentence_case(str(exc))))
    except Exception as exc:
        st.error(
            f"Formwise hit an internal problem while drawing this page ({type(exc).__name__}). Your data and saved models "
            "are kept: change the model or the view to go on, and please report it with the data and spec."
        )


def cluster_words(cluster: str | list[str] | None) -> str:
    """'kiosk_id', or 'kiosk_id and week' for two-way clustering."""
    return join_words([str(c) for c in cluster]) if isinstance(cluster, list) else str(cluster)


def _page() -> None:
    st.set_page_config(page_title="Formwise", layout="wide", initial_sidebar_state="expanded")
    ss = st.session_state
    if keys.DATA not in ss:
        load_demo()
    intake.apply_pending_cluster()
    sidebar()

    # Less room above the page's first line, so the results start on the first screen.
    st.markdown('<style>[data-testid="stMainBlockContainer"]{padding-top:1.6rem}</style>', unsafe_allow_html=True)
    grid = variables_grid()

    frame: pd.DataFrame = ss[keys.DATA]["frame"]
    error: str | None = None
    notes: list[str] = []
    estimator = zeros_offer(grid)
    try:
        second = ss.get(keys.CLUSTER_SECOND)
        cluster = [ss.get(keys.CLUSTER_COLUMN), second] if second and second != "none" else ss.get(keys.CLUSTER_COLUMN)
        spec, notes = grid_to_spec(grid, ss[keys.COVARIANCE], cluster, ss.get(keys.AT), estimator)
        spec, set_aside = with_time_and_scenarios(spec, ss.get(keys.TIME_COLUMN), ss.get(keys.LAGS), ss.get(keys.SCENARIOS))
        notes += set_aside
        rows = ss.pop(keys.JUST_LOADED, None)
        waiting = st.spinner(f"Fitting the starting model on {rows:,} rows…") if rows is not None else nullcontext()
        with waiting:
            result = context.run_model(ss[keys.DATA]["id"], spec_json(spec), tuple(sorted(context.BASE_PARTS)), frame)
        ss[keys.LAST_GOOD] = {
            "result": result,
            "spec": spec,
            "data_name": ss[keys.DATA]["name"],
            "data_id": ss[keys.DATA]["id"],
            "frame": frame,
        }
    except (core.FormwiseError, GridError) as exc:
        error = sentence_case(str(exc))
    except Exception as exc:  # a core bug must not become a traceback on screen
        error = f"Formwise could not fit this model because of an internal problem ({type(exc).__name__}: {exc})."

    for note in notes:
        st.info(plain(note))
    good = ss.get(keys.LAST_GOOD)
    if error:
        st.error(plain(error))
        if good:
            other_data = "" if good["data_id"] == ss[keys.DATA]["id"] else f" on {plain(good['data_name'])}"
            st.info(
                f"The results below belong to the previous valid model{other_data}, not to the grid as it is now. "
                "Fix the problem above and they update."
            )
    if good:
        show_results(good)
    exports.export_section(good, use_data, context.column_cache)


main()
