"""One declarative mechanism for every run-config section's settings.

Each key of a section is a field of a frozen dataclass declared with :func:`setting`, which
states the key's type, bounds, choices, default and documentation once (in the spirit of
scikit-learn's parameter constraints). :func:`settings_from_mapping` validates a TOML section
against those declarations and reports every problem at once; :func:`settings_rows` lists the
declarations for documentation (the README's key tables are checked against it by a test).

Example
-------
>>> from dataclasses import dataclass
>>> @dataclass(frozen=True)
... class Demo:
...     step_yr: float = setting(50.0, "grid step [yr]", low=0.0, low_open=True)
>>> settings_from_mapping(Demo, {"step_yr": 20}, "run.toml [demo]")
Demo(step_yr=20.0)
"""

from __future__ import annotations

import difflib
from dataclasses import MISSING, dataclass, field, fields
from typing import Any, Callable, ClassVar, Mapping, TypeVar

from proxies.problems import InputError, Problem

__all__ = ["Rule", "DeclaredSection", "setting", "settings_from_mapping", "settings_rows", "did_you_mean"]

T = TypeVar("T")

#: kinds a key can have: a scalar type, or a list of one (written ``"list[float]"``, ...)
KINDS = (float, int, bool, str, "list[float]", "list[str]", "pair[float]")


@dataclass(frozen=True)
class Rule:
    """What one key accepts.

    Attributes
    ----------
    kind : type or str
        ``float``, ``int``, ``bool``, ``str``, ``"list[float]"`` (non-empty), ``"list[str]"``
        or ``"pair[float]"`` (exactly two numbers).
    doc : str
        One sentence with units.
    low, high : float or None
        Bounds of the value (of every element of a list).
    low_open, high_open : bool
        Whether the bound itself is excluded.
    choices : tuple or None
        The allowed values (for ``str`` keys).
    auto : bool
        ``"auto"`` is accepted and stored as ``None``.
    nullable : bool
        The default is ``None`` (not given); a value must still satisfy the rule.
    example : str
        A valid value as written in TOML, for the fix of a problem.
    """

    kind: Any
    doc: str
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    high_open: bool = False
    choices: tuple | None = None
    auto: bool = False
    nullable: bool = False
    example: str = ""

    def bounds_text(self) -> str:
        """The allowed range in words, e.g. ``"> 0 and <= 0.5"`` ('' without bounds)."""
        parts = []
        if self.low is not None:
            parts.append(f"{'>' if self.low_open else '>='} {self.low:g}")
        if self.high is not None:
            parts.append(f"{'<' if self.high_open else '<='} {self.high:g}")
        return " and ".join(parts)


def setting(default: Any, doc: str, *, kind: Any = None, low: float | None = None,
            high: float | None = None, low_open: bool = False, high_open: bool = False,
            choices: tuple | None = None, auto: bool = False, example: str = ""):
    """Declare one key of a settings dataclass (returns a :func:`dataclasses.field`).

    ``kind`` defaults to the type of ``default`` (``tuple`` defaults become lists of that
    element's type). See :class:`Rule` for the other arguments.
    """
    if kind is None:
        kind = _kind_of(default, choices)
    rule = Rule(kind, doc, low, high, low_open, high_open,
                tuple(choices) if choices is not None else None, auto,
                nullable=default is None, example=example or _example(default, kind, choices))
    return field(default=default, metadata={"rule": rule})


def _kind_of(default: Any, choices) -> Any:
    if choices is not None:
        return str
    if isinstance(default, bool):
        return bool
    if isinstance(default, tuple):
        return "list[str]" if default and isinstance(default[0], str) else "list[float]"
    if default is None:
        raise TypeError("a key whose default is None needs an explicit kind")
    return type(default)


def _example(default: Any, kind: Any, choices) -> str:
    if choices:
        return f'"{choices[0]}"'
    if isinstance(default, bool):
        return "true" if default else "false"
    if isinstance(default, tuple):
        return "[" + ", ".join(f'"{v}"' if isinstance(v, str) else f"{v:g}" for v in default) + "]"
    if isinstance(default, str):
        return f'"{default}"'
    if isinstance(default, (int, float)):
        return f"{default:g}"
    return {"list[str]": '["name"]', "list[float]": "[1, 2]", "pair[float]": "[1, 2]",
            str: '"name"', float: "1", int: "1"}.get(kind, "")


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _in_bounds(rule: Rule, value: float) -> bool:
    if rule.low is not None and (value <= rule.low if rule.low_open else value < rule.low):
        return False
    if rule.high is not None and (value >= rule.high if rule.high_open else value > rule.high):
        return False
    return value == value  # NaN is never in bounds


def convert(key: str, rule: Rule, value: Any, where: str) -> Any:
    """The TOML value of ``key`` converted to its stored form, or the :class:`Problem` with it."""
    fix = f"e.g. {key} = {rule.example}"

    def problem(message: str) -> Problem:
        return Problem(where, message, fix, column=key)

    if rule.auto and value == "auto":
        return None
    kind = rule.kind
    if kind is bool:
        return value if isinstance(value, bool) else problem(f"'{key}' must be true or false, got {value!r}")
    if kind is str:
        if not isinstance(value, str) or not value:
            return problem(f"'{key}' must be a non-empty text, got {value!r}")
        if rule.choices is not None and value not in rule.choices:
            near = did_you_mean(value, rule.choices)
            return Problem(where, f"'{key}' = {value!r} is not one of {', '.join(map(str, rule.choices))}",
                           near or fix, column=key)
        return value
    if kind == "list[str]":
        if not (isinstance(value, list) and all(isinstance(v, str) and v for v in value)):
            return problem(f"'{key}' must be a list of names, got {value!r}")
        return tuple(value)
    if kind in ("list[float]", "pair[float]"):
        size_ok = len(value) == 2 if kind == "pair[float]" and isinstance(value, list) else bool(value)
        if not (isinstance(value, list) and size_ok and all(_is_number(v) for v in value)):
            what = "a pair of numbers" if kind == "pair[float]" else "a non-empty list of numbers"
            return problem(f"'{key}' must be {what}, got {value!r}")
        if not all(_in_bounds(rule, float(v)) for v in value):
            return problem(f"'{key}' = {value!r} is out of range; every value must be {rule.bounds_text()}")
        return tuple(float(v) for v in value)
    ok = isinstance(value, int) and not isinstance(value, bool) if kind is int else _is_number(value)
    if not ok:
        what = "an integer" if kind is int else "a number"
        extra = ' or "auto"' if rule.auto else ""
        return problem(f"'{key}' must be {what}{extra}, got {value!r}")
    value = kind(value)
    if not _in_bounds(rule, value):
        return problem(f"'{key}' = {value:g} is out of range; it must be {rule.bounds_text()}")
    return value


def did_you_mean(word: str, known) -> str:
    """``"did you mean 'x'?"`` for the closest known word, or ``''``."""
    close = difflib.get_close_matches(str(word), [str(k) for k in known], n=1, cutoff=0.6)
    if not close:
        lowered = {str(k).lower(): str(k) for k in known}
        close = [lowered[str(word).lower()]] if str(word).lower() in lowered else []
    return f"did you mean '{close[0]}'?" if close else ""


def settings_from_mapping(cls: type[T], mapping: Mapping[str, Any] | None, where: str,
                          cross_check: Callable[[dict], list[Problem]] | None = None) -> T:
    """Validate a TOML section against the declarations of ``cls`` and build it.

    Parameters
    ----------
    cls : dataclass type
        Settings class whose fields are declared with :func:`setting`.
    mapping : mapping or None
        The section as read from TOML (``None``: all defaults).
    where : str
        Where the section is, e.g. ``"run.toml [events]"`` (the problem's file).
    cross_check : callable, optional
        ``cross_check(values)`` returns problems that involve several keys.

    Raises
    ------
    InputError
        Naming every unknown key (with a "did you mean"), wrong type or out-of-range value
        (``column`` = key), in the order of the section.
    """
    if mapping is not None and not isinstance(mapping, Mapping):
        raise InputError([Problem(where, f"the section must be a table of keys, got {type(mapping).__name__}",
                                  "write it as [section] followed by key = value lines")])
    rules = {f.name: f.metadata["rule"] for f in fields(cls) if "rule" in f.metadata}
    problems: list[Problem] = []
    values: dict[str, Any] = {}
    retired = getattr(cls, "RETIRED_KEYS", {})
    for key, value in dict(mapping or {}).items():
        if key in retired and key not in rules:
            problems.append(Problem(where, f"unknown key '{key}': it was removed", retired[key], column=key))
            continue
        if key not in rules:
            near = did_you_mean(key, rules)
            problems.append(Problem(where, f"unknown key '{key}'",
                                    near or f"use one of: {', '.join(sorted(rules))}", column=key))
            continue
        checked = convert(key, rules[key], value, where)
        if isinstance(checked, Problem):
            problems.append(checked)
        else:
            values[key] = checked
    if cross_check is not None:
        problems.extend(cross_check({**defaults_of(cls), **values}))
    if problems:
        raise InputError(problems)
    return cls(**values)


def defaults_of(cls) -> dict[str, Any]:
    """Every declared key's default value."""
    return {f.name: f.default for f in fields(cls) if f.default is not MISSING}


def settings_rows(cls) -> list[dict[str, str]]:
    """One row per declared key: ``key``, ``default`` (as written in TOML), ``allowed``, ``doc``."""
    rows = []
    for f in fields(cls):
        rule = f.metadata.get("rule")
        if rule is None:
            continue
        allowed = rule.bounds_text()
        if rule.choices:
            allowed = " | ".join(map(str, rule.choices))
        if rule.auto:
            allowed = ("auto or " + allowed).strip()
        default = "auto" if f.default is None and rule.auto else \
            ("(none)" if f.default is None else _example(f.default, rule.kind, None))
        rows.append({"key": f.name, "default": default, "allowed": allowed, "doc": rule.doc})
    return rows


class DeclaredSection:
    """Base of a run-config section's settings dataclass declared with :func:`setting`.

    Subclasses name their ``SECTION`` and may override :meth:`cross_check` for rules that
    involve several keys; :meth:`from_mapping` is the one validating constructor.
    """

    SECTION: ClassVar[str] = ""
    #: Keys of earlier versions that were removed -> what to do instead (the message a
    #: config still using one gets).
    RETIRED_KEYS: ClassVar[dict[str, str]] = {}

    @classmethod
    def cross_check(cls, values: dict, where: str) -> list[Problem]:
        """Problems that involve several keys (``values``: every key, defaults filled in)."""
        return []

    @classmethod
    def from_mapping(cls, mapping: Mapping[str, Any] | None = None, where: str | None = None):
        """Validate the TOML section and build the settings.

        Raises
        ------
        proxies.problems.InputError
            Naming every unknown key, wrong type or out-of-range value (``column`` = key).
        """
        where = where or f"[{cls.SECTION}]"
        return settings_from_mapping(cls, mapping, where, lambda values: cls.cross_check(values, where))
