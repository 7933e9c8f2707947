"""Package names imported on first use (PEP 562), so importing one submodule stays cheap."""

from __future__ import annotations

import importlib
from collections.abc import Callable, Mapping


def lazy_exports(package: str, where: Mapping[str, str]) -> tuple[Callable[[str], object], Callable[[], list[str]]]:
    """``__getattr__`` and ``__dir__`` for a package that exports ``name -> module`` lazily.

    Parameters
    ----------
    package : str
        The package's ``__name__``.
    where : mapping
        Each exported name and the module that defines it.
    """

    def __getattr__(name: str) -> object:
        if name in where:
            value = getattr(importlib.import_module(where[name]), name)
            setattr(importlib.import_module(package), name, value)
            return value
        raise AttributeError(f"module {package!r} has no attribute {name!r}")

    def __dir__() -> list[str]:
        return sorted({*vars(importlib.import_module(package)), *where})

    return __getattr__, __dir__
