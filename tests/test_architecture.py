"""The agreed shape: mechanics never imports console; data files are never executed."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _imports(path: Path):
    tree = ast.parse(path.read_text(), filename=str(path))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield alias.name
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            yield node.module


def test_mechanics_source_never_names_console():
    offenders = [
        f"{p.relative_to(ROOT)}: {name}"
        for p in (ROOT / "mechanics").rglob("*.py")
        for name in _imports(p)
        if name == "console" or name.startswith("console.")
    ]
    assert offenders == []


def test_importing_every_mechanics_module_loads_no_console_module():
    modules = sorted(
        ".".join(p.relative_to(ROOT).with_suffix("").parts)
        for p in (ROOT / "mechanics").rglob("*.py")
        if p.name != "__init__.py" or p.parent != ROOT / "mechanics"
    )
    code = (
        "import importlib, sys\n"
        f"for m in {modules!r}: importlib.import_module(m.removesuffix('.__init__'))\n"
        "bad = [m for m in sys.modules if m == 'console' or m.startswith('console.')]\n"
        "print(bad); sys.exit(1 if bad else 0)\n"
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert proc.returncode == 0, proc.stdout + proc.stderr


def test_no_code_execution_of_data():
    banned = {"eval", "exec", "compile"}
    banned_modules = {"pickle", "marshal", "shelve"}
    found = []
    for p in list((ROOT / "mechanics").rglob("*.py")) + list((ROOT / "console").rglob("*.py")):
        tree = ast.parse(p.read_text(), filename=str(p))
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id in banned:
                found.append(f"{p.name}:{node.lineno} {node.func.id}()")
        found += [f"{p.name}: imports {m}" for m in _imports(p) if m.split(".")[0] in banned_modules]
    assert found == []
