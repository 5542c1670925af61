"""The audit package imports no web layer, and reaches the diagnosis through one module."""

from __future__ import annotations

import ast
from pathlib import Path

AUDIT = Path(__file__).resolve().parents[2] / "service" / "audit"
WEB = {"fastapi", "starlette", "jinja2", "plotly", "uvicorn"}
ADAPTER = "diagnose_one.py"


def _imports(path: Path) -> list[str]:
    """Imported module names, relative ones resolved against service.audit."""
    names = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names += [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = ["service", "audit"][: 2 - (node.level - 1)]
                names.append(".".join([*base, node.module] if node.module else base))
            else:
                names.append(node.module or "")
    return names


def _violations(path: Path) -> list[str]:
    bad = []
    for name in _imports(path):
        if name.split(".")[0] in WEB:
            bad.append(f"{path.name} imports {name}")
        if name.startswith(("service.usecases", "service.api")) and path.name != ADAPTER:
            bad.append(f"{path.name} imports {name}: only {ADAPTER} may call the use-case")
    return bad


def test_basic() -> None:
    files = sorted(AUDIT.glob("*.py"))
    assert len(files) >= 6
    bad = [v for p in files for v in _violations(p)]
    assert not bad, "\n".join(bad)
    assert any(n.startswith("service.usecases") for n in _imports(AUDIT / ADAPTER))


def test_the_check_can_fail(tmp_path: Path) -> None:
    p = tmp_path / "engine.py"
    p.write_text("import plotly\nfrom ..usecases.diagnose import diagnose_payload\n")
    assert len(_violations(p)) == 2
