"""The report, prepared on a worker thread: its stage and share on screen as it runs, a Stop
button, and the rest of the page usable meanwhile.

A script run of the page never waits for the report: the button starts a ``ReportJob`` kept in
the session, and while it runs a fragment redraws only the progress box every
``POLL_SECONDS``; when the job ends, the fragment reruns the page once so the download button
(or the reason it failed) appears. The worker thread calls no Streamlit function: it only
reads the table it was given and writes the job's own fields.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import streamlit as st

import core
from app import keys
from core.output.escape import plain

POLL_SECONDS = 0.5
STOPPED_NOTE = "The report was stopped; nothing was written. Prepare it again when you are ready."


@dataclass
class ReportJob:
    """One report being prepared: what it is for (``key``), how far it got, and how it ended."""

    key: tuple[Any, ...]
    share: float = 0.0
    stage: str = "Starting"
    started: float = field(default_factory=time.monotonic)
    html: str | None = None
    error: str | None = None
    stop: threading.Event = field(default_factory=threading.Event)
    finished: threading.Event = field(default_factory=threading.Event)

    @property
    def running(self) -> bool:
        return not self.finished.is_set()

    def told(self, share: float, stage: str) -> bool:
        """The report's progress callback: record where it is; False once Stop was pressed."""
        self.share, self.stage = share, stage
        return not self.stop.is_set()


def start(key: tuple[Any, ...], write: Callable[[Callable[[float, str], bool]], str]) -> ReportJob:
    """Start ``write(progress)`` (which returns the report's HTML) on a worker thread."""
    job = ReportJob(key)

    def work() -> None:
        try:
            job.html = write(job.told)
        except core.FormwiseError as exc:
            job.error = None if job.stop.is_set() else str(exc)
        except Exception as exc:  # a core bug must not end the thread silently
            job.error = f"{type(exc).__name__}: {exc}"
        finally:
            job.finished.set()

    threading.Thread(target=work, name="formwise-report", daemon=True).start()
    return job


def show() -> None:
    """The running report's progress box, if a report is being prepared (nothing otherwise, so
    an idle page has no timer that redraws it)."""
    if st.session_state.get(keys.REPORT_JOB) is not None:
        _progress()


@st.fragment(run_every=POLL_SECONDS)
def _progress() -> None:
    ss = st.session_state
    job: ReportJob | None = ss.get(keys.REPORT_JOB)
    if job is None:
        return
    if job.running:
        seconds = time.monotonic() - job.started
        st.progress(job.share, text=f"Preparing the report: {job.stage} · {job.share:.0%} · {seconds:.0f} s")
        if job.stop.is_set():
            st.caption("Stopping at the next step…")
        elif st.button("Stop preparing the report", key="stop_report", width="stretch", icon=":material/stop:"):
            job.stop.set()
            st.caption("Stopping at the next step…")
        st.caption("You can go on working meanwhile; the report is of the model as it was when you asked for it.")
        return
    ss[keys.REPORT_JOB] = None
    if job.html is not None:
        ss[keys.REPORT] = {"key": job.key, "html": job.html}
        ss[keys.REPORT_NOTE] = None
    elif job.stop.is_set():
        ss[keys.REPORT_NOTE] = STOPPED_NOTE
    else:
        ss[keys.REPORT_NOTE] = plain(f"The report could not be written: {job.error}")
    st.rerun()  # the whole page: the download button (or the note) replaces the progress box
