"""The command line and the flows are the application layer: nothing below imports them."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
APPLICATION = ("pipeline.cli", "pipeline.flows")


def _imports(path: Path) -> set[str]:
    """Absolute names of every module `path` imports (relative imports resolved)."""
    package = ".".join(path.relative_to(ROOT).with_suffix("").parts)
    if path.name != "__init__.py":
        package = package.rpartition(".")[0]
    names = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            base = package.split(".")
            if node.level:
                base = base[:len(base) - node.level + 1]
                module = ".".join([*base, node.module] if node.module else base)
            else:
                module = node.module or ""
            names.add(module)
            names.update(f"{module}.{alias.name}" for alias in node.names)
    return names


def _below() -> list[Path]:
    files = [p for pkg in ("pipeline", "dashboards", "synthetic_studies", "queries")
             for p in sorted((ROOT / pkg).rglob("*.py"))]
    return [p for p in files if not any(p.is_relative_to(ROOT / Path(*a.split(".")))
                                        for a in APPLICATION)]


def test_the_scan_resolves_relative_imports():
    names = _imports(ROOT / "pipeline" / "cli" / "listen.py")
    assert "pipeline.net.scp" in names and "pipeline.cli.app" in names


@pytest.mark.parametrize("path", _below(), ids=lambda p: str(p.relative_to(ROOT)))
def test_core_does_not_import_the_application_layer(path):
    bad = sorted(n for n in _imports(path) for a in APPLICATION if n == a or n.startswith(a + "."))
    assert bad == [], f"{path.relative_to(ROOT)} imports the application layer: {bad}"


def test_network_code_lives_in_its_own_subpackage():
    users = sorted(str(p.relative_to(ROOT)) for p in _below()
                   if any(n.startswith("pynetdicom") or n.startswith("httpx") for n in _imports(p)))
    assert users and all(u.startswith("pipeline/net/") for u in users), users
