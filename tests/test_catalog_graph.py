"""The family registry sits above the families: no module below it imports the catalog."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from registry.power import FAMILIES

POWER = Path(__file__).resolve().parent.parent / "registry" / "power"
#: the registry itself, the package's public face, and the simulation-verified search, which check and
#: size call with a design and which rebuilds designs by family name in its worker processes
_ABOVE = {"catalog.py", "__init__.py", "verify.py"}


def _imported_modules(path: Path) -> set[str]:
    names: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            names.add("." * node.level + (node.module or ""))
            names.update("." * node.level + alias.name for alias in node.names if not node.module)
        elif isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
    return names


@pytest.mark.parametrize("module", sorted(p.name for p in POWER.glob("*.py") if p.name not in _ABOVE))
def test_no_module_below_the_catalog_imports_it(module: str) -> None:
    imported = _imported_modules(POWER / module)
    assert not {m for m in imported if m.endswith("catalog")}, f"{module} imports the catalog: {imported}"


def test_every_design_model_knows_its_family() -> None:
    for family in FAMILIES:
        assert type(family).design_model.family_instance is family
