"""Shared fixtures for the Formwise test suite."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parent.parent
DEMO_CSV = ROOT / "demo_data" / "kiosks.csv"
DEMO_SPEC = ROOT / "demo_data" / "default_spec.json"


@pytest.fixture(scope="session")
def _kiosks_once() -> pd.DataFrame:
    return pd.read_csv(DEMO_CSV)


@pytest.fixture
def kiosks(_kiosks_once: pd.DataFrame) -> pd.DataFrame:
    """The project's invented demo data (demo_data/kiosks.csv); a fresh copy per test."""
    return _kiosks_once.copy()


@pytest.fixture
def default_spec() -> dict:
    """The demo's default spec (demo_data/default_spec.json); a fresh copy per test."""
    return json.loads(DEMO_SPEC.read_text(encoding="utf-8"))
