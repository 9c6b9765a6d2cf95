"""Imports run one way (DEVELOPERS.md, "Which way imports run").

face (engine.case, engine.cli) -> engine core -> geometry model (importers);
engine.export reads the core's typed results but never the orchestrator
(engine.run, engine.adapt) nor the face; the core never imports the face
or engine.export; importers never import the engine. Checked on the
source text (every import statement, also those inside functions).
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = {"sectionwave.importers": ROOT / "importers", "sectionwave.engine": ROOT / "engine"}
FACE = {"sectionwave.engine.case", "sectionwave.engine.cli", "sectionwave.engine.batch"}
ORCHESTRATOR = {"sectionwave.engine.run", "sectionwave.engine.adapt"}


def _modules() -> dict[str, Path]:
    out = {}
    for package, folder in PACKAGES.items():
        for path in folder.rglob("*.py"):
            rel = path.relative_to(folder).with_suffix("")
            parts = [p for p in rel.parts if p != "__init__"]
            out[".".join([package, *parts])] = path
    return out


def _imports(module: str, path: Path) -> set[str]:
    """Absolute names of every module ``module`` imports (relative imports resolved)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    is_package = path.name == "__init__.py"
    base = module.split(".") if is_package else module.split(".")[:-1]
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                anchor = base[: len(base) - node.level + 1]
                prefix = ".".join(anchor + ([node.module] if node.module else []))
            else:
                prefix = node.module or ""
            if node.module:  # "from . import x" imports the submodule x, not the package
                found.add(prefix)
            found.update(f"{prefix}.{alias.name}" for alias in node.names)
    return {name for name in found if name.startswith("sectionwave")}


def _kind(module: str) -> str:
    if module.startswith("sectionwave.importers"):
        return "importers"
    if module in FACE:
        return "face"
    if module == "sectionwave.engine":
        return "package"
    if module.startswith("sectionwave.engine.export"):
        return "export"
    return "core"


def _hits(importer: str, imported: set[str], forbidden) -> list[str]:
    return sorted(name for name in imported if forbidden(name))


MODULES = _modules()


@pytest.mark.parametrize("module", sorted(MODULES))
def test_imports_run_one_way(module: str) -> None:
    imported = _imports(module, MODULES[module])
    kind = _kind(module)
    if kind == "importers":
        bad = _hits(module, imported, lambda n: n.startswith("sectionwave.engine"))
    elif kind == "core":
        bad = _hits(module, imported, lambda n: n in FACE or n.startswith("sectionwave.engine.export")
                    or n == "sectionwave.engine")
    elif kind == "export":
        bad = _hits(module, imported, lambda n: n in FACE or n in ORCHESTRATOR)
    else:
        bad = []
    assert not bad, f"{module} ({kind}) must not import {bad}"


def test_the_checker_sees_violations(tmp_path: Path) -> None:
    # the rule must be able to fail: a core module importing the face is caught
    fake = tmp_path / "mesh.py"
    fake.write_text("from .case import load_case\nfrom . import export\n", encoding="utf-8")
    imported = _imports("sectionwave.engine.mesh", fake)
    assert "sectionwave.engine.case" in imported
    assert "sectionwave.engine.export" in imported
    assert len(MODULES) > 20
