"""The shape of the code base: no import cycles, core never imports the app or streamlit, small
app modules, and a transform added by its registry entry alone reaching every place that reads
transforms (docs/contract.md §2.4; DEVELOPERS.md, "Adding a transform")."""

from __future__ import annotations

import ast
from dataclasses import dataclass
from pathlib import Path
from typing import ClassVar

import numpy as np
import pandas as pd
import pytest

import core
from app.gridspec import grid_to_spec, spec_to_grid, transform_options
from core.model import transforms
from core.model.transforms import Transform, menu_word

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("core", "app")


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for package in PACKAGES for p in sorted((ROOT / package).rglob("*.py"))}


def _imports(path: Path, known: set[str]) -> set[str]:
    """Project modules a file imports, at any depth (function-level imports count too)."""
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        names: list[str] = []
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names = [node.module] + [f"{node.module}.{a.name}" for a in node.names]
        for name in names:
            if name in known:
                found.add(name)
    return found


def test_no_import_cycle() -> None:
    """Depth-first search over the graph of project imports; a back edge is a cycle. A package
    importing its own submodules (core/__init__ -> core.analysis) is an edge like any other, so
    a submodule importing its package's __init__ would show as a cycle too."""
    modules = _modules()
    known = set(modules)
    graph = {m: _imports(p, known) - {m} for m, p in modules.items()}
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph[node]):
            if state.get(nxt) == 1:
                cycle = stack[stack.index(nxt) :] + [nxt]
                pytest.fail("import cycle: " + " -> ".join(cycle))
            if nxt not in state:
                visit(nxt)
        stack.pop()
        state[node] = 2

    for module in sorted(graph):
        if module not in state:
            visit(module)


def test_core_never_imports_the_app_or_streamlit() -> None:
    """Nor does either import a reference library kept for tests (statsmodels, linearmodels)."""
    for name, path in _modules().items():
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                modules = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
                assert not any(m.startswith(("statsmodels", "linearmodels")) for m in modules), f"{name} imports {modules}"
        if not name.startswith("core"):
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                modules = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
                for module in modules:
                    assert not module.startswith(("streamlit", "app")), f"{name} imports {module}"


def test_app_modules_stay_small() -> None:
    for path in sorted((ROOT / "app").rglob("*.py")):
        lines = len(path.read_text(encoding="utf-8").splitlines())
        assert lines <= 420, f"{path.relative_to(ROOT)} has {lines} lines"


def _code_lines(node: ast.AST, lines: list[str]) -> int:
    doc = ast.get_docstring(node) or ""
    body = lines[node.lineno - 1 : node.end_lineno]
    count = sum(1 for line in body if line.strip() and not line.strip().startswith("#"))
    return count - (len(doc.splitlines()) if doc else 0)


def test_no_function_over_eighty_lines_of_code() -> None:
    long = []
    for name, path in _modules().items():
        text = path.read_text(encoding="utf-8")
        lines = text.splitlines()
        for node in ast.walk(ast.parse(text)):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)) and _code_lines(node, lines) > 80:
                long.append(f"{name}.{node.name} ({_code_lines(node, lines)})")
    assert not long, "functions over 80 lines of code: " + ", ".join(long)


# --- a transform added by its registry entry alone ------------------------------------------------
@dataclass(frozen=True)
class CubeRoot(Transform):
    """x^(1/3): any sign, a slope that depends on the units (for this test's purpose)."""

    name: str = "cuberoot"
    unit_invariant: ClassVar[bool] = False
    menu_code: ClassVar[str | None] = "cuberoot"
    menu_word: ClassVar[str] = "cube root"

    def label(self, column: str) -> str:
        return f"cube root of {column}"

    def forward(self, x):
        return np.cbrt(np.asarray(x, dtype=float))

    def inverse(self, z):
        return np.asarray(z, dtype=float) ** 3

    def derivative(self, x):
        x = np.asarray(x, dtype=float)
        with np.errstate(divide="ignore"):
            return 1.0 / (3.0 * np.cbrt(x) ** 2)

    def inverse_derivative(self, z):
        return 3.0 * np.asarray(z, dtype=float) ** 2


@pytest.fixture
def cube_root():
    transforms.register(CubeRoot)
    yield CubeRoot()
    transforms.unregister("cuberoot")


def test_a_registered_transform_is_offered_worded_and_unit_checked(cube_root, kiosks: pd.DataFrame, default_spec: dict) -> None:
    """Registering the class is all it takes: the grid offers it (with its words), the grid's
    spec carries it, the reading names it, effects use it, and the units check runs for it
    because it declares that its effects depend on the units."""
    grid = spec_to_grid(default_spec, kiosks)
    assert "cuberoot" in transform_options(grid)
    assert menu_word("cuberoot") == "cube root"
    grid.loc[grid["column"] == "foot_traffic", "transform"] = "cuberoot"
    spec, _ = grid_to_spec(grid)
    assert {"column": "foot_traffic", "transform": "cuberoot"} in [
        {k: r[k] for k in ("column", "transform")} for r in spec["regressors"]
    ]
    result = core.analyze(kiosks, spec, parts={"terms", "effects", "units_check"})
    term = next(t for t in result["terms"] if t["column"] == "foot_traffic")
    assert "cube root of foot_traffic" in term["reading"]
    effect = next(e for e in result["effects"] if e["column"] == "foot_traffic")
    assert effect["exact"] is not None
    assert "foot_traffic" in [c["column"] for c in result["units_check"]]
    transforms.unregister("cuberoot")
    assert "cuberoot" not in transform_options(spec_to_grid(default_spec, kiosks))
