"""Building a stage's settings from its TOML section, with every problem reported at once.

Each stage's ``XxxSettings.from_mapping`` names its own per-key check; the loop over the
section, the unknown-key problem and the single :class:`~proxies.problems.InputError` are
shared here.
"""

from __future__ import annotations

from dataclasses import fields
from typing import Any, Callable, Mapping, TypeVar

from proxies.problems import InputError, Problem

__all__ = ["settings_from_mapping"]

T = TypeVar("T")


def settings_from_mapping(cls: type[T], mapping: Mapping[str, Any] | None, where: str,
                          check: Callable[[str, Any], Any],
                          cross_check: Callable[[dict], list[Problem]] | None = None) -> T:
    """Validate a TOML section and build the frozen settings dataclass ``cls``.

    Parameters
    ----------
    cls : dataclass type
        The settings class; its field names are the allowed keys.
    mapping : mapping or None
        The section as read from TOML (``None``: all defaults).
    where : str
        Where the section is, e.g. ``"run.toml [events]"`` (the problem's file).
    check : callable
        ``check(key, value)`` returns the converted value, or a :class:`Problem`.
    cross_check : callable, optional
        ``cross_check(values)`` returns problems that involve several keys.

    Raises
    ------
    InputError
        Naming every unknown key, wrong type or out-of-range value (``column`` = key).
    """
    known = {f.name for f in fields(cls)}
    problems: list[Problem] = []
    values: dict[str, Any] = {}
    for key, value in dict(mapping or {}).items():
        if key not in known:
            problems.append(Problem(where, f"unknown key '{key}'", f"use one of: {', '.join(sorted(known))}",
                                    column=key))
            continue
        checked = check(key, value)
        if isinstance(checked, Problem):
            problems.append(checked)
        else:
            values[key] = checked
    if cross_check is not None:
        problems.extend(cross_check(values))
    if problems:
        raise InputError(problems)
    return cls(**values)
