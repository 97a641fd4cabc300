"""Lazy public names for faultmap's packages.

Each analysis package lists its public names in its ``__init__`` and says which
module defines each. Nothing is imported until a name is used, so reading a
tool's declaration (``faultmap tools``, ``faultmap --help``) never pulls in the
analysis and its heavy dependencies (geopandas, scipy, numba, matplotlib).
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Mapping
from typing import Any


def lazy_exports(package: str, namespace: dict, exports: Mapping[str, str]) -> tuple[Callable, Callable]:
    """Make the ``__getattr__`` and ``__dir__`` that import public names on first use.

    Parameters
    ----------
    package : str
        Dotted name of the package (its ``__name__``).
    namespace : dict
        The package's ``globals()``; a name is stored there once imported.
    exports : mapping of str to str
        Public name -> name of the module inside ``package`` that defines it.

    Returns
    -------
    getattr, dir : callables
        To be bound as the package's ``__getattr__`` and ``__dir__`` (PEP 562).
    """

    def __getattr__(name: str) -> Any:
        module = exports.get(name)
        if module is None:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        value = getattr(importlib.import_module(f"{package}.{module}"), name)
        namespace[name] = value
        return value

    def __dir__() -> list[str]:
        return sorted(set(namespace) | set(exports))

    return __getattr__, __dir__
