"""The layer table of DEVELOPERS.md holds in the code, and the test that says so can fail.

The contracts live in ``pyproject.toml`` (``[tool.importlinter]``) and are checked with
import-linter, which reads every import statically (grimp). A module may import only from the
layers below its own; modules on one line (``a | b``) may not import each other.
"""

from __future__ import annotations

import ast
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

try:
    import tomllib
except ImportError:  # Python 3.10: import-linter brings tomli
    import tomli as tomllib

ROOT = Path(__file__).resolve().parents[2]
PACKAGE = ROOT / "modemverify"


def _layers(pyproject: Path = ROOT / "pyproject.toml") -> list[list[str]]:
    config = tomllib.loads(pyproject.read_text())["tool"]["importlinter"]
    (contract,) = [c for c in config["contracts"] if c["id"] == "layers"]
    return [[m.strip() for m in line.split("|")] for line in contract["layers"]]


def _lint(folder: Path) -> subprocess.CompletedProcess:
    """Run import-linter on the package and pyproject found in ``folder``."""
    code = ("import sys; from importlinter.cli import lint_imports; "
            "sys.exit(lint_imports(config_filename='pyproject.toml', no_cache=True, "
            "no_logo=True))")
    return subprocess.run([sys.executable, "-c", code], cwd=folder, capture_output=True,
                          text=True, env={"PYTHONPATH": str(folder), "PATH": ""}, timeout=300)


def test_the_package_keeps_its_layers():
    run = _lint(ROOT)
    assert run.returncode == 0, run.stdout + run.stderr
    assert "1 kept, 0 broken" in run.stdout


def test_every_module_has_a_layer():
    placed = {m for line in _layers() for m in line}
    top = {f"modemverify.{p.stem}" for p in PACKAGE.glob("*.py") if p.stem != "__init__"}
    top |= {f"modemverify.{p.parent.name}" for p in PACKAGE.glob("*/__init__.py")}
    assert top - placed == set(), "modules missing from the layer table in pyproject.toml"
    assert placed - top == set(), "layers naming modules that do not exist"


def _module_file(copy: Path, module: str) -> Path:
    path = copy / Path(*module.split("."))
    return path / "__init__.py" if path.is_dir() else path.with_suffix(".py")


# each layer line, with the line above it: an import from the lower into the upper one must be
# refused, so that removing any one line from the table lets an upward import (a cycle) in
_PAIRS = [(low[0], high[0]) for high, low in zip(_layers(), _layers()[1:])]


@pytest.fixture(scope="module")
def package_copy(tmp_path_factory):
    folder = tmp_path_factory.mktemp("layers")
    shutil.copytree(PACKAGE, folder / "modemverify",
                    ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copy(ROOT / "pyproject.toml", folder / "pyproject.toml")
    return folder


@pytest.mark.parametrize("low,high", _PAIRS, ids=[f"{lo}->{hi}" for lo, hi in _PAIRS])
def test_an_upward_import_breaks_the_contract(package_copy, low, high):
    target = _module_file(package_copy, low)
    original = target.read_text()
    try:
        target.write_text(original + f"\nimport {high}  # injected by test_layers\n")
        run = _lint(package_copy)
    finally:
        target.write_text(original)
    assert run.returncode == 1, run.stdout + run.stderr
    assert f"{low} is not allowed to import {high}" in run.stdout


def test_siblings_on_one_line_may_not_import_each_other(package_copy):
    target = _module_file(package_copy, "modemverify.stats")
    original = target.read_text()
    try:
        target.write_text(original + "\nimport modemverify.vectors  # injected\n")
        run = _lint(package_copy)
    finally:
        target.write_text(original)
    assert run.returncode == 1
    assert "modemverify.stats is not allowed to import modemverify.vectors" in run.stdout


def _own_imports_inside_functions(path: Path) -> list[str]:
    tree = ast.parse(path.read_text(), str(path))
    found = []
    for fn in ast.walk(tree):
        if not isinstance(fn, (ast.FunctionDef, ast.AsyncFunctionDef)):
            continue
        for node in ast.walk(fn):
            if isinstance(node, ast.ImportFrom) and (
                    node.level > 0 or (node.module or "").startswith("modemverify")):
                found.append(f"{path.relative_to(ROOT)}:{node.lineno}")
            elif isinstance(node, ast.Import) and any(
                    a.name.startswith("modemverify") for a in node.names):
                found.append(f"{path.relative_to(ROOT)}:{node.lineno}")
    return found


def test_no_function_local_imports_of_the_package():
    # optional dependencies and plugins may be imported late; the package's own modules may not,
    # because a late import hides an arrow from the contract above
    found = [hit for p in sorted(PACKAGE.rglob("*.py")) for hit in _own_imports_inside_functions(p)]
    assert found == []
