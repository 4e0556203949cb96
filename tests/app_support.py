"""Driving the app in AppTest the way the browser does, shared by the app test files.

A data_editor's edits are session state ({"edited_rows", "added_rows", "deleted_rows"}) under
the editor's key, which the app keeps in ``session_state["grid_key"]``.
"""

from __future__ import annotations

import json
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

from streamlit.testing.v1 import AppTest

ROOT = Path(__file__).resolve().parent.parent
MAIN = str(ROOT / "app" / "main.py")
TIMEOUT = 120


def start() -> AppTest:
    at = AppTest.from_file(MAIN, default_timeout=TIMEOUT)
    at.run()
    assert not at.exception, at.exception
    return at


def edit_grid(at: AppTest, edits: dict[str, dict[str, str]]) -> AppTest:
    """Edit grid rows by column name (e.g. {"drink_price": {"transform": "level"}}) and rerun."""
    base = at.session_state["grid_base"]
    rows = {str(c): i for i, c in enumerate(base["column"])}
    at.session_state[at.session_state["grid_key"]] = {
        "edited_rows": {rows[name]: cells for name, cells in edits.items()},
        "added_rows": [],
        "deleted_rows": [],
    }
    at.run()
    assert not at.exception, at.exception
    return at


def show(at: AppTest, view: str) -> AppTest:
    """Open one view of the view selector."""
    at.segmented_control(key="view").set_value(view).run()
    assert not at.exception, at.exception
    return at


def prepare_report(at: AppTest, timeout: float = TIMEOUT) -> AppTest:
    """Press "Prepare the report" and rerun until its worker thread has finished (the browser's
    timer does this; AppTest has none), so ``session_state["report"]`` holds the result."""
    at.button(key="prepare_report").click().run()
    assert not at.exception, at.exception
    deadline = time.monotonic() + timeout

    def taken_in() -> bool:  # the job has ended and a run of the page has taken its result in
        job = at.session_state["jobs"]["report"]
        return not job.running and "report_seen" in at.session_state and at.session_state["report_seen"] is job

    while not taken_in():
        assert time.monotonic() < deadline, "the report did not finish"
        time.sleep(0.1)
        at.run()
        assert not at.exception, at.exception
    return at


def cli_analyze(data: Path, spec_file: Path) -> dict[str, Any]:
    """``python -m core analyze DATA --spec FILE`` as a user runs it."""
    done = subprocess.run(
        [sys.executable, "-m", "core", "analyze", str(data), "--spec", str(spec_file)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout)
