"""A module imported when one of its names is first used, not when its user is imported.

``fvsolver check`` sets a case up and evaluates it once, with no sparse matrix and no solve;
scipy.sparse's import alone (about 0.3 s: it loads numpy.f2py and numpy.testing on the way)
was most of its time. The modules that need scipy.sparse only inside their functions bind it
as ::

    sp = deferred("scipy.sparse", "sp", globals())

The first attribute read (``sp.csr_matrix``) imports the module and rebinds the module-level
name to it, so every later read is a plain global lookup, as with an ``import`` statement.
"""
from __future__ import annotations

import importlib
from types import ModuleType


class _Deferred:
    """Stands in for a module under one global name until that name's first attribute read."""

    __slots__ = ("_module", "_name", "_namespace")

    def __init__(self, module: str, name: str, namespace: dict):
        self._module = module
        self._name = name
        self._namespace = namespace

    def load(self) -> ModuleType:
        """Import the module and put it in place of this stand-in."""
        module = importlib.import_module(self._module)
        if self._namespace.get(self._name) is self:
            self._namespace[self._name] = module
        return module

    def __getattr__(self, attribute: str):
        return getattr(self.load(), attribute)

    def __repr__(self) -> str:
        return f"<{self._module}, imported when first used>"


def deferred(module: str, name: str, namespace: dict) -> ModuleType:
    """A stand-in for ``module`` bound to ``name`` in ``namespace`` (a module's ``globals()``):
    the module is imported at the stand-in's first attribute read, which rebinds ``name``."""
    return _Deferred(module, name, namespace)  # type: ignore[return-value]
