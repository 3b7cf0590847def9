"""The run's one way of writing a time: UTC, to the second (manifest, run lock)."""

from __future__ import annotations

import datetime as _dt

__all__ = ["utc_now"]


def utc_now() -> str:
    """The time now, UTC, to the second (``2026-12-02T14:36:47Z``)."""
    return _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
