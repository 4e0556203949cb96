"""The spec file: one model, or one model with the named models saved beside it.

A plain spec (docs/contract.md §2) is accepted as it is. A document
``{"formwise_spec": 1, "spec": {...}, "saved": {"name": {...}, ...}}`` also carries the saved
models, so one file restores the whole screen. Files are parsed as JSON data only, and as bounded
data: size, nesting depth, number of values and the size of each number are checked, so no file
can exhaust the parser (Python's json recurses per level and converts integers of any length) or
smuggle in values JSON does not have (NaN, Infinity; RFC 8259 §6).
"""

from __future__ import annotations

import json
import math
import re
import sys
from pathlib import Path
from typing import Any

import numpy as np

from core.errors import SpecError

VERSION = 1
MAX_BYTES = 2_000_000
# A spec nests five levels (document, saved, spec, regressors, one regressor); twenty is ample.
MAX_DEPTH = 20
# Values in the whole document (every object, list, string, number, ...).
MAX_ITEMS = 100_000
# An integer literal with more digits cannot be a float (the largest is about 1.8e308).
_MAX_INT_DIGITS = 309
_STRING = re.compile(r'"[^"\\]*(?:\\.[^"\\]*)*"', re.DOTALL)
_NOT_BRACKET = re.compile(r"[^\[\]{}]+")


def parse_spec_document(text: str | bytes, source: str = "spec file") -> tuple[dict[str, Any], dict[str, dict[str, Any]]]:
    """The current spec and the saved ones from a spec file's text."""
    if len(text) > MAX_BYTES:
        raise SpecError(f"{source} is larger than {MAX_BYTES // 1_000_000} MB; a spec file is a few kilobytes of JSON.")
    if isinstance(text, bytes):
        try:
            text = text.decode("utf-8-sig")
        except UnicodeDecodeError:
            raise SpecError(f"{source} is not UTF-8 text; save it as UTF-8 JSON.") from None
    document = _bounded_json(text, source)
    if not isinstance(document, dict):
        raise SpecError(f"{source} must hold one JSON object with 'outcome' and 'regressors'.")
    if "formwise_spec" not in document:
        return document, {}
    if document.get("formwise_spec") != VERSION:
        raise SpecError(
            f"{source} has spec-file version {document.get('formwise_spec')!r}; this Formwise reads version {VERSION}."
        )
    unknown = sorted(set(document) - {"formwise_spec", "spec", "saved"})
    if unknown:
        raise SpecError(f"{source}: unknown key '{unknown[0]}'; a spec file holds 'formwise_spec', 'spec' and 'saved'.")
    spec = document.get("spec")
    saved = document.get("saved") or {}
    if not isinstance(spec, dict):
        raise SpecError(f"{source}: 'spec' must be a JSON object with 'outcome' and 'regressors'.")
    if not isinstance(saved, dict) or not all(isinstance(k, str) and isinstance(v, dict) for k, v in saved.items()):
        raise SpecError(f"{source}: 'saved' must map model names to spec objects.")
    return spec, dict(saved)


def _depth(text: str) -> int:
    """How deep the text's brackets nest outside strings (checked before parsing: Python's json
    recurses once per level and fails with RecursionError about 1,000 levels down)."""
    brackets = _NOT_BRACKET.sub("", _STRING.sub("", text))
    if not brackets:
        return 0
    codes = np.frombuffer(brackets.encode("ascii"), dtype=np.uint8)
    steps = np.where((codes == ord("[")) | (codes == ord("{")), 1, -1)
    return int(np.cumsum(steps).max())


def _bounded_json(text: str, source: str) -> Any:
    """``json.loads(text)`` with the limits of a spec file, every failure a SpecError."""
    depth = _depth(text)
    if depth > MAX_DEPTH:
        raise SpecError(
            f"{source} nests {depth:,} levels deep; a spec file nests at most {MAX_DEPTH}. Check that it is a Formwise spec file."
        )

    def integer(literal: str) -> int:
        # Checked before conversion: int() of thousands of digits is slow, then refused by Python.
        digits = len(literal.lstrip("-"))
        value = int(literal) if digits <= _MAX_INT_DIGITS else None
        if value is None or abs(value) > sys.float_info.max:
            raise SpecError(f"{source} holds an integer of {digits:,} digits; numbers in a spec must be below about 1.8e308.")
        return value

    def real(literal: str) -> float:
        value = float(literal)
        if not math.isfinite(value):
            raise SpecError(f"{source} holds the number {literal[:30]}, too large to represent; use a smaller number.")
        return value

    def constant(literal: str) -> None:
        raise SpecError(f"{source} holds {literal}, which JSON does not allow (RFC 8259 §6); write a number or null.")

    def unique(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
        out = dict(pairs)
        if len(out) < len(pairs):
            # RFC 8259 §4: names SHOULD be unique; a repeated one would silently lose the first value.
            keys = [k for k, _ in pairs]
            twice = next(k for i, k in enumerate(keys) if k in keys[:i])
            raise SpecError(f"{source} names '{twice[:40]}' twice in one object; keep one of them.")
        return out

    try:
        document = json.loads(text, parse_int=integer, parse_float=real, parse_constant=constant, object_pairs_hook=unique)
    except json.JSONDecodeError as exc:
        raise SpecError(f"{source} is not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg}).") from None
    except RecursionError:
        raise SpecError(f"{source} nests too deeply; a spec file nests at most {MAX_DEPTH} levels.") from None
    except SpecError:
        raise
    except ValueError as exc:  # e.g. Python's limit on integer digits, if a number slips past the hooks
        raise SpecError(f"{source} holds a value Formwise cannot read ({exc}).") from None
    _check_values(document, source)
    return document


def _check_values(document: Any, source: str) -> None:
    """Count the values (without recursion) and refuse text that cannot be written back as UTF-8."""
    stack, count = [document], 0
    while stack:
        value = stack.pop()
        count += 1
        if count > MAX_ITEMS:
            raise SpecError(f"{source} holds more than {MAX_ITEMS:,} values; a spec file holds a few dozen.")
        if isinstance(value, dict):
            stack.extend(value.keys())
            stack.extend(value.values())
        elif isinstance(value, list):
            stack.extend(value)
        elif isinstance(value, str):
            try:
                value.encode("utf-8")
            except UnicodeEncodeError:
                # A lone \\ud800-style escape: JSON text, but no character (RFC 8259 §8.2).
                raise SpecError(f"{source} holds a text with a lone surrogate escape (such as \\ud800); remove it.") from None


def spec_document(spec: dict[str, Any], saved: dict[str, dict[str, Any]] | None = None) -> str:
    """The text of a spec file holding ``spec`` and the saved models."""
    if not saved:
        return json.dumps(spec, indent=2, ensure_ascii=False) + "\n"
    return json.dumps({"formwise_spec": VERSION, "spec": spec, "saved": saved}, indent=2, ensure_ascii=False) + "\n"


def read_spec_file(path: str | Path) -> tuple[dict[str, Any], dict[str, dict[str, Any]]]:
    path = Path(path)
    if not path.exists():
        raise SpecError(f"spec file not found: '{path}'. Check the path.")
    if not path.is_file():  # a folder, pipe or device: never read it
        raise SpecError(f"'{path}' is not a regular file; give the path of a spec file (JSON).")
    try:
        with path.open("rb") as handle:
            raw = handle.read(MAX_BYTES + 1)  # no more than the limit, whatever the file's size
    except OSError as exc:
        raise SpecError(f"cannot read spec file '{path}': {exc.strerror}. Check that it is not locked or restricted.") from None
    return parse_spec_document(raw, f"spec file '{path}'")
