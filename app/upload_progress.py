"""Taking in an upload: the status box shown meanwhile (the stage running, the stages done and the
time so far: reading, profiling, choosing a starting model, fitting it), and the file's digest."""

from __future__ import annotations

import hashlib
import threading
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


def digest_meanwhile(raw: bytes) -> Callable[[], str]:
    """A function giving the first 16 hex digits of the file's SHA-256 (the table's identity for
    the result caches), computed on a thread while the file is read: hashlib releases the
    interpreter on large inputs, so the 0.12 s it takes on a 170 MB file runs beside the reading
    instead of after it."""
    found: list[str] = []
    thread = threading.Thread(target=lambda: found.append(hashlib.sha256(raw).hexdigest()[:16]), daemon=True)
    thread.start()

    def digest() -> str:
        thread.join()
        return found[0]

    return digest
