"""A package's names imported on first use (PEP 562), so that a verb loads only what it needs.

Ground floor: imported by any layer, imports nothing of the package.
"""

from __future__ import annotations

import importlib

__all__ = ["lazy_names"]


def lazy_names(package: str, table: dict, namespace: dict):
    """``__getattr__`` and ``__dir__`` for a package whose names live in other modules.

    Parameters
    ----------
    package : str
        The package's ``__name__`` (for the error message).
    table : dict
        ``{module: (name, ...)}``: where each name is defined.
    namespace : dict
        The package's ``globals()``; a name is kept there once imported.

    Returns
    -------
    (callable, callable)
        The module-level ``__getattr__`` and ``__dir__`` (PEP 562).

    Examples
    --------
    >>> ns = {}
    >>> get, _ = lazy_names("demo", {"math": ("pi",)}, ns)
    >>> round(get("pi"), 4), "pi" in ns
    (3.1416, True)
    """
    home = {name: mod for mod, names in table.items() for name in names}

    def __getattr__(name):
        mod = home.get(name)
        if mod is None:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        value = getattr(importlib.import_module(mod), name)
        namespace[name] = value
        return value

    def __dir__():
        return sorted(set(namespace) | set(home))

    return __getattr__, __dir__
