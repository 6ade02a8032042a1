"""A lazy package face: names are imported from their modules on first access.

``import fitdrag`` (or ``import fitdrag.video``) then costs almost nothing, and importing one
stage never loads the others.  A package lists ``{public name: module}`` and installs the
two functions this returns as its module-level ``__getattr__`` and ``__dir__`` (PEP 562).
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Mapping


def lazy_face(
    package: str, where: Mapping[str, str]
) -> tuple[Callable[[str], object], Callable[[], list[str]]]:
    """``__getattr__`` and ``__dir__`` for ``package`` whose public names live in ``where``.

    Parameters
    ----------
    package : str
        The package's ``__name__`` (for the error message).
    where : mapping of str to str
        Each public name to the full name of the module that defines it.
    """

    def __getattr__(name: str) -> object:
        try:
            module = where[name]
        except KeyError:
            raise AttributeError(f"module {package!r} has no attribute {name!r}") from None
        return getattr(importlib.import_module(module), name)

    def __dir__() -> list[str]:
        return sorted(where)

    return __getattr__, __dir__
