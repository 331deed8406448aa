"""scipy submodules that load on first use.

``scipy.stats`` and ``scipy.integrate`` take a good part of a second to import, while ``prespec check``
of t-test designs needs neither (their power is computed with ``scipy.special``). A family
module writes ``from .lazy import stats`` and uses ``stats.norm.ppf(...)`` as usual; the
submodule is imported the first time one of its attributes is read.

>>> from registry.power.lazy import stats
>>> round(float(stats.norm.ppf(0.975)), 4)
1.96
"""

from __future__ import annotations

import importlib
from collections.abc import Callable
from types import ModuleType
from typing import Any

__all__ = ["stats", "integrate"]


class _LazyModule:
    """Stands for the module ``name`` and imports it when an attribute is first read."""

    def __init__(self, name: str, load: Callable[[], ModuleType]) -> None:
        self._name = name
        self._load = load
        self._module: ModuleType | None = None

    def __getattr__(self, attr: str) -> Any:
        if attr.startswith("__"):
            raise AttributeError(attr)
        module = self._module
        if module is None:
            module = self._module = self._load()
        return getattr(module, attr)

    def __repr__(self) -> str:
        return f"<scipy module {self._name!r}, loaded on first use>"


stats: Any = _LazyModule("scipy.stats", lambda: importlib.import_module("scipy.stats"))
integrate: Any = _LazyModule("scipy.integrate", lambda: importlib.import_module("scipy.integrate"))
