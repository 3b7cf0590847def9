"""Lazy re-exports for the science sub-packages (PEP 562).

``from proxies.calibration import WA`` works as usual, but importing a sub-package no longer
imports every module in it: a name is imported the first time it is used. The command line
and the pipelines read settings and look finished work up without paying for scipy.stats
or scikit-learn (about a second per process, measured).
"""

from __future__ import annotations

import importlib
from typing import Any, Callable


def lazy_exports(package: str, modules: dict[str, str]) -> tuple[Callable[[str], Any], Callable[[], list[str]], list[str]]:
    """Return ``(__getattr__, __dir__, __all__)`` for ``package``.

    Parameters
    ----------
    package : str
        The package's ``__name__``.
    modules : dict of str to str
        Module (absolute, or relative to ``package`` when it starts with '.') -> the public
        names it gives, separated by white space.
    """
    exports = {name: module for module, names in modules.items() for name in names.split()}
    public = sorted(exports)

    def __getattr__(name: str) -> Any:
        module = exports.get(name)
        if module is None:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        return getattr(importlib.import_module(module, package), name)

    def __dir__() -> list[str]:
        return list(public)

    return __getattr__, __dir__, public
