"""The command line: contract JSON on success, one clear error line and exit 2 on bad input."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
CONTRACT_KEYS = {
    "n_obs",
    "n_dropped",
    "dropped",
    "outcome",
    "covariance",
    "terms",
    "fit",
    "effects",
    "warnings",
    "retransform",
    "boxcox",
    "diagnostics",
}


def run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "core", *args], cwd=ROOT, capture_output=True, text=True, timeout=120)


def test_demo_prints_the_result_contract() -> None:
    done = run("analyze", "--demo")
    assert done.returncode == 0, done.stderr
    result = json.loads(done.stdout)
    assert CONTRACT_KEYS <= set(result)
    assert result["n_obs"] == 1500
    term_keys = {
        "name",
        "column",
        "transform",
        "level",
        "power",
        "estimate",
        "std_error",
        "statistic",
        "p_value",
        "ci_low",
        "ci_high",
    }
    assert all(term_keys <= set(t) for t in result["terms"])
    effect_keys = {"column", "change", "units", "approximate", "exact", "ci_low", "ci_high", "adjusted", "average", "reference"}
    assert all(effect_keys <= set(e) for e in result["effects"])


def test_markdown_output_to_file(tmp_path: Path) -> None:
    out = tmp_path / "results.md"
    done = run("analyze", "--demo", "--format", "markdown", "--out", str(out))
    assert done.returncode == 0, done.stderr
    text = out.read_text()
    assert "| Term | Estimate |" in text and r"drink\_price" in text  # user text escaped for Markdown


@pytest.mark.parametrize(
    ("args", "needle"),
    [
        (("analyze", "missing.csv", "--spec", "demo_data/default_spec.json"), "file not found"),
        (("analyze", "demo_data/kiosks.csv", "--spec", "nope.json"), "spec file not found"),
        (("analyze",), "needs a data file"),
        (("frobnicate",), "invalid choice"),
    ],
)
def test_bad_input_exits_2_with_one_error_line(args: tuple[str, ...], needle: str) -> None:
    done = run(*args)
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and needle in lines[0]
    assert "Traceback" not in done.stderr


def test_text_column_as_regressor_is_a_clear_error(tmp_path: Path) -> None:
    spec = tmp_path / "spec.json"
    spec.write_text(
        json.dumps(
            {
                "outcome": {"column": "weekly_revenue", "transform": "log"},
                "regressors": [{"column": "kiosk_id", "transform": "level"}],
            }
        )
    )
    done = run("analyze", "demo_data/kiosks.csv", "--spec", str(spec))
    assert done.returncode == 2
    assert done.stderr.count("\n") == 1 and "kiosk_id" in done.stderr and "holds text" in done.stderr


def test_invalid_json_spec_names_the_line(tmp_path: Path) -> None:
    spec = tmp_path / "spec.json"
    spec.write_text('{"outcome": {"column": "weekly_revenue",\n "transform": }}')
    done = run("analyze", "demo_data/kiosks.csv", "--spec", str(spec))
    assert done.returncode == 2 and "line 2" in done.stderr


@pytest.mark.parametrize(("fmt", "needle"), [("csv", "Term,Estimate"), ("latex", r"\toprule"), ("markdown", "| Term |")])
def test_table_formats(fmt: str, needle: str) -> None:
    done = run("analyze", "--demo", "--format", fmt)
    assert done.returncode == 0, done.stderr
    assert needle in done.stdout


def test_report_command_writes_a_self_contained_file(tmp_path: Path) -> None:
    out = tmp_path / "report.html"
    done = run("report", "--demo", "--out", str(out))
    assert done.returncode == 0, done.stderr
    html = out.read_text()
    assert html.startswith("<!DOCTYPE html>") and "<svg" in html and "<script" not in html


def test_spec_document_with_saved_models_round_trips(tmp_path: Path) -> None:
    from core.model.specfile import parse_spec_document, spec_document

    spec = json.loads((ROOT / "demo_data" / "default_spec.json").read_text())
    level = json.loads(json.dumps(spec))
    level["outcome"]["transform"] = "level"
    text = spec_document(spec, {"log revenue": spec, "level revenue": level})
    assert parse_spec_document(text) == (spec, {"log revenue": spec, "level revenue": level})
    path = tmp_path / "workspace.json"
    path.write_text(text)
    done = run("analyze", "demo_data/kiosks.csv", "--spec", str(path))
    assert done.returncode == 0, done.stderr
    direct = json.loads(run("analyze", "--demo").stdout)
    assert [t["estimate"] for t in json.loads(done.stdout)["terms"]] == [t["estimate"] for t in direct["terms"]]
