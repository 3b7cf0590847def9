"""Names of ensemble members in tables: one column per member, ``m0000``, ``m0001``, ...

A quantity with uncertainty travels as an array whose last axis is the member (see
DEVELOPERS.md, "Conventions"); written as a table, member ``m`` becomes column ``m{m:04d}``.
The run-folder schema (:mod:`pipelines.outputs_tables`) declares that family with
:data:`MEMBER_COLUMN_PATTERN`.
"""

from __future__ import annotations

import re
from typing import Iterable

__all__ = ["MEMBER_COLUMN_PATTERN", "member_column_names", "member_columns_of"]

#: regular expression of a member column name
MEMBER_COLUMN_PATTERN = r"m\d{4}"


def member_column_names(n_members: int) -> list[str]:
    """Column names of ``n_members`` ensemble members: ``m0000, m0001, ...``.

    Examples
    --------
    >>> member_column_names(3)
    ['m0000', 'm0001', 'm0002']
    """
    return [f"m{m:04d}" for m in range(n_members)]


def member_columns_of(columns: Iterable[object]) -> list[str]:
    """The member columns among ``columns`` (e.g. a DataFrame's), in their order.

    Examples
    --------
    >>> member_columns_of(["age_cal_bp", "m0000", "m0001", "quantity"])
    ['m0000', 'm0001']
    """
    return [str(c) for c in columns if re.fullmatch(MEMBER_COLUMN_PATTERN, str(c))]
