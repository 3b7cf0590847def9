"""Problems found in user input, and the exception that carries them.

Validation collects every problem in one pass; each names where it is (file, row, column),
what is wrong and how to fix it. Row numbers are the 1-based line numbers a user sees in a
spreadsheet or text editor, counting the header as line 1 (so the first data row is row 2).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Problem", "InputError", "format_problems"]


@dataclass(frozen=True)
class Problem:
    """One defect in the input.

    Attributes
    ----------
    file : str
        The file (as given by the user, or relative to the core folder) where it is.
    message : str
        What is wrong, in plain words.
    fix : str
        How to fix it.
    row : int or None
        1-based line number in the file (header = 1), or ``None`` when not row-specific.
    column : str or None
        Column or key name, or ``None``.
    """

    file: str
    message: str
    fix: str = ""
    row: int | None = None
    column: str | None = None

    def location(self) -> str:
        parts = [self.file]
        if self.row is not None:
            parts.append(f"row {self.row}")
        if self.column is not None:
            parts.append(f"column '{self.column}'")
        return ", ".join(parts)

    def __str__(self) -> str:
        text = f"{self.location()}: {self.message}"
        if self.fix:
            text += f" -- fix: {self.fix}"
        return text


def format_problems(problems: list[Problem]) -> str:
    """One line per problem, in the order found."""
    return "\n".join(str(p) for p in problems)


class InputError(ValueError):
    """Bad user input; carries every :class:`Problem` found.

    The command line prints ``str(error)`` (never a traceback) and exits non-zero.
    """

    def __init__(self, problems: list[Problem] | Problem):
        if isinstance(problems, Problem):
            problems = [problems]
        self.problems = list(problems)
        super().__init__(format_problems(self.problems))
