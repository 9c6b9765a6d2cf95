"""Every name a module lists in __all__ resolves (STYLE.md: public surface)."""

from __future__ import annotations

import importlib
import pkgutil

import pytest
import sectionwave.engine
import sectionwave.importers

MODULES = sorted(
    {m.name for pkg in (sectionwave.engine, sectionwave.importers)
     for m in pkgutil.walk_packages(pkg.__path__, pkg.__name__ + ".")}
    | {"sectionwave.engine", "sectionwave.importers"}
)


@pytest.mark.parametrize("name", MODULES)
def test_all_names_resolve(name):
    module = importlib.import_module(name)
    for attr in getattr(module, "__all__", []):
        assert hasattr(module, attr), f"{name}.{attr}"
