"""The spec file: one model, or one model with the named models saved beside it.

A plain spec (SPEC §3) is accepted as it is. A document
``{"formwise_spec": 1, "spec": {...}, "saved": {"name": {...}, ...}}`` also carries the saved
models, so one file restores the whole screen. Files are parsed as JSON data only.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from core.errors import SpecError

VERSION = 1
MAX_BYTES = 2_000_000


def parse_spec_document(text: str | bytes, source: str = "spec file") -> tuple[dict[str, Any], dict[str, dict[str, Any]]]:
    """The current spec and the saved ones from a spec file's text."""
    if isinstance(text, bytes):
        if len(text) > MAX_BYTES:
            raise SpecError(f"{source} is larger than {MAX_BYTES // 1_000_000} MB; a spec file is a few kilobytes of JSON.")
        try:
            text = text.decode("utf-8-sig")
        except UnicodeDecodeError:
            raise SpecError(f"{source} is not UTF-8 text; save it as UTF-8 JSON.") from None
    try:
        document = json.loads(text)
    except json.JSONDecodeError as exc:
        raise SpecError(f"{source} is not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg}).") from None
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


def spec_document(spec: dict[str, Any], saved: dict[str, dict[str, Any]] | None = None) -> str:
    """The text of a spec file holding ``spec`` and the saved models."""
    if not saved:
        return json.dumps(spec, indent=2, ensure_ascii=False) + "\n"
    return json.dumps({"formwise_spec": VERSION, "spec": spec, "saved": saved}, indent=2, ensure_ascii=False) + "\n"


def read_spec_file(path: str | Path) -> tuple[dict[str, Any], dict[str, dict[str, Any]]]:
    path = Path(path)
    if not path.is_file():
        raise SpecError(f"spec file not found: '{path}'. Check the path.")
    return parse_spec_document(path.read_bytes(), f"spec file '{path}'")
