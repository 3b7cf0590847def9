"""Radiocarbon calibration curves: parsing, regular-grid interpolation and mixing.

A curve gives, for each calendar age theta [cal BP], the radiocarbon age mu(theta)
[14C yr BP] and its 1-sigma uncertainty sigma_c(theta) [14C yr], plus Delta14C and its sigma
[permil]. Curves are user-supplied files in the published five-column layout (cal BP,
14C age, sigma, Delta14C, sigma), e.g. IntCal20 (Reimer et al. 2020), SHCal20 (Hogg et al.
2020) or Marine20 (Heaton et al. 2020). downcore does not ship any curve.

This module is pure: it takes text or arrays. Reading files is done by
``pipelines.curvefiles.read_curve_file``.

References
----------
Reimer P et al. (2020). The IntCal20 Northern Hemisphere radiocarbon age calibration curve
(0-55 cal kBP). Radiocarbon 62(4), 725-757. doi:10.1017/RDC.2020.41
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np

from proxies.problems import InputError, Problem

__all__ = ["CalibrationCurve", "curve_from_table", "parse_curve_text", "blend_curves"]

_SEPARATOR = re.compile(r"[,;\s]+")
_FIX_LAYOUT = (
    "each data line needs five numbers: cal BP, 14C age, sigma, Delta14C, sigma "
    "(separated by commas or spaces); comment lines start with '#'"
)


@dataclass(frozen=True, eq=False)
class CalibrationCurve:
    """A calibration curve, rows sorted by increasing calendar age.

    Attributes
    ----------
    name : str
        Name of the curve (its key in ``[curves]``).
    cal_bp : ndarray of shape (n,)
        Calendar ages [cal BP], strictly increasing.
    c14_age : ndarray of shape (n,)
        Radiocarbon age mu(theta) [14C yr BP].
    c14_sigma : ndarray of shape (n,)
        1-sigma of the radiocarbon age [14C yr].
    delta14c : ndarray of shape (n,)
        Delta14C [permil] (NaN when unknown).
    delta14c_sigma : ndarray of shape (n,)
        1-sigma of Delta14C [permil] (NaN when unknown).
    """

    name: str
    cal_bp: np.ndarray
    c14_age: np.ndarray
    c14_sigma: np.ndarray
    delta14c: np.ndarray = field(default=None)
    delta14c_sigma: np.ndarray = field(default=None)

    def __post_init__(self):
        n = len(self.cal_bp)
        for key in ("cal_bp", "c14_age", "c14_sigma", "delta14c", "delta14c_sigma"):
            value = getattr(self, key)
            value = np.full(n, np.nan) if value is None else np.asarray(value, dtype=float)
            if value.shape != (n,):
                raise ValueError(f"curve {self.name!r}: column {key} has shape {value.shape}, expected ({n},)")
            value.setflags(write=False)
            object.__setattr__(self, key, value)
        if n < 2:
            raise ValueError(f"curve {self.name!r} needs at least two rows, got {n}")
        if np.any(np.diff(self.cal_bp) <= 0):
            raise ValueError(f"curve {self.name!r}: cal BP must be strictly increasing")

    @property
    def cal_range(self) -> tuple[float, float]:
        """(youngest, oldest) calendar age covered [cal BP]."""
        return float(self.cal_bp[0]), float(self.cal_bp[-1])

    @property
    def is_regular(self) -> bool:
        """True when the rows are equally spaced in calendar age."""
        steps = np.diff(self.cal_bp)
        return bool(np.allclose(steps, steps[0]))

    @property
    def step(self) -> float:
        """Calendar step [yr] of a regular curve (the smallest step otherwise)."""
        return float(np.min(np.diff(self.cal_bp)))

    def at(self, cal_bp) -> tuple[np.ndarray, np.ndarray]:
        """Radiocarbon age and sigma [14C yr] at calendar ages ``cal_bp`` [cal BP] (linear).

        Raises ``ValueError`` for calendar ages outside the curve.
        """
        cal_bp = np.asarray(cal_bp, dtype=float)
        lo, hi = self.cal_range
        if np.any((cal_bp < lo) | (cal_bp > hi)):
            raise ValueError(f"calendar ages outside curve {self.name!r} range {lo:g}-{hi:g} cal BP")
        return (np.interp(cal_bp, self.cal_bp, self.c14_age),
                np.interp(cal_bp, self.cal_bp, self.c14_sigma))

    def on_grid(self, step: float = 1.0) -> "CalibrationCurve":
        """The curve linearly interpolated onto a regular calendar grid.

        Parameters
        ----------
        step : float
            Grid step [yr], default 1.

        Returns
        -------
        CalibrationCurve
            A regular curve from the first grid point at or after the youngest row to the
            oldest row (grid points are multiples of ``step``).
        """
        if not step > 0:
            raise ValueError(f"grid step must be positive, got {step}")
        lo, hi = self.cal_range
        grid = np.arange(np.ceil(lo / step) * step, hi + step * 1e-9, step)
        if self.is_regular and np.isclose(self.step, step) and np.isclose(grid[0], lo):
            return self
        columns = [np.interp(grid, self.cal_bp, getattr(self, k))
                   for k in ("c14_age", "c14_sigma", "delta14c", "delta14c_sigma")]
        return CalibrationCurve(self.name, grid, *columns)

    def c14_range(self) -> tuple[float, float]:
        """(lowest, highest) radiocarbon age on the curve [14C yr BP]."""
        return float(self.c14_age.min()), float(self.c14_age.max())


def curve_from_table(name: str, table) -> CalibrationCurve:
    """Build a curve from an array of shape (n, 3) or (n, 5) in any row order.

    Columns: cal BP, 14C age, sigma[, Delta14C, sigma]. Rows are sorted by calendar age;
    duplicated calendar ages raise ``ValueError``.
    """
    table = np.asarray(table, dtype=float)
    if table.ndim != 2 or table.shape[1] not in (3, 5):
        raise ValueError(f"curve {name!r}: expected a table with 3 or 5 columns, got shape {table.shape}")
    order = np.argsort(table[:, 0], kind="stable")
    table = table[order]
    duplicated = table[1:, 0][np.diff(table[:, 0]) == 0]
    if duplicated.size:
        raise ValueError(f"curve {name!r}: calendar age {duplicated[0]:g} cal BP appears more than once")
    extra = (table[:, 3], table[:, 4]) if table.shape[1] == 5 else (None, None)
    return CalibrationCurve(name, table[:, 0], table[:, 1], table[:, 2], *extra)


def parse_curve_text(text: str, name: str, source: str = "<curve>") -> CalibrationCurve:
    """Parse a curve in the published five-column text layout.

    Lines starting with ``#`` (after optional spaces) and blank lines are ignored. Each data
    line holds five numbers separated by commas, semicolons, tabs or spaces: cal BP,
    14C age, sigma, Delta14C, sigma. Rows may come in any order.

    Parameters
    ----------
    text : str
        The file's content.
    name : str
        Curve name (its key in ``[curves]``).
    source : str
        Where the text came from (a file path), used in error messages.

    Raises
    ------
    proxies.problems.InputError
        Naming ``source`` and the 1-based line of every malformed line (at most 20 listed),
        negative sigmas, duplicated calendar ages, or fewer than two data lines.
    """
    problems: list[Problem] = []
    rows, lines = [], []
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip().lstrip("\ufeff")
        if not line or line.startswith("#"):
            continue
        fields = [f for f in _SEPARATOR.split(line) if f]
        try:
            values = [float(f) for f in fields]
        except ValueError:
            problems.append(Problem(source, f"not a number in {line[:60]!r}", _FIX_LAYOUT, row=number))
            continue
        if len(values) != 5:
            problems.append(Problem(source, f"{len(values)} values instead of 5 in {line[:60]!r}",
                                    _FIX_LAYOUT, row=number))
            continue
        if not np.all(np.isfinite(values)):
            problems.append(Problem(source, "non-finite value", _FIX_LAYOUT, row=number))
            continue
        if values[2] < 0 or values[4] < 0:
            problems.append(Problem(source, "negative sigma", "sigmas (columns 3 and 5) must be >= 0",
                                    row=number))
            continue
        rows.append(values)
        lines.append(number)
    if len(problems) > 20:
        problems = problems[:20] + [Problem(source, f"... and {len(problems) - 20} more malformed lines")]
    if not problems and len(rows) < 2:
        problems.append(Problem(source, f"only {len(rows)} data lines found", _FIX_LAYOUT))
    if not problems:
        table = np.array(rows)
        order = np.argsort(table[:, 0], kind="stable")
        same = np.flatnonzero(np.diff(table[order, 0]) == 0)
        for k in same[:20]:
            problems.append(Problem(source, f"calendar age {table[order[k + 1], 0]:g} cal BP repeats line "
                                            f"{lines[order[k]]}", "keep one row per calendar age",
                                    row=lines[order[k + 1]]))
    if problems:
        raise InputError(problems)
    return curve_from_table(name, np.array(rows))


def blend_curves(base: CalibrationCurve, admixture: CalibrationCurve, admixture_share: float,
                 name: str | None = None, step: float = 1.0) -> CalibrationCurve:
    """Mixture of two curves for a sample with two carbon sources (common practice).

    ``mu = (1 - p) mu_1 + p mu_2``; ``sigma = sqrt((1 - p)^2 sigma_1^2 + p^2 sigma_2^2)``
    (the two curves' errors taken as independent), on a regular grid of ``step`` [yr]
    over the calendar range common to both curves.

    Parameters
    ----------
    base, admixture : CalibrationCurve
        The curve of the main carbon source and of the admixed one (e.g. a marine curve for a
        lake with a marine carbon share).
    admixture_share : float
        Fraction p of carbon from ``admixture``, in [0, 1].
    """
    first, second = base, admixture
    p = float(admixture_share)
    if not 0.0 <= p <= 1.0:
        raise ValueError(f"mixture proportion must be in [0, 1], got {p}")
    lo = max(first.cal_range[0], second.cal_range[0])
    hi = min(first.cal_range[1], second.cal_range[1])
    if not hi > lo:
        raise ValueError(f"curves {first.name!r} and {second.name!r} do not overlap in calendar age")
    grid = np.arange(np.ceil(lo / step) * step, hi + step * 1e-9, step)
    mu1, s1 = first.at(grid)
    mu2, s2 = second.at(grid)
    mu = (1 - p) * mu1 + p * mu2
    sigma = np.hypot((1 - p) * s1, p * s2)
    from proxies.chronology.radiocarbon import delta14c_from_age
    delta = delta14c_from_age(mu, grid)
    name = name or f"{first.name}+{p:g}*{second.name}"
    return CalibrationCurve(name, grid, mu, sigma, delta, np.full_like(grid, np.nan))
