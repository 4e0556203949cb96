"""The status box shown while an upload is taken in: the stage running, the stages done and the
time so far (reading, profiling, choosing a starting model, fitting it)."""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Any

import streamlit as st

# The steps of taking in an upload, as the progress display words them.
UPLOAD_STAGES = {
    "reading": "Reading the table",
    "profiling": "Profiling each column",
    "choosing": "Choosing a starting model",
    "fitting": "Fitting it",
}


def start(name: str) -> tuple[Any, Callable[[str], None]]:
    """A status box for taking in ``name`` and the function that moves it to a stage: the stage
    done so far, the one running and the time since the upload arrived."""
    box = st.status(f"Loading {name}…", expanded=True)
    lines = box.empty()
    started = time.perf_counter()
    seen: list[str] = []

    def stage(key: str) -> None:
        seen.append(key)
        done = [f"✓ {UPLOAD_STAGES[k]}" for k in seen[:-1]]
        lines.markdown("  \n".join([*done, f"… {UPLOAD_STAGES[key]} ({time.perf_counter() - started:.1f} s so far)"]))
        box.update(label=f"Loading {name}: {UPLOAD_STAGES[key].lower()}…")

    return box, stage
