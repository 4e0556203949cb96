"""Export: charts at slide size, result tables as files, the HTML report, and the spec file
(downloaded, and uploaded to restore the whole screen).

Everything is built by ``core`` (``core.output.tables``, ``core.output.report``, ``core.model.specfile``), so a file
from the app and one from the command line are the same; this module only offers them. The
pure helpers (no widgets) come first and are tested without a browser.
"""

from __future__ import annotations

import functools
import json
from collections.abc import Callable
from typing import Any

import pandas as pd
import plotly.graph_objects as go
import streamlit as st

import core
from app import charts, intake, jobs, keys
from app.gridspec import spec_json, with_sweep
from core.inference.choices import zero_note
from core.model.spec import parse_spec
from core.model.specfile import parse_spec_document, spec_document
from core.output import tables as core_tables
from core.output.escape import plain
from core.output.report import ReportProgress, build_report
from core.output.text import model_sentence

# fmt: (button words, file extension, MIME type)
TABLE_FORMATS = {
    "csv": ("CSV", "csv", "text/csv"),
    "markdown": ("Markdown", "md", "text/markdown"),
    "latex": ("LaTeX", "tex", "application/x-tex"),
}


# --- pure helpers ------------------------------------------------------------------------------------
def table_file(table: core_tables.Table, fmt: str) -> str:
    """One result table as a file: CSV with numbers as numbers and formula-like text cells
    neutralised (``core.output.tables.to_csv``), Markdown or LaTeX (``core.output.tables.render``)."""
    if fmt == "csv":
        return core_tables.to_csv(table)
    return core_tables.render([table], fmt)


def saved_specs(saved_models: list[dict[str, Any]], data_id: str) -> dict[str, dict[str, Any]]:
    """The models saved on this data, by name, as plain specs (the name is the key)."""
    return {m["name"]: {k: v for k, v in m["spec"].items() if k != "name"} for m in saved_models if m["data_id"] == data_id}


def model_name(spec: dict[str, Any], saved: dict[str, dict[str, Any]]) -> str | None:
    """The saved name of ``spec`` when it is one of the saved models, else None."""
    key = spec_json(spec)
    return next((name for name, other in saved.items() if spec_json(other) == key), None)


def spec_file(spec: dict[str, Any], saved: dict[str, dict[str, Any]]) -> str:
    """The spec file for the model on screen (named when it is a saved model) and the saved
    models; ``python -m core analyze DATA --spec FILE`` reads its current spec."""
    current = {k: v for k, v in spec.items() if k != "name"}
    name = model_name(current, saved)
    if name:
        current["name"] = name
    return spec_document(current, saved)


def read_spec_upload(raw: bytes, frame: pd.DataFrame) -> tuple[dict[str, Any], dict[str, dict[str, Any]]]:
    """The current and saved specs of an uploaded spec file, each checked against the data
    (columns, transforms, changes, references); raises ``FormwiseError`` naming the problem."""
    spec, saved = parse_spec_document(raw, "the spec file")
    parse_spec(spec, frame)
    for name, other in saved.items():
        try:
            parse_spec(other, frame)
        except core.FormwiseError as exc:
            raise core.FormwiseError(f"the saved model '{name}' in the spec file: {exc}") from None
    return spec, saved


def restore_notes(spec: dict[str, Any], frame: pd.DataFrame) -> list[str]:
    """What the screen cannot show of an uploaded spec (and so leaves out of the next fit)."""
    notes = []
    if spec.get("estimator") == "ppml":
        note = zero_note(frame, spec["outcome"]["column"])
        if note is None or not note["ppml_possible"]:
            notes.append(
                "The spec fits by Poisson pseudo-maximum likelihood; the app offers it only for an outcome with zeros "
                "and none below zero, so this one is fitted by least squares."
            )
    if spec.get("weights"):
        notes.append(f"The spec weights rows by '{spec['weights']}'; the app fits without weights, so this is left out.")
    if spec.get("predict"):
        notes.append("The spec's prediction points are left out; enter values in the Predict view instead.")
    if spec.get("bootstrap"):
        notes.append(
            "The spec asks for bootstrap intervals; the app shows the analytic ones, so this is left out. "
            "`python -m core analyze DATA --spec FILE` computes them."
        )
    return notes


def report_file(
    frame: pd.DataFrame,
    spec: dict[str, Any],
    data_name: str,
    saved: dict[str, dict[str, Any]],
    progress: ReportProgress = None,
    columns: core.ColumnCache | None = None,
) -> str:
    """The self-contained HTML report (``core.output.report.build_report``) for the model on screen
    and the saved models; named after the saved model when it is one."""
    current = {k: v for k, v in spec.items() if k != "name"}
    name = model_name(current, saved)
    if name:
        current["name"] = name
    return build_report(frame, current, data_name, saved or None, progress, columns)


# --- charts -----------------------------------------------------------------------------------------
def chart(figure: go.Figure, key: str, screen_width: int | None = None) -> None:
    """A chart whose toolbar download gives the chosen slide size and format, with the
    source line under it when asked for. ``screen_width``: about how wide the column showing
    it is (pixels at a 1440 px window), so its text is wrapped to fit there too."""
    ss = st.session_state
    size = ss.get(keys.EXPORT_SIZE) or "full"
    fmt = ss.get(keys.EXPORT_FORMAT) or "png"
    caption = ss.get(keys.CHART_CAPTION) if ss.get(keys.EXPORT_CAPTION) else None
    st.plotly_chart(
        charts.for_slide(figure, size, caption, screen_width),
        theme=None,
        config=charts.export_config(size, fmt, f"formwise-{key}"),
        key=key,
    )


def set_chart_caption(data_id: str, data_name: str, spec: dict[str, Any], result: dict[str, Any]) -> None:
    """The source line for this run's charts: data file, rows used and the model's name (its
    saved name, else the model in words)."""
    ss = st.session_state
    name = model_name(spec, saved_specs(ss.get(keys.SAVED_MODELS) or [], data_id)) or model_sentence(result)
    ss[keys.CHART_CAPTION] = charts.caption_text(data_name, result.get("n_obs"), name)


def chart_settings() -> None:
    if st.session_state.get(keys.EXPORT_SIZE) not in charts.SLIDE_SIZES:
        st.session_state[keys.EXPORT_SIZE] = "full"
    st.selectbox(
        "Chart size for slides",
        list(charts.SLIDE_SIZES),
        key=keys.EXPORT_SIZE,
        format_func=charts.size_label,
        help="The camera button in each chart's toolbar downloads the chart at this size, with type sized for a slide.",
    )
    st.radio(
        "Chart file",
        list(charts.EXPORT_FORMATS),
        key=keys.EXPORT_FORMAT,
        format_func=lambda f: charts.EXPORT_FORMATS[f],
        horizontal=True,
    )
    st.checkbox("Caption under each chart (data, rows, model)", key=keys.EXPORT_CAPTION)
    _, width, height = charts.SLIDE_SIZES["full"]
    st.caption(
        f"Charts are laid out on a slide of {width} × {height} px (13.33 × 7.5 in), so an SVG drops onto "
        f"a slide at its real size; PNGs have {charts.EXPORT_SCALE}× its pixels for sharp projection."
    )


# --- tables ----------------------------------------------------------------------------------------------
def table_downloads(table: core_tables.Table, stem: str, key: str) -> None:
    """Three small download buttons under a table: CSV, Markdown, LaTeX."""
    cols = st.columns([1.5, 1, 1.5, 1, 1.6], vertical_alignment="center")  # "Markdown" whole at 1280 px
    with cols[0]:
        st.caption("Download this table:")
    for col, (fmt, (words, extension, mime)) in zip(cols[1:], TABLE_FORMATS.items(), strict=False):
        with col:
            st.download_button(
                words,
                # Written when clicked: three files per table on every rerun cost the page's time.
                data=functools.partial(table_file, table, fmt),
                file_name=f"formwise-{stem}.{extension}",
                mime=mime,
                key=f"download_{key}_{fmt}",
                on_click="ignore",
                icon=":material/download:",
                width="stretch",
            )


# --- the spec file and the report (sidebar) ----------------------------------------------------------------
def _spec_uploaded(use_data: Callable[..., None]) -> None:
    """Restore the screen from an uploaded spec file, or keep it and say what is wrong."""
    ss = st.session_state
    upload = ss.get(f"spec_upload_{ss.get('spec_upload_version', 0)}")
    ss[keys.SPEC_UPLOAD_ERROR], ss[keys.SPEC_UPLOAD_NOTES] = None, []
    if upload is None:
        return
    data = ss[keys.DATA]
    try:
        spec, saved = read_spec_upload(upload.getvalue(), data["frame"])
    except core.FormwiseError as exc:
        ss[keys.SPEC_UPLOAD_ERROR] = f"Could not use '{upload.name}': {exc} The screen is unchanged."
        return
    use_data(data["id"], data["name"], data["frame"], spec, data.get("notes"), data.get("profile"))
    used = {spec["outcome"]["column"], *(r["column"] for r in spec.get("regressors") or [])}
    if used & set(intake.locked_columns(data.get("profile"))):
        # The intake panel keeps identifier and date columns out of the grid unless unlocked.
        ss[keys.UNLOCK_LOCKED] = True
    others = [m for m in ss.get(keys.SAVED_MODELS) or [] if m["data_id"] != data["id"]]
    ss[keys.SAVED_MODELS] = others + [{"name": n, "spec": {**s, "name": n}, "data_id": data["id"]} for n, s in saved.items()]
    ss[keys.SPEC_UPLOAD_NOTES] = [
        f"Restored from {upload.name}" + (f" with {len(saved)} saved model(s)." if saved else "."),
        *restore_notes(spec, data["frame"]),
    ]
    # A fresh uploader, so the same file can be loaded again after further edits.
    ss[keys.SPEC_UPLOAD_VERSION] = ss.get(keys.SPEC_UPLOAD_VERSION, 0) + 1


def export_section(
    good: dict[str, Any] | None,
    use_data: Callable[..., None],
    column_cache: Callable[[str], core.ColumnCache] | None = None,
) -> None:
    """The sidebar's Export area: chart settings, the spec file (down and up) and the report.
    ``column_cache(data_id)``: the table's cache of transformed columns, which the report reuses."""
    ss = st.session_state
    with st.sidebar:
        st.markdown("### Export")
        chart_settings()

        st.markdown("##### The model as a file")
        if good:
            saved = saved_specs(ss.get(keys.SAVED_MODELS) or [], good["data_id"])
            stem = charts.file_stem(good["data_name"].rsplit(".", 1)[0], 40)
            st.download_button(
                "Download the spec (JSON)",
                data=spec_file(good["spec"], saved),
                file_name=f"formwise-spec-{stem}.json",
                mime="application/json",
                key="download_spec",
                on_click="ignore",
                icon=":material/download:",
                width="stretch",
                help="The model on screen and the saved models. `python -m core analyze DATA --spec FILE` "
                "gives the same numbers.",
            )
        st.file_uploader(
            "Restore from a spec file",
            type=["json"],
            key=f"spec_upload_{ss.get('spec_upload_version', 0)}",
            on_change=_spec_uploaded,
            args=(use_data,),
            help="A spec file saved here or written by hand for this data: the grid, errors and saved models follow it.",
        )
        if ss.get(keys.SPEC_UPLOAD_ERROR):
            st.error(plain(ss[keys.SPEC_UPLOAD_ERROR]))
        for note in ss.get(keys.SPEC_UPLOAD_NOTES) or []:
            st.caption(plain(note))

        st.markdown("##### Report")
        if good:
            report_section(good, column_cache)


def report_section(good: dict[str, Any], column_cache: Callable[[str], core.ColumnCache] | None) -> None:
    """The report: what it includes, Prepare (a job on its worker thread), its progress, the download."""
    ss = st.session_state
    saved = saved_specs(ss.get(keys.SAVED_MODELS) or [], good["data_id"])
    spec = good["spec"]
    ppml = spec.get("estimator") == "ppml"
    sweep_asked = st.checkbox(
        "Include every combination of forms",
        key=keys.REPORT_SWEEP,
        disabled=ppml,
        help="Adds the Forms view's comparison: the focus effect under every plausible combination of transforms."
        + (" Not available with PPML." if ppml else ""),
    )
    if sweep_asked and not ppml:
        spec = with_sweep(spec, ss.get(keys.SWEEP_VARY), ss.get(keys.SWEEP_FOCUS))
    key = (good["data_id"], spec_json(spec), json.dumps(saved, sort_keys=True))
    jobs.report_done()
    running = jobs.job("report")
    busy = running is not None and running.running
    if st.button(
        "Prepare the report", key="prepare_report", width="stretch", disabled=busy, help="Runs the whole analysis once."
    ):
        frame, data_name = good["frame"], good["data_name"]
        columns = column_cache(good["data_id"]) if column_cache else None
        ss[keys.REPORT_NOTE] = None
        jobs.start("report", key, lambda progress: report_file(frame, spec, data_name, saved, progress, columns))
    jobs.progress_box("report", "Preparing the report", "Stop preparing the report")
    if ss.get(keys.REPORT_NOTE):
        st.warning(ss[keys.REPORT_NOTE])
    report = ss.get(keys.REPORT)
    if report and report["key"] == key:
        stem = charts.file_stem(good["data_name"].rsplit(".", 1)[0], 40)
        st.download_button(
            "Download the report (HTML)",
            data=report["html"],
            file_name=f"formwise-report-{stem}.html",
            mime="text/html",
            key="download_report",
            on_click="ignore",
            icon=":material/download:",
            type="primary",
            width="stretch",
        )
        st.caption("One self-contained file: no script, nothing fetched from the network.")
    elif report:
        st.caption("The model changed since the report was prepared; prepare it again.")
