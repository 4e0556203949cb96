"""Long work on a worker thread: the report, and on a long table the residual checks and the
forms sweep. Its stage and share are on screen as it runs, a Stop button ends it, and the rest of
the page stays usable meanwhile.

A script run of the page never waits for such work: it starts a ``Job`` kept in the session
under the work's name, and while the job runs a fragment redraws only its progress box every
``POLL_SECONDS``; when the job ends, the fragment reruns the page once so the finished work (or
the reason it stopped) appears. The worker thread calls no Streamlit function: it only reads the
table it was given and writes the job's own fields.
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

# A poll redraws only the progress box. Each poll first waits up to WAIT_SECONDS for the work to
# end (the script thread waits; the interpreter lock is free for the work), so the finished work
# shows a few milliseconds after it ends instead of up to a poll's length later; a click meanwhile
# is taken up when the wait is over.
POLL_SECONDS = 0.25
WAIT_SECONDS = 0.2
# Above this many rows the residual checks and the forms sweep run as a job (a second or more
# at 1,000,000 rows on 2 cores); below it they are quicker than the progress box would be.
JOB_MIN_ROWS = 200_000
STOPPED_NOTE = "The report was stopped; nothing was written. Prepare it again when you are ready."

Progress = Callable[[float, str], bool]


@dataclass
class Job:
    """One piece of work: what it is for (``key``), how far it got, and how it ended."""

    key: Any
    share: float = 0.0
    stage: str = ""  # what runs now, in words ("" when the work has one stage)
    started: float = field(default_factory=time.monotonic)
    value: Any = None
    error: str | None = None
    stop: threading.Event = field(default_factory=threading.Event)
    finished: threading.Event = field(default_factory=threading.Event)

    @property
    def running(self) -> bool:
        return not self.finished.is_set()

    @property
    def stopped(self) -> bool:
        return self.stop.is_set() and self.value is None

    def told(self, share: float, stage: str) -> bool:
        """The work's progress callback: record where it is; False once Stop was pressed."""
        self.share, self.stage = share, stage
        return not self.stop.is_set()


def _jobs() -> dict[str, Job]:
    return st.session_state.setdefault(keys.JOBS, {})


def job(name: str) -> Job | None:
    """The session's latest job of this name (running or finished), if any."""
    return _jobs().get(name)


def start(name: str, key: Any, work: Callable[[Progress], Any]) -> Job:
    """Start ``work(progress)`` on a worker thread as the session's job ``name`` (an earlier
    job of that name is told to stop and forgotten)."""
    earlier = job(name)
    if earlier is not None and earlier.running:
        earlier.stop.set()
    new = Job(key)

    def run() -> None:
        try:
            new.value = work(new.told)
        except core.FormwiseError as exc:
            new.error = None if new.stop.is_set() else str(exc)
        except Exception as exc:  # a core bug must not end the thread silently
            new.error = f"{type(exc).__name__}: {exc}"
        finally:
            new.finished.set()

    _jobs()[name] = new
    threading.Thread(target=run, name=f"formwise-{name}", daemon=True).start()
    return new


def progress_box(name: str, what: str, stop_words: str) -> None:
    """While job ``name`` runs: its stage, share and time, a Stop button, and a fragment that
    redraws them and reruns the page once the job ends (nothing when no job of that name runs,
    so an idle page has no timer that redraws it)."""
    current = job(name)
    if current is not None and current.running:
        _progress(name, what, stop_words)


@st.fragment(run_every=POLL_SECONDS)
def _progress(name: str, what: str, stop_words: str) -> None:
    current = job(name)
    if current is None:
        return
    if current.running and not current.stop.is_set():
        current.finished.wait(WAIT_SECONDS)
    if current.running:
        seconds = time.monotonic() - current.started
        stage = f": {current.stage}" if current.stage else ""
        st.progress(current.share, text=f"{what}{stage} · {current.share:.0%} · {seconds:.0f} s")
        if current.stop.is_set():
            st.caption("Stopping at the next step…")
        elif st.button(stop_words, key=f"stop_{name}", width="stretch", icon=":material/stop:"):
            current.stop.set()
            st.caption("Stopping at the next step…")
        st.caption("You can go on working meanwhile.")
        return
    st.rerun()  # the whole page: the finished work (or why it stopped) replaces the progress box


def view_result(name: str, key: Any, work: Callable[[Progress], Any], what: str) -> Any | None:
    """A view's long computation as job ``name``: its value once finished for ``key``; while it
    runs, the progress box (and None). A job for another key (the model changed) is replaced."""
    current = job(name)
    if current is None or current.key != key or (current.stopped and st.button("Run it again", key=f"again_{name}")):
        current = start(name, key, work)
    if current.running:
        progress_box(name, what, "Stop")
        return None
    if current.stopped:
        st.info(f"{what} was stopped. Run it again when you are ready.")
        return None
    if current.error is not None:
        raise core.FormwiseError(current.error)
    return current.value


# --- the report --------------------------------------------------------------------------------------
def report_done() -> None:
    """When the report job has ended since the last run: its HTML as the report to download, or
    the note saying why there is none."""
    ss = st.session_state
    current = job("report")
    if current is None or current.running or ss.get(keys.REPORT_SEEN) is current:
        return
    ss[keys.REPORT_SEEN] = current
    if current.value is not None:
        ss[keys.REPORT] = {"key": current.key, "html": current.value}
        ss[keys.REPORT_NOTE] = None
    elif current.stop.is_set():
        ss[keys.REPORT_NOTE] = STOPPED_NOTE
    else:
        ss[keys.REPORT_NOTE] = plain(f"The report could not be written: {current.error}")
