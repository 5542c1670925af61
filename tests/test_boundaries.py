"""The numeric core imports numpy, scipy and the standard library only (house style)."""

from __future__ import annotations

import ast
import sys
from pathlib import Path

CORE = Path(__file__).resolve().parents[1] / "service" / "core"
ALLOWED_THIRD_PARTY = {"numpy", "scipy"}


def _imports(path: Path) -> list[tuple[int, str]]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:  # relative: must stay inside service.core
                if node.level > 1:
                    found.append((node.lineno, "." * node.level + (node.module or "")))
                continue
            found.append((node.lineno, node.module or ""))
    return found


def test_core_imports_only_numpy_scipy_and_stdlib() -> None:
    files = sorted(CORE.glob("*.py"))
    assert len(files) >= 5
    bad = []
    for path in files:
        for line, name in _imports(path):
            top = name.split(".")[0]
            if name.startswith(".."):
                bad.append(f"{path.name}:{line} imports {name} (outside the core)")
            elif top == "service":
                if not name.startswith("service.core"):
                    bad.append(f"{path.name}:{line} imports {name}")
            elif top not in ALLOWED_THIRD_PARTY and top not in sys.stdlib_module_names:
                bad.append(f"{path.name}:{line} imports {name}")
    assert not bad, "core must import numpy/scipy/stdlib only:\n" + "\n".join(bad)


def test_boundary_check_catches_a_web_import(tmp_path: Path) -> None:
    # The check itself must be able to fail: a file importing fastapi is flagged.
    p = tmp_path / "x.py"
    p.write_text("import numpy\nfrom fastapi import FastAPI\nfrom ..api import app\n")
    names = [n for _, n in _imports(p)]
    assert "fastapi" in names and "..api" in names
