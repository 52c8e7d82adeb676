"""A module imported on first attribute access (scipy loads in 0.1-0.3 s).

``sp = lazy_module("scipy.sparse")`` at the top of a module keeps the usual
``sp.csr_matrix(...)`` spelling while a session read from the model cache, which
never builds a determinant operator, does not import scipy at all.
"""

from __future__ import annotations

import importlib
from typing import Any


class LazyModule:
    """Stands in for a module until an attribute is first read, then copies its namespace."""

    def __init__(self, name: str) -> None:
        self.__dict__["_lazy_name"] = name

    def __getattr__(self, attr: str) -> Any:  # only called for names not copied yet
        module = importlib.import_module(self.__dict__["_lazy_name"])
        self.__dict__.update(vars(module))
        return getattr(module, attr)

    def __repr__(self) -> str:
        return f"<lazy module {self.__dict__['_lazy_name']!r}>"


def lazy_module(name: str) -> Any:
    """A stand-in for ``importlib.import_module(name)`` that imports on first use."""
    return LazyModule(name)
