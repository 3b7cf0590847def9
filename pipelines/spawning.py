"""Spawning helper processes without running the user's main script again.

``multiprocessing``'s spawn start method imports the parent's main script in every child it
starts (as ``__mp_main__``), so a user's script without a ``__main__`` guard would start its
run a second time, and a large script costs its imports again. downcore's helper processes
(the report helper, the science workers) need nothing from the main script:
:func:`main_script_not_rerun` hides it while they are started.
"""

from __future__ import annotations

import contextlib
import sys
from typing import Iterator

__all__ = ["main_script_not_rerun"]


@contextlib.contextmanager
def main_script_not_rerun() -> Iterator[None]:
    """While processes are spawned: hide the main script's ``__file__`` and ``__spec__`` from
    multiprocessing (restored afterwards)."""
    main = sys.modules.get("__main__")
    saved = {name: getattr(main, name) for name in ("__file__", "__spec__") if hasattr(main, name)}
    try:
        for name in saved:
            if name == "__spec__":
                main.__spec__ = None
            else:
                delattr(main, name)
        yield
    finally:
        for name, value in saved.items():
            setattr(main, name, value)
