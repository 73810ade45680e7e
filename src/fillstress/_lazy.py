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
