"""The layer table: which package may import what (house style, DEVELOPERS.md "Layers").

Data flows one way, edge → contract → use-case → core → result → edge. Each rule below is
checked on the real source tree, and each is shown to fail on a file that breaks it.
"""

from __future__ import annotations

import ast
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

SERVICE = Path(__file__).resolve().parents[1] / "service"
STDLIB = set(sys.stdlib_module_names) | {"__future__"}
WEB_STACK = {"fastapi", "starlette", "jinja2", "plotly", "markupsafe", "uvicorn"}


@dataclass(frozen=True)
class Layer:
    """``allowed``: third-party top-level names a package may import (None: any);
    ``service``: the ``service.*`` packages it may import (None: any); ``forbidden``:
    names it must never import, whatever else is allowed."""

    allowed: frozenset[str] | None
    service: frozenset[str] | None
    forbidden: frozenset[str] = frozenset()


def _s(*names: str) -> frozenset[str]:
    return frozenset(names)


#: package → what it may import. ``service`` entries are first components under
#: ``service`` ("" is the package root: ``__version__``, ``COMPUTATION_VERSION``).
LAYERS: dict[str, Layer] = {
    "core": Layer(allowed=_s("numpy", "scipy"), service=_s("core")),
    "contract": Layer(allowed=_s("pydantic"), service=_s("core", "contract")),
    "usecases": Layer(
        allowed=None,
        # "audit": usecases/audit.py runs the audit engine, which calls usecases.diagnose.
        service=_s("", "core", "contract", "usecases", "inputs", "config", "audit"),
        forbidden=frozenset(WEB_STACK),
    ),
    "http": Layer(
        allowed=None, service=_s("", "config", "core", "contract", "usecases", "storage", "http")
    ),
    "audit": Layer(
        allowed=None,
        service=_s("", "core", "contract", "usecases", "inputs", "config", "demo", "audit"),
        forbidden=frozenset(WEB_STACK),
    ),
    "api": Layer(allowed=None, service=None, forbidden=_s("service.web")),
    "web": Layer(allowed=None, service=None, forbidden=_s("service.api", "service.app")),
}


def _absolute(module: str, level: int, name: str) -> str:
    """``from ..x import y`` inside ``module`` → ``service.x``."""
    if not level:
        return name
    base = module.split(".")[: len(module.split(".")) - level]
    return ".".join(base + ([name] if name else []))


def _module_name(path: Path, root: Path) -> str:
    parts = list(path.relative_to(root.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def imports_of(path: Path, root: Path = SERVICE) -> list[tuple[int, str, bool]]:
    """(line, absolute module, at module level?) for every import in ``path``.

    Imports under ``if TYPE_CHECKING:`` count as module level (they never run)."""
    module = _module_name(path, root)
    package = module if path.name == "__init__.py" else module.rsplit(".", 1)[0]
    tree = ast.parse(path.read_text(encoding="utf-8"))
    top = {id(n) for n in tree.body}
    for node in tree.body:
        if isinstance(node, ast.If):
            top |= {id(n) for n in ast.walk(node)}
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, a.name, id(node) in top) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            pkg = package + ".x" if node.level else package  # level 1 = this package
            name = _absolute(pkg, node.level, node.module or "")
            if node.module is None and node.level:  # from . import a, b
                found += [(node.lineno, f"{name}.{a.name}", id(node) in top) for a in node.names]
            else:
                found.append((node.lineno, name, id(node) in top))
    return found


def violations(path: Path, layer: str, root: Path = SERVICE) -> list[str]:
    rule = LAYERS[layer]
    bad = []
    for line, name, _ in imports_of(path, root):
        top = name.split(".")[0]
        where = f"{path.relative_to(root.parent)}:{line} imports {name}"
        if any(name == f or name.startswith(f + ".") for f in rule.forbidden) or (
            top in rule.forbidden
        ):
            bad.append(where)
        elif top == root.name:
            inner = name.split(".")[1] if "." in name else ""
            if not ((root / inner).is_dir() or (root / f"{inner}.py").is_file()):
                inner = ""  # a name of the package root (__version__, ...)
            if rule.service is not None and inner not in rule.service:
                bad.append(where)
        elif top in STDLIB:
            continue
        elif rule.allowed is not None and top not in rule.allowed:
            bad.append(where)
    return bad


def local_imports(path: Path, root: Path = SERVICE) -> list[str]:
    return [
        f"{path.relative_to(root.parent)}:{line} imports {name} inside a function"
        for line, name, at_top in imports_of(path, root)
        if not at_top
    ]


def _files(package: str) -> list[Path]:
    return sorted((SERVICE / package).rglob("*.py"))


class TestLayerTable:
    @pytest.mark.parametrize("layer", sorted(LAYERS))
    def test_basic(self, layer: str) -> None:
        files = _files(layer)
        assert files, f"service/{layer} has no modules"
        bad = [v for path in files for v in violations(path, layer)]
        assert not bad, f"{layer} breaks the layer table:\n" + "\n".join(bad)

    def test_no_function_local_imports_outside_the_cli(self) -> None:
        files = [
            p
            for p in SERVICE.rglob("*.py")
            if "cli" not in p.relative_to(SERVICE).parts and "migrations" not in p.parts
        ]
        bad = [v for p in files for v in local_imports(p)]
        assert not bad, "\n".join(bad)

    def test_one_app_factory_knows_both_edges(self) -> None:
        both = []
        for p in SERVICE.rglob("*.py"):
            names = {n for _, n, _ in imports_of(p)}
            if any(n.startswith("service.api") for n in names) and any(
                n.startswith("service.web") for n in names
            ):
                both.append(str(p.relative_to(SERVICE)))
        assert both == ["app.py"]

    def test_demo_uses_the_contract_not_the_api(self) -> None:
        names = {n for _, n, _ in imports_of(SERVICE / "demo.py")}
        assert not any(n.startswith(("service.api", "service.web")) for n in names)


def _fake_tree(tmp_path: Path, package: str, name: str, text: str) -> Path:
    root = tmp_path / "service"
    for sub in (*LAYERS, "cli"):
        (root / sub).mkdir(parents=True, exist_ok=True)
    (root / "__init__.py").write_text("")
    (root / package / "__init__.py").write_text("")
    path = root / package / name
    path.write_text(text)
    return path


class TestTheCheckCanFail:
    """Every rule flags a file that breaks it (so the table test is not vacuous)."""

    @pytest.mark.parametrize(
        ("layer", "text"),
        [
            ("core", "import pandas\n"),
            ("core", "from ..contract import fold\n"),
            ("contract", "from ..usecases.fold import fold_payload\n"),
            ("contract", "import fastapi\n"),
            ("usecases", "from fastapi import Request\n"),
            ("usecases", "from starlette.concurrency import run_in_threadpool\n"),
            ("usecases", "import plotly.graph_objects as go\n"),
            ("usecases", "from ..http.problems import Problem\n"),
            ("api", "from ..web.pages import render\n"),
            ("web", "from ..api.routes import fold\n"),
            ("web", "from service.api.examples import FOLD_EXAMPLES\n"),
        ],
    )
    def test_errors(self, tmp_path: Path, layer: str, text: str) -> None:
        path = _fake_tree(tmp_path, layer, "bad.py", "import numpy\n" + text)
        assert violations(path, layer, root=tmp_path / "service")

    def test_basic(self, tmp_path: Path) -> None:
        ok = "import numpy\nfrom scipy import signal\nfrom .folding import fold\n"
        path = _fake_tree(tmp_path, "core", "good.py", ok)
        assert violations(path, "core", root=tmp_path / "service") == []

    def test_edges(self, tmp_path: Path) -> None:
        text = "import json\n\ndef f():\n    from ..core import chain\n    return chain\n"
        path = _fake_tree(tmp_path, "usecases", "lazy.py", text)
        assert local_imports(path, root=tmp_path / "service")
