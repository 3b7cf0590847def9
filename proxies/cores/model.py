"""The core data model: one sediment core, its sections, event layers and tables.

A :class:`Core` is what :func:`pipelines.ingest.load_core` returns after validation: tables
already in cm of composite depth, in file order, each with the 1-based file row of every
record in a ``source_row`` column (header = row 1).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd
from pandas.api.types import is_bool_dtype, is_numeric_dtype

from proxies.cores.depth import DepthScale, EventLayer, Section

__all__ = ["CoreIdentity", "Core", "NON_PROXY_COLUMNS", "ERROR_SUFFIX"]

#: sample/count columns that are never proxies or taxa
NON_PROXY_COLUMNS = frozenset(
    {"depth_cm", "thickness_cm", "section", "section_depth_cm", "source_row", "label"}
)
#: suffix of a proxy's 1-sigma analytical error column (same units as the proxy)
ERROR_SUFFIX = "_error"

#: year CE that is 0 cal BP
BP_ZERO_CE = 1950


@dataclass(frozen=True, eq=False)  # a Core compares by identity (its tables are not compared)
class CoreIdentity:
    """What names, places and dates a core's top: the ``[core]`` keys of ``core.toml``, shared
    by :class:`Core` and the parsed file (:class:`proxies.cores.core_file.CoreSpec`).

    Attributes
    ----------
    id : str
        Core identifier (letters, digits, ``-``, ``_``).
    archive : str
        ``lake``, ``marine``, ``peat``, ``speleothem`` or ``other``.
    latitude, longitude : float
        Site position [decimal degrees].
    collected_ce : int
        Year CE the core was taken [yr CE].
    site : str
        Free-text site description (may be empty).
    top_age_error : float or None
        1-sigma uncertainty of the core-top age [yr], or ``None`` when not given.
    """

    id: str
    archive: str
    latitude: float
    longitude: float
    collected_ce: int
    site: str
    top_age_error: float | None


@dataclass(frozen=True, eq=False)
class Core(CoreIdentity):
    """One validated sediment core: its identity (:class:`CoreIdentity`) and its tables.

    Attributes
    ----------
    samples : DataFrame
        ``depth_cm`` (composite), optional ``thickness_cm``, ``section``,
        ``section_depth_cm``, one float column per proxy, optional ``<proxy>_error``, and
        ``source_row``.
    dates : DataFrame
        ``label``, ``depth_cm``, ``kind``, ``age``, ``error``, ``thickness_cm``, ``curve``,
        ``reservoir_offset``, ``reservoir_error``, ``exclude`` (bool), ``source_row`` and any
        extra text columns of the file.
    counts : DataFrame or None
        ``depth_cm``, one float column per taxon, ``source_row``.
    sections : tuple of Section
    event_layers : tuple of EventLayer
        Sorted by depth.
    hiatuses_cm : tuple of float
        Composite depths of hiatuses [cm], sorted.
    folder : str
        The core folder as given.
    files : dict of str to str
        ``samples``/``dates``/``counts`` -> the file as problems name it
        (``<folder>/dates.csv``).
    top_intact : bool or None
        ``core.toml``'s ``top_intact``: ``True`` when the core top is the sediment surface of
        the collection year, ``False`` for a lost or older top; ``None`` when not given (the
        run's ``[chronology] core_top`` decides).
    lead210 : DataFrame or None
        The optional 210Pb table (:mod:`proxies.cores.lead210`): ``depth_cm``,
        ``dry_mass_g_cm2``, ``pb210_bq_kg``, ``pb210_error``, optional ``ra226_bq_kg``,
        ``ra226_error``, ``source_row``.
    """

    samples: pd.DataFrame = field(repr=False)
    dates: pd.DataFrame = field(repr=False)
    counts: pd.DataFrame | None = field(repr=False)
    sections: tuple[Section, ...] = ()
    event_layers: tuple[EventLayer, ...] = ()
    hiatuses_cm: tuple[float, ...] = ()
    folder: str = ""
    files: dict = field(default_factory=dict, repr=False)
    top_intact: bool | None = None
    lead210: pd.DataFrame | None = field(default=None, repr=False)

    @property
    def top_age_cal_bp(self) -> float:
        """Age of the core top [cal BP]: ``1950 - collected_ce`` (negative after 1950 CE)."""
        return float(BP_ZERO_CE - self.collected_ce)

    @property
    def depth_scale(self) -> DepthScale:
        """The core's :class:`~proxies.cores.depth.DepthScale`."""
        return DepthScale(self.sections, self.event_layers, self.hiatuses_cm)

    @property
    def proxy_columns(self) -> tuple[str, ...]:
        """Numeric sample columns that are proxies, in file order.

        Excludes depth, thickness, section, ``source_row`` and ``*_error`` columns.
        """
        return _value_columns(self.samples)

    def error_column(self, proxy: str) -> str | None:
        """Name of the 1-sigma analytical-error column of ``proxy``, or ``None``."""
        name = proxy + ERROR_SUFFIX
        return name if name in self.samples.columns else None

    @property
    def taxa(self) -> tuple[str, ...]:
        """Taxon columns of the counts table, in file order (empty without counts)."""
        if self.counts is None:
            return ()
        return _value_columns(self.counts)


def _value_columns(table: pd.DataFrame) -> tuple[str, ...]:
    return tuple(
        str(name)
        for name in table.columns
        if name not in NON_PROXY_COLUMNS
        and not str(name).endswith(ERROR_SUFFIX)
        and is_numeric_dtype(table[name])
        and not is_bool_dtype(table[name])
    )
