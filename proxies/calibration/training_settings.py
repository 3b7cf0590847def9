"""``[training.<name>]`` and ``[instrumental.<name>]`` sections, declared once per key.

:class:`TrainingSpec` and :class:`InstrumentalSpec` describe one named table each;
:class:`TrainingSettings` and :class:`InstrumentalSettings` read a whole section (every named
table) so that ``downcore check`` and ``downcore run`` validate them the same way.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any, Mapping

from proxies.problems import InputError, Problem
from proxies.settings_spec import setting, settings_from_mapping

from .assemblage import TRANSFORMS

__all__ = ["TrainingSpec", "InstrumentalSpec", "TrainingSettings", "InstrumentalSettings",
           "SCHEMES", "MODELS", "COMPONENT_RULES"]

#: validation schemes of :mod:`proxies.calibration.crossval` (named here so that reading
#: settings does not import scikit-learn; a test checks that the two lists agree)
SCHEMES = ("loo", "kfold", "bootstrap", "hblock")
MODELS = ("wapls", "wa", "mat")
#: how the number of WA-PLS components is chosen
COMPONENT_RULES = ("improvement", "improvement_and_randomisation", "randomisation")


def _required(cls, values: dict, where: str, keys: tuple[str, ...]) -> list[Problem]:
    return [Problem(where, f"'{key}' is required", f'give {key} = "..."', column=key)
            for key in keys if values.get(key) is None]


@dataclass(frozen=True)
class TrainingSpec:
    """One ``[training.<name>]`` table: where the training set is and how to model it."""

    name: str = field(default="", metadata={})
    file: str | None = setting(None, "table of the training set, one row per site (required)",
                               kind=str)
    target: str | None = setting(None, "column of the climate variable (required)", kind=str)
    units: str = setting("", "units of the target", kind=str)
    target_name: str | None = setting(None, "name of the climate variable (default: the "
                                      "target column)", kind=str)
    id_column: str | None = setting(None, "column of site names", kind=str)
    latitude_column: str | None = setting(None, "column of site latitudes [decimal degrees]",
                                          kind=str)
    longitude_column: str | None = setting(None, "column of site longitudes [decimal degrees]",
                                           kind=str)
    model: str = setting("wapls", "transfer function", choices=MODELS)
    components: int = setting(3, "most WA-PLS components tried", low=1, high=10)
    deshrinking: str = setting("inverse", "WA deshrinking regression",
                               choices=("inverse", "classical"))
    tolerance_weighting: bool = setting(False, "WA: weight taxa by 1 / tolerance^2, with "
                                        "tolerances N2-corrected")
    min_tolerance: float | None = setting(None, "WA: floor of the N2-corrected tolerances "
                                          "[target units] (auto: their upper quartile)", kind=float,
                                          low=0.0, low_open=True, auto=True)
    analogues: int = setting(5, "MAT: number of analogues", low=1)
    weighted_analogues: bool = setting(False, "MAT: weight analogues by inverse distance")
    transform: str = setting("none", "transform of the percentages before fitting (applied "
                             "once; MAT distances stay squared-chord)", choices=TRANSFORMS)
    min_occurrences: int = setting(2, "taxa present at fewer sites are left out", low=1)
    min_max_percent: float = setting(0.0, "taxa whose largest abundance is below this are "
                                     "left out [%]", low=0.0, high=100.0)
    validation: str = setting("bootstrap", "cross-validation scheme", choices=SCHEMES)
    folds: int = setting(10, "k-fold: number of folds", low=2)
    bootstrap_cycles: int = setting(1000, "bootstrap: number of resamples", low=10)
    hblock_km: float | None = setting(None, "h-block: radius of the block left out [km]",
                                      kind=float, low=0.0)
    min_improvement: float = setting(0.05, "a further WA-PLS component must cut RMSEP by at "
                                     "least this share", low=0.0, high=1.0)
    component_rule: str = setting("improvement", "how the WA-PLS components are chosen: the "
                                  "RMSEP improvement, the randomisation t-test, or both",
                                  choices=COMPONENT_RULES)
    randomisation_cycles: int = setting(999, "randomisation t-test: number of permutations",
                                        low=19)
    randomisation_alpha: float = setting(0.05, "randomisation t-test: significance level",
                                         low=0.0, high=0.5, low_open=True)
    significance_cycles: int = setting(99, "random environmental variables of the per-core "
                                       "reconstruction significance test (0: no test)", low=0)
    analogue_percentiles: tuple = setting((5.0, 10.0), "percentiles of the training set's "
                                          "pairwise distances that bound good and no close "
                                          "analogues [%]", kind="pair[float]", low=0.0,
                                          high=100.0, low_open=True, high_open=True)

    @classmethod
    def from_mapping(cls, name: str, mapping: Mapping[str, Any] | None,
                     where: str = "run.toml") -> "TrainingSpec":
        """Validate one ``[training.<name>]`` table (problems name ``<where> [training.<name>]``)."""
        where = f"{where} [training.{name}]"
        spec = settings_from_mapping(cls, mapping, where, lambda v: cls._cross_check(v, where))
        return dataclasses.replace(spec, name=name)

    @classmethod
    def _cross_check(cls, values: dict, where: str) -> list[Problem]:
        problems = _required(cls, values, where, ("file", "target"))
        low, high = values["analogue_percentiles"]
        if low > high:
            problems.append(Problem(where, "analogue_percentiles must increase",
                                    "e.g. analogue_percentiles = [5, 10]",
                                    column="analogue_percentiles"))
        if values["validation"] == "hblock":
            if values["hblock_km"] is None:
                problems.append(Problem(where, "validation 'hblock' needs hblock_km",
                                        "give the block radius in km, e.g. hblock_km = 200",
                                        column="hblock_km"))
            if not (values["latitude_column"] and values["longitude_column"]):
                problems.append(Problem(where, "validation 'hblock' needs site coordinates",
                                        "set latitude_column and longitude_column",
                                        column="validation"))
        return problems

    def estimator(self, n_components: int | None = None):
        """A fresh unfitted estimator for this spec."""
        from .mat import MAT
        from .wa import WA
        from .wapls import WAPLS
        if self.model == "wa":
            return WA(deshrinking=self.deshrinking, tolerance_weighting=self.tolerance_weighting,
                      min_tolerance=self.min_tolerance)
        if self.model == "mat":
            return MAT(n_analogues=self.analogues, weighted=self.weighted_analogues,
                       input_transform=self.transform)
        return WAPLS(n_components=n_components or self.components)


@dataclass(frozen=True)
class InstrumentalSpec:
    """One ``[instrumental.<name>]`` table: an annual series in a table file."""

    name: str = field(default="", metadata={})
    file: str | None = setting(None, "table of the series, one row per whole year CE "
                               "(required)", kind=str)
    value_column: str | None = setting(None, "column of the annual values (required)", kind=str)
    year_column: str = setting("year_ce", "column of the years [yr CE]", kind=str)
    variable: str | None = setting(None, "name of the climate variable", kind=str)
    units: str = setting("", "units of the values", kind=str)

    @classmethod
    def from_mapping(cls, name: str, mapping: Mapping[str, Any] | None,
                     where: str = "run.toml") -> "InstrumentalSpec":
        """Validate one ``[instrumental.<name>]`` table."""
        where = f"{where} [instrumental.{name}]"
        spec = settings_from_mapping(
            cls, mapping, where, lambda v: _required(cls, v, where, ("file", "value_column")))
        return dataclasses.replace(spec, name=name)


def _named_tables(spec_class, section: str, mapping, where: str) -> tuple:
    where = where.removesuffix(f" [{section}]")
    if mapping is None:
        return ()
    if not isinstance(mapping, Mapping):
        raise InputError(Problem(where, f"[{section}] must be a table", column=section))
    problems, specs = [], []
    for name, table in mapping.items():
        if not isinstance(table, Mapping):
            problems.append(Problem(where, f"'{name}' must be a table [{section}.{name}]",
                                    f"write it as [{section}.{name}] followed by key = value "
                                    "lines", column=f"{section}.{name}"))
            continue
        try:
            specs.append(spec_class.from_mapping(name, table, where))
        except InputError as error:
            problems.extend(error.problems)
    if problems:
        raise InputError(problems)
    return tuple(specs)


def _named_tables_settings(name: str, spec_class: type, section: str) -> type:
    """A frozen settings class holding every ``[<section>.<name>]`` table of a run config as
    ``specs`` (a tuple of ``spec_class``), read by ``from_mapping(mapping, where)``."""

    def from_mapping(cls, mapping, where: str = "run.toml"):
        return cls(_named_tables(spec_class, section, mapping, where))

    settings = dataclasses.make_dataclass(name, [("specs", tuple, dataclasses.field(default=()))], frozen=True,
                                          namespace={"from_mapping": classmethod(from_mapping),
                                                     "__doc__": f"Every ``[{section}.<name>]`` table of a run config."})
    settings.__module__ = __name__
    return settings


TrainingSettings = _named_tables_settings("TrainingSettings", TrainingSpec, "training")
InstrumentalSettings = _named_tables_settings("InstrumentalSettings", InstrumentalSpec, "instrumental")
