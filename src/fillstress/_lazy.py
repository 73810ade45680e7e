"""A package's public names loaded from their modules on first use (PEP 562)."""
from __future__ import annotations

import importlib


def lazy_getattr(package: str, names: dict[str, str], namespace: dict):
    """A module ``__getattr__`` for `package`: the first access of `name` imports the
    module ``names[name]`` (relative to `package`) and keeps the value in `namespace`.

    Examples
    --------
    >>> space = {}
    >>> get = lazy_getattr("fillstress", {"InputError": "errors"}, space)
    >>> get("InputError").__name__, list(space)
    ('InputError', ['InputError'])
    """
    def __getattr__(name: str):
        if name not in names:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        value = getattr(importlib.import_module(f".{names[name]}", package), name)
        namespace[name] = value
        return value

    return __getattr__


# extra → (modules it installs, what needs it)
EXTRAS = {"dask": ("dask", "distributed"), "view": ("pyvista", "vtk")}


def installed(module: str) -> bool:
    """Whether `module` can be imported, found without importing it (a None entry in
    sys.modules blocks an import, as tests do to stand for a missing package)."""
    import importlib.util
    import sys
    if module in sys.modules:
        return sys.modules[module] is not None
    return importlib.util.find_spec(module) is not None


def require_extra(extra: str, **where) -> None:
    """InputError naming the optional `extra` when one of its modules is not installed;
    `where` (argument=, or file= and key=) says what asked for it.

    Examples
    --------
    >>> require_extra("view", argument="view") if installed("pyvista") else None
    """
    from .errors import InputError
    for name in EXTRAS[extra]:
        if not installed(name):
            raise InputError(f"needs the '{extra}' extra (pip install 'fillstress[{extra}]'); "
                             f"{name} is not installed", **where)
