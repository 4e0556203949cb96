"""The demo's full result against the one stored in tests/reference/demo_result.json (written by
`python -m core analyze --demo` before the package layout of docs/contract.md; regenerate it
only for a deliberate change of a number, and say which in the commit). Every key of the stored
result must still be there, and every number equal to 1e-9 relative: refactors of the code must
not move the numbers."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import core
from core.cli import DEMO_DATA, DEMO_SPEC, load_spec
from core.intake.reader import read_table

STORED = Path(__file__).resolve().parent / "reference" / "demo_result.json"
TOLERANCE = 1e-9
# Wording may be improved without changing a number.
WORDS = {"reading", "warnings", "cautions", "interval_method"}


def _compare(stored: Any, now: Any, path: str, problems: list[str]) -> None:
    if isinstance(stored, dict):
        if not isinstance(now, dict):
            problems.append(f"{path}: no longer an object")
            return
        for key, value in stored.items():
            if key in WORDS:
                continue
            if key not in now:
                problems.append(f"{path}.{key}: missing")
            else:
                _compare(value, now[key], f"{path}.{key}", problems)
    elif isinstance(stored, list):
        if not isinstance(now, list) or len(now) != len(stored):
            problems.append(f"{path}: length changed")
            return
        for i, (a, b) in enumerate(zip(stored, now, strict=True)):
            _compare(a, b, f"{path}[{i}]", problems)
    elif isinstance(stored, float) and not isinstance(stored, bool):
        if not isinstance(now, (int, float)) or not math.isclose(stored, now, rel_tol=TOLERANCE, abs_tol=1e-300):
            problems.append(f"{path}: {stored!r} -> {now!r}")
    elif stored != now:
        problems.append(f"{path}: {stored!r} -> {now!r}")


def test_the_demo_result_matches_the_stored_reference() -> None:
    stored = json.loads(STORED.read_text(encoding="utf-8"))
    now = core.analyze(read_table(DEMO_DATA), load_spec(DEMO_SPEC))
    problems: list[str] = []
    _compare(stored, json.loads(json.dumps(now)), "result", problems)
    assert not problems, "\n".join(problems[:20])
