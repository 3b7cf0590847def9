"""Run-config sections of the calibration stage, validated.

- ``[calibration.<proxy column>]`` -> :class:`ProxyCalibration`, all of them together ->
  :class:`CalibrationSettings` (``[calibration.counts]`` is the assemblage counts table);
- ``[training.<name>]`` -> :class:`TrainingSpec`;
- ``[instrumental.<name>]`` -> :class:`InstrumentalSpec`.

Every ``from_mapping`` collects all problems and raises one :class:`InputError` naming the
file (``where``) and the key.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Any, Mapping

from proxies.problems import InputError, Problem

from .assemblage import TRANSFORMS
from .equations import PUBLISHED_EQUATIONS

#: validation schemes of :mod:`proxies.calibration.crossval` (named here so that reading
#: settings does not import scikit-learn; a test checks that the two lists agree)
SCHEMES = ("loo", "kfold", "bootstrap", "hblock")

__all__ = ["ProxyCalibration", "CalibrationSettings", "TrainingSpec", "InstrumentalSpec",
           "METHODS", "COUNTS_KEY"]

METHODS = ("equation", "linear", "exponential", "overlap", "transfer")
FIT_METHODS = ("inverse", "classical", "errors_in_variables")
MODELS = ("wapls", "wa", "mat")
COUNTS_KEY = "counts"

_NUMBER = (int, float)


class _Checker:
    """Collects problems while reading one TOML table."""

    def __init__(self, mapping, where, section):
        self.mapping = dict(mapping) if isinstance(mapping, Mapping) else {}
        self.where = where
        self.section = section
        self.problems: list[Problem] = []
        if not isinstance(mapping, Mapping):
            self.fail(None, f"[{section}] must be a table of keys, got {type(mapping).__name__}",
                      f"write it as [{section}] followed by key = value lines")

    def fail(self, key, message, fix=""):
        column = f"{self.section}.{key}" if key else self.section
        self.problems.append(Problem(self.where, message, fix, column=column))

    def get(self, key, kinds, default, choices=None, minimum=None, maximum=None):
        if key not in self.mapping:
            return default
        value = self.mapping[key]
        names = {str: "text", bool: "true/false", int: "an integer", float: "a number"}
        wanted = "a number" if set(kinds) == {int, float} else \
            " or ".join(names[k] for k in kinds)
        if isinstance(value, bool) and bool not in kinds or not isinstance(value, kinds):
            self.fail(key, f"must be {wanted}, got {value!r}", f"write {key} as {wanted}")
            return default
        if choices is not None and value not in choices:
            self.fail(key, f"'{value}' is not one of {', '.join(map(str, choices))}",
                      f"use one of: {', '.join(map(str, choices))}")
            return default
        if minimum is not None and value < minimum or maximum is not None and value > maximum:
            self.fail(key, f"{value!r} is out of range [{minimum}, {maximum}]",
                      "give a value inside the range")
            return default
        return float(value) if float in kinds and not isinstance(value, bool) \
            and str not in kinds else value

    def allow_only(self, allowed):
        for key in self.mapping:
            if key not in allowed:
                self.fail(key, f"unknown key '{key}'",
                          f"allowed keys: {', '.join(sorted(allowed))}")


_COMMON = {"method", "variable", "units", "reference"}
_METHOD_KEYS = {
    "equation": {"equation", "residual_error", "seawater_d18o_vsmow", "seawater_d18o_error"},
    "linear": {"slope", "intercept", "slope_error", "intercept_error", "residual_error"},
    "exponential": {"prefactor", "exponent", "prefactor_error", "exponent_error",
                    "residual_error"},
    "overlap": {"series", "fit", "error_ratio", "min_coverage", "min_pairs", "on_no_skill"},
    "transfer": {"training"},
}


@dataclass(frozen=True)
class ProxyCalibration:
    """How one proxy column is calibrated (one ``[calibration.<column>]`` table).

    See the README section "Calibration" for every key, its default and meaning.
    """

    column: str
    method: str
    equation: str | None = None
    variable: str | None = None
    units: str | None = None
    reference: str | None = None
    residual_error: float | None = None
    seawater_d18o_vsmow: float = 0.0
    seawater_d18o_error: float = 0.0
    slope: float | None = None
    intercept: float | None = None
    slope_error: float = 0.0
    intercept_error: float = 0.0
    prefactor: float | None = None
    exponent: float | None = None
    prefactor_error: float = 0.0
    exponent_error: float = 0.0
    series: str | None = None
    fit: str = "inverse"
    error_ratio: float | None = None
    min_coverage: float = 0.5
    min_pairs: int = 8
    on_no_skill: str = "refuse"
    training: str | None = None

    @classmethod
    def from_mapping(cls, column: str, mapping: Mapping[str, Any], where: str):
        check = _Checker(mapping, where, f"calibration.{column}")
        method = check.get("method", (str,), None, choices=METHODS)
        if "method" not in check.mapping:
            check.fail("method", "no method given", f"set method to one of {', '.join(METHODS)}")
        if method is None:
            raise InputError(check.problems)
        check.allow_only(_COMMON | _METHOD_KEYS[method])
        values: dict[str, Any] = {"column": column, "method": method}
        for key in ("variable", "units", "reference"):
            values[key] = check.get(key, (str,), None)
        values["residual_error"] = check.get("residual_error", _NUMBER, None, minimum=0)
        if method == "equation":
            values["equation"] = check.get("equation", (str,), None,
                                           choices=tuple(PUBLISHED_EQUATIONS))
            if "equation" not in check.mapping:
                check.fail("equation", "method 'equation' needs an equation name",
                           f"set equation to one of {', '.join(PUBLISHED_EQUATIONS)}")
            values["seawater_d18o_vsmow"] = check.get("seawater_d18o_vsmow", _NUMBER, 0.0)
            values["seawater_d18o_error"] = check.get("seawater_d18o_error", _NUMBER, 0.0,
                                                      minimum=0)
        elif method in ("linear", "exponential"):
            a, b = ("slope", "intercept") if method == "linear" else ("prefactor", "exponent")
            for key in (a, b):
                values[key] = check.get(key, _NUMBER, None)
                if key not in check.mapping:
                    check.fail(key, f"method '{method}' needs '{key}'", f"give {key} = <number>")
            for key in (f"{a}_error", f"{b}_error"):
                values[key] = check.get(key, _NUMBER, 0.0, minimum=0)
            if values[a if method == "linear" else b] == 0:
                check.fail(a if method == "linear" else b, "must not be zero (not invertible)")
            if method == "exponential" and (values["prefactor"] or 0) <= 0 \
                    and "prefactor" in check.mapping:
                check.fail("prefactor", "must be positive")
            if "variable" not in check.mapping:
                check.fail("variable", f"method '{method}' needs the climate variable name",
                           'e.g. variable = "temperature"')
        elif method == "overlap":
            values["series"] = check.get("series", (str,), None)
            if "series" not in check.mapping:
                check.fail("series", "method 'overlap' needs an instrumental series",
                           "set series to the name of an [instrumental.<name>] table")
            values["fit"] = check.get("fit", (str,), "inverse", choices=FIT_METHODS)
            values["error_ratio"] = check.get("error_ratio", _NUMBER, None, minimum=0)
            values["min_coverage"] = check.get("min_coverage", _NUMBER, 0.5, minimum=0,
                                               maximum=1)
            values["min_pairs"] = check.get("min_pairs", (int,), 8, minimum=4)
            values["on_no_skill"] = check.get("on_no_skill", (str,), "refuse",
                                              choices=("refuse", "warn"))
        elif method == "transfer":
            values["training"] = check.get("training", (str,), None)
            if "training" not in check.mapping:
                check.fail("training", "method 'transfer' needs a training set",
                           "set training to the name of a [training.<name>] table")
            if column != COUNTS_KEY:
                check.fail("method", "method 'transfer' applies to the assemblage counts only",
                           f"put it in [calibration.{COUNTS_KEY}]")
        if column == COUNTS_KEY and method != "transfer":
            check.fail("method", "the counts table can only use method 'transfer'",
                       'set method = "transfer"')
        if check.problems:
            raise InputError(check.problems)
        return cls(**values)


@dataclass(frozen=True)
class CalibrationSettings:
    """Calibration of every configured proxy column (the whole ``[calibration]`` table).

    Columns not listed are carried through uncalibrated.
    """

    proxies: tuple[ProxyCalibration, ...] = ()

    @classmethod
    def from_mapping(cls, mapping: Mapping[str, Any] | None, where: str) -> "CalibrationSettings":
        """Validate ``[calibration]``: a table of ``[calibration.<column>]`` tables."""
        if mapping is None:
            return cls()
        if not isinstance(mapping, Mapping):
            raise InputError(Problem(where, "[calibration] must be a table", column="calibration"))
        problems, proxies = [], []
        for column, table in mapping.items():
            if not isinstance(table, Mapping):
                problems.append(Problem(where, f"'{column}' must be a table "
                                        f"[calibration.{column}]", "write it as a table with "
                                        "method = ...", column=f"calibration.{column}"))
                continue
            try:
                proxies.append(ProxyCalibration.from_mapping(column, table, where))
            except InputError as error:
                problems.extend(error.problems)
        if problems:
            raise InputError(problems)
        return cls(tuple(proxies))

    def for_column(self, column: str) -> ProxyCalibration | None:
        return next((p for p in self.proxies if p.column == column), None)

    @property
    def training_names(self) -> tuple[str, ...]:
        return tuple(p.training for p in self.proxies if p.training)

    @property
    def series_names(self) -> tuple[str, ...]:
        return tuple(p.series for p in self.proxies if p.series)


@dataclass(frozen=True)
class TrainingSpec:
    """One ``[training.<name>]`` table: where the training set is and how to model it."""

    name: str
    file: str
    target: str
    units: str = ""
    target_name: str | None = None
    id_column: str | None = None
    latitude_column: str | None = None
    longitude_column: str | None = None
    model: str = "wapls"
    components: int = 3
    deshrinking: str = "inverse"
    tolerance_weighting: bool = False
    analogues: int = 5
    weighted_analogues: bool = False
    transform: str = "none"
    min_occurrences: int = 2
    min_max_percent: float = 0.0
    validation: str = "bootstrap"
    folds: int = 10
    bootstrap_cycles: int = 1000
    hblock_km: float | None = None
    min_improvement: float = 0.05
    analogue_percentiles: tuple[float, float] = (5.0, 10.0)

    @classmethod
    def from_mapping(cls, name: str, mapping: Mapping[str, Any], where: str) -> "TrainingSpec":
        check = _Checker(mapping, where, f"training.{name}")
        names = {f.name for f in fields(cls)} - {"name"}
        check.allow_only(names)
        v: dict[str, Any] = {"name": name}
        for key in ("file", "target"):
            v[key] = check.get(key, (str,), None)
            if key not in check.mapping:
                check.fail(key, f"'{key}' is required", f"give {key} = \"...\"")
        for key in ("units", ):
            v[key] = check.get(key, (str,), "")
        for key in ("target_name", "id_column", "latitude_column", "longitude_column"):
            v[key] = check.get(key, (str,), None)
        v["model"] = check.get("model", (str,), "wapls", choices=MODELS)
        v["components"] = check.get("components", (int,), 3, minimum=1, maximum=10)
        v["deshrinking"] = check.get("deshrinking", (str,), "inverse",
                                     choices=("inverse", "classical"))
        v["tolerance_weighting"] = check.get("tolerance_weighting", (bool,), False)
        v["analogues"] = check.get("analogues", (int,), 5, minimum=1)
        v["weighted_analogues"] = check.get("weighted_analogues", (bool,), False)
        v["transform"] = check.get("transform", (str,), "none", choices=TRANSFORMS)
        v["min_occurrences"] = check.get("min_occurrences", (int,), 2, minimum=1)
        v["min_max_percent"] = check.get("min_max_percent", _NUMBER, 0.0, minimum=0, maximum=100)
        v["validation"] = check.get("validation", (str,), "bootstrap", choices=SCHEMES)
        v["folds"] = check.get("folds", (int,), 10, minimum=2)
        v["bootstrap_cycles"] = check.get("bootstrap_cycles", (int,), 1000, minimum=10)
        v["hblock_km"] = check.get("hblock_km", _NUMBER, None, minimum=0)
        v["min_improvement"] = check.get("min_improvement", _NUMBER, 0.05, minimum=0, maximum=1)
        pct = check.mapping.get("analogue_percentiles", [5.0, 10.0])
        if not (isinstance(pct, list) and len(pct) == 2 and all(
                isinstance(p, _NUMBER) and not isinstance(p, bool) and 0 < p < 100 for p in pct)
                and pct[0] <= pct[1]):
            check.fail("analogue_percentiles", f"must be two increasing percentages, got {pct!r}",
                       "e.g. analogue_percentiles = [5, 10]")
            pct = [5.0, 10.0]
        v["analogue_percentiles"] = (float(pct[0]), float(pct[1]))
        if v["validation"] == "hblock":
            if v["hblock_km"] is None:
                check.fail("hblock_km", "validation 'hblock' needs hblock_km",
                           "give the block radius in km, e.g. hblock_km = 200")
            if not (v["latitude_column"] and v["longitude_column"]):
                check.fail("validation", "validation 'hblock' needs site coordinates",
                           "set latitude_column and longitude_column")
        if check.problems:
            raise InputError(check.problems)
        return cls(**v)

    def estimator(self, n_components: int | None = None):
        """A fresh unfitted estimator for this spec."""
        from .mat import MAT
        from .wa import WA
        from .wapls import WAPLS
        if self.model == "wa":
            return WA(deshrinking=self.deshrinking, tolerance_weighting=self.tolerance_weighting)
        if self.model == "mat":
            return MAT(n_analogues=self.analogues, weighted=self.weighted_analogues)
        return WAPLS(n_components=n_components or self.components)


@dataclass(frozen=True)
class InstrumentalSpec:
    """One ``[instrumental.<name>]`` table: an annual series in a table file."""

    name: str
    file: str
    value_column: str
    year_column: str = "year_ce"
    variable: str | None = None
    units: str = ""

    @classmethod
    def from_mapping(cls, name: str, mapping: Mapping[str, Any], where: str):
        check = _Checker(mapping, where, f"instrumental.{name}")
        check.allow_only({"file", "value_column", "year_column", "variable", "units"})
        v = {"name": name}
        for key in ("file", "value_column"):
            v[key] = check.get(key, (str,), None)
            if key not in check.mapping:
                check.fail(key, f"'{key}' is required", f"give {key} = \"...\"")
        v["year_column"] = check.get("year_column", (str,), "year_ce")
        v["variable"] = check.get("variable", (str,), None)
        v["units"] = check.get("units", (str,), "")
        if check.problems:
            raise InputError(check.problems)
        return cls(**v)
