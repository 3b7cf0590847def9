"""One table cell -> number, true/false or text, by one strict grammar.

Numbers (every numeric column of every table): an optional sign, digits with at most one
decimal point, an optional exponent (``1.5e3``). Nothing else is a number, in particular

- ``107_5`` (Python's ``float()`` would read 1075): underscores are refused;
- ``7,041``: a thousands separator or a decimal comma? It is refused as *ambiguous*, naming
  both readings, never silently converted; ``7,04`` (not three digits after the comma) is a
  decimal comma; ``1.234,5`` a decimal comma with thousands points;
- ``1 234``: blanks inside a number are refused; ``inf`` is refused.

Empty cells and ``NA``, ``NaN``, ``n/a`` (any case) are missing values. Spreadsheet and
parquet cells that are already numbers (including ``decimal.Decimal``) are taken as stored.
"""

from __future__ import annotations

import decimal
import math
import re
from typing import Any

import numpy as np
import pandas as pd

__all__ = ["BadCell", "cell_to_float", "cell_to_text", "parse_bool", "MISSING_MARKERS"]

#: text cells read as a missing value (besides empty cells)
MISSING_MARKERS = frozenset({"na", "nan", "n/a"})
TRUE_WORDS = frozenset({"true", "yes", "1", "y"})
FALSE_WORDS = frozenset({"false", "no", "0", "n"})
_NUMBER = re.compile(r"[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?")
_THOUSANDS = re.compile(r"[-+]?\d{1,3}(?:,\d{3})+(?:\.\d+)?")
_DECIMAL_COMMA = re.compile(r"[-+]?(?:\d{1,3}(?:\.\d{3})+|\d*),\d+")


class BadCell(ValueError):
    """A cell that is not what its column needs; the message says why."""


def _text_to_float(cell: str) -> float:
    text = cell.strip()
    if text == "" or text.lower() in MISSING_MARKERS:
        return math.nan
    if _NUMBER.fullmatch(text):
        value = float(text)
        if not math.isfinite(value):
            raise BadCell(f"{cell!r} is too large to be a number")
        return value
    if _THOUSANDS.fullmatch(text):
        plain = text.replace(",", "")
        raise BadCell(f"{cell!r} is ambiguous: a thousands separator ({plain}) or a decimal comma "
                      f"({text.replace(',', '.', 1) if text.count(',') == 1 else '?'})")
    if _DECIMAL_COMMA.fullmatch(text):
        raise BadCell(f"{cell!r} uses a decimal comma")
    if "_" in text and _NUMBER.fullmatch(text.replace("_", "")):
        raise BadCell(f"{cell!r} has an underscore inside the number")
    if re.fullmatch(r"[-+]?[\d.,]+(?:\s+[\d.,]+)+", text):
        raise BadCell(f"{cell!r} has blanks inside the number")
    if text.lower().lstrip("+-") in ("inf", "infinity"):
        raise BadCell(f"{cell!r} is not a finite number")
    raise BadCell(f"{cell!r} is not a number")


def cell_to_float(cell: Any) -> float:
    """A cell as float; NaN for missing.

    Raises
    ------
    BadCell
        The cell is not a number by the grammar of this module.
    """
    if cell is None:
        return math.nan
    if isinstance(cell, (bool, np.bool_)):
        raise BadCell(f"{cell!r} is a true/false value, not a number")
    if isinstance(cell, (int, float, np.integer, np.floating, decimal.Decimal)):
        if isinstance(cell, decimal.Decimal) and cell.is_nan():
            return math.nan
        value = float(cell)
        if math.isinf(value):
            raise BadCell("infinite value")
        return value
    if isinstance(cell, str):
        return _text_to_float(cell)
    if pd.isna(cell):
        return math.nan
    raise BadCell(f"{cell!r} ({type(cell).__name__}) is not a number")


def parse_bool(cell: Any) -> bool | None:
    """Read a true/false cell: true/false, yes/no, 1/0 (any case); empty -> False.

    Returns ``None`` when the cell is not one of those.
    """
    if cell is None or (isinstance(cell, float) and math.isnan(cell)):
        return False
    if isinstance(cell, (bool, np.bool_)):
        return bool(cell)
    if isinstance(cell, (int, float, np.integer, np.floating)):
        return {1.0: True, 0.0: False}.get(float(cell))
    if isinstance(cell, str):
        text = cell.strip().lower()
        if text == "":
            return False
        if text in TRUE_WORDS:
            return True
        if text in FALSE_WORDS:
            return False
    return None


def cell_to_text(cell: Any) -> str | None:
    """A text cell stripped of blanks; ``None`` for empty; ``12.0`` read as ``"12"``."""
    if cell is None or (isinstance(cell, float) and math.isnan(cell)):
        return None
    if isinstance(cell, float) and cell.is_integer():
        return str(int(cell))
    text = str(cell).strip()
    return text or None
