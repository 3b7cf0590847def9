"""Settings of one dated series: a ``[series.<name>]`` table of the run config.

A dated series is a table of age and value (a published ice-core, speleothem or marine
record, another lab's reconstruction) that enters the run's events, stack and lead/lag like a
core's record. Its age uncertainty is stated, not modelled: a one-sigma error
``age_sd_yr + age_sd_fraction * age`` [yr], or a given age ensemble (``ensemble_file``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from proxies.problems import Problem
from proxies.settings_spec import DeclaredSection, setting

__all__ = ["SeriesSettings"]


@dataclass(frozen=True)
class SeriesSettings(DeclaredSection):
    """One ``[series.<name>]`` table (one attribute per key).

    ``age_column`` / ``value_column`` are header names (case-insensitive) or 1-based column
    numbers written as text (``"1"``). Without ``ensemble_file`` the age error of member ``m``
    is ``z_m (age_sd_yr + age_sd_fraction * age)`` with one standard normal ``z_m`` per member
    (fully correlated along the record, see :mod:`proxies.reconstruction.dated`). With
    ``ensemble_file``, that table holds one row per kept row of the series (same order, by
    age) and one column per member [yr BP, in ``age_units``].
    """

    SECTION: ClassVar[str] = "series"

    file: str | None = setting(None, "the table of age and value (text: csv, tab or blank separated), "
                               "relative to the run config (required)", kind=str, example='"records/site.csv"')
    age_column: str = setting("1", "header name or 1-based column number of the age column")
    value_column: str = setting("2", "header name or 1-based column number of the value column")
    age_units: str = setting("yr", "units of the ages, before present (1950 CE)", choices=("yr", "kyr"))
    section: int = setting(1, "which section (1-based) of a file with several header lines", low=1)
    variable: str | None = setting(None, "climate variable of the values (default: the series name); "
                                   "records of one variable are stacked together", kind=str,
                                   example='"temperature"')
    units: str = setting("", "units of the values (e.g. degC, percent)")
    age_sd_yr: float = setting(0.0, "constant part of the one-sigma age error [yr]", low=0.0)
    age_sd_fraction: float = setting(0.0, "part of the one-sigma age error proportional to age "
                                     "(0.01 = 1 % of the age)", low=0.0, high=1.0)
    ensemble_file: str | None = setting(None, "a given age ensemble: one row per kept row of the series, "
                                        "one column per member (replaces age_sd_yr / age_sd_fraction)",
                                        kind=str, example='"records/site_ages.csv"')
    grid_step_yr: float | None = setting(None, "grid step [yr]; auto: the record's median spacing "
                                         "rounded to a standard step", kind=float, low=0.0, low_open=True,
                                         auto=True)

    @classmethod
    def cross_check(cls, values: dict, where: str) -> list[Problem]:
        problems = []
        if values["file"] is None:
            problems.append(Problem(where, "required key 'file' is missing", 'add file = "path/to/table.csv" '
                                    "(relative to the run config)", column="file"))
        if values["ensemble_file"] is not None and (values["age_sd_yr"] or values["age_sd_fraction"]):
            problems.append(Problem(where, "both an age ensemble and a stated age error are given",
                                    "keep ensemble_file or age_sd_yr / age_sd_fraction, not both",
                                    column="ensemble_file"))
        return problems

    def column(self, which: str) -> str | int:
        """``age_column`` or ``value_column`` as the reader takes it (a number -> int)."""
        text = getattr(self, which).strip()
        return int(text) if text.isdigit() else text
