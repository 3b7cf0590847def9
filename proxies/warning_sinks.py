"""Warnings raised by the science code, collected per thread.

``warnings.catch_warnings`` swaps process-wide state (``warnings.showwarning``, the filter
list) on entry and puts it back on exit, so two threads that use it at once mix up each
other's warnings, and an unlucky interleaving leaves a dead list installed for good (a run
on two threads then lost a date's warning on one run and kept it on the next). Here the
process-wide part is installed once, and each thread has its own sink:

- :func:`collected_warnings` gives the calling thread a list that receives every warning
  shown while it is open (nested: the innermost sink gets it);
- a warning shown in a thread with no open sink goes where it went before;
- ``UserWarning`` raised from :mod:`proxies` is always shown (never "once per location"), so a
  second run in the same process reports the same warnings as the first;
- :func:`quiet_warnings` drops warnings of a category shown in this thread (numpy's all-NaN
  reductions, say), in place of ``catch_warnings`` with ``simplefilter("ignore")``: the science
  code opens no ``catch_warnings`` block, so nothing puts the old state back under a running
  thread. (A filter that turns the category into an error still raises: filters act first.)
"""

from __future__ import annotations

import contextlib
import threading
import warnings
from typing import Iterator

__all__ = ["collected_warnings", "quiet_warnings"]

_LOCAL = threading.local()
_LOCK = threading.Lock()
_ALWAYS = ("always", None, UserWarning, None, 0)
_MODULES = r"proxies(\..*)?$"
_previous_show = warnings.showwarning


def _show(message, category, filename, lineno, file=None, line=None) -> None:
    if issubclass(category, getattr(_LOCAL, "quiet", ())):
        return
    sink = getattr(_LOCAL, "sink", None)
    if sink is None:
        _previous_show(message, category, filename, lineno, file, line)
    else:
        sink.append(str(message))


def _installed() -> bool:
    return warnings.showwarning is _show and any(
        f[0] == "always" and f[2] is UserWarning and f[3] is not None and f[3].pattern == _MODULES
        for f in warnings.filters)


def _install() -> None:
    """Route shown warnings to the thread's sink (again, if a test harness or a
    ``catch_warnings`` block of someone else's restored the previous state)."""
    global _previous_show
    with _LOCK:
        if _installed():
            return
        if warnings.showwarning is not _show:
            _previous_show = warnings.showwarning
            warnings.showwarning = _show
        warnings.filterwarnings("always", category=UserWarning, module=_MODULES)


@contextlib.contextmanager
def collected_warnings() -> Iterator[list[str]]:
    """The messages of the warnings shown in this thread while the block runs."""
    if not _installed():
        _install()
    previous = getattr(_LOCAL, "sink", None)
    sink: list[str] = []
    _LOCAL.sink = sink
    try:
        yield sink
    finally:
        _LOCAL.sink = previous


@contextlib.contextmanager
def quiet_warnings(category: type[Warning] = RuntimeWarning) -> Iterator[None]:
    """Drop the warnings of ``category`` shown in this thread while the block runs."""
    if not _installed():
        _install()
    previous = getattr(_LOCAL, "quiet", ())
    _LOCAL.quiet = (*previous, category)
    try:
        yield
    finally:
        _LOCAL.quiet = previous
