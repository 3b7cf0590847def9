"""``[calibration.<proxy column>]`` sections: one settings dataclass per calibration method.

Every key is declared once with :func:`proxies.settings_spec.setting` (type, bounds, default,
doc); :class:`CalibrationSettings` reads the whole ``[calibration]`` table, picks the class of
each column's ``method`` from :data:`METHOD_SETTINGS` and validates the column's keys
against it (unknown keys get a "did you mean"). The calibration function of each method is
registered under the same name in :data:`proxies.calibration.stage.CALIBRATORS`.

The training-set and instrumental sections are in :mod:`.training_settings`.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any, ClassVar, Mapping

from proxies.problems import InputError, Problem
from proxies.settings_spec import did_you_mean, setting, settings_from_mapping

from .equations import PUBLISHED_EQUATIONS
from .training_settings import SCHEMES, InstrumentalSpec, TrainingSpec  # noqa: F401

__all__ = ["ProxyCalibration", "EquationCalibration", "LinearCalibration",
           "ExponentialCalibration", "OverlapCalibrationSettings", "TransferCalibration",
           "StatedCalibration", "CalibrationSettings", "METHOD_SETTINGS", "METHODS",
           "COUNTS_KEY", "TrainingSpec", "InstrumentalSpec"]

COUNTS_KEY = "counts"
FIT_METHODS = ("inverse", "classical", "errors_in_variables")
METHODS = ("equation", "linear", "exponential", "overlap", "transfer", "stated")
_EVENT_CHOICES = ("exclude", "keep")


@dataclass(frozen=True)
class ProxyCalibration:
    """Keys every method shares; ``column`` is the proxy column (the section's name)."""

    column: str = field(default="", metadata={})
    method: str = setting("equation", "how the column becomes climate (required)",
                          choices=METHODS)
    variable: str | None = setting(None, "name of the climate variable (default: the "
                                   "method's own)", kind=str)
    units: str | None = setting(None, "units of the climate variable", kind=str)
    reference: str | None = setting(None, "citation written beside the results", kind=str)
    event_layer_samples: str = setting("exclude", "samples inside a listed event layer: left "
                                       "out of calibration (exclude) or used (keep)",
                                       choices=_EVENT_CHOICES)

    @classmethod
    def cross_check(cls, values: dict, where: str) -> list[Problem]:
        """Problems that involve several keys (none by default)."""
        return []


def _shared_fraction(doc_default: str):
    return setting(None, "share of the calibration error's variance that is shared by every "
                   f"sample of a member (auto: {doc_default})", kind=float, low=0.0, high=1.0,
                   auto=True)


def _missing_key(values, where: str, key: str, what: str, fix: str) -> list[Problem]:
    """The problem of a method that needs ``key`` (``what`` it gives) when it is not set."""
    if values.get(key) is not None:
        return []
    return [Problem(where, f"method '{values['method']}' needs {what}", fix, column=key)]


def _names_table(values, where: str, key: str, section: str, what: str) -> list[Problem]:
    """:func:`_missing_key` for a key naming a ``[section.<name>]`` table."""
    return _missing_key(values, where, key, what, f"set {key} to the name of a [{section}.<name>] section")


_VARIABLE_FIX = 'e.g. variable = "temperature"'


@dataclass(frozen=True)
class EquationCalibration(ProxyCalibration):
    """A published equation; its stated total error only (never also its coefficients)."""

    equation: str | None = setting(None, "name of a published equation (README table)",
                                   kind=str, choices=tuple(PUBLISHED_EQUATIONS))
    residual_error: float | None = setting(None, "total calibration error, 1 sigma [climate "
                                           "units] (default: the paper's)", kind=float, low=0.0)
    shared_error_fraction: float | None = _shared_fraction("0.5")
    seawater_d18o_vsmow: float = setting(0.0, "seawater d18O for the d18O equations "
                                         "[permil VSMOW]")
    seawater_d18o_error: float = setting(0.0, "its 1-sigma error, shared by all samples of a "
                                         "member [permil]", low=0.0)

    @classmethod
    def cross_check(cls, values, where):
        return _missing_key(values, where, "equation", "an equation name",
                            f"set equation to one of {', '.join(PUBLISHED_EQUATIONS)}")


_COMMON_USER_DOC = ("give coefficient errors (the fit's, with their correlation) or a "
                    "shared_error_fraction of the residual error, never both")


@dataclass(frozen=True)
class _UserForm(ProxyCalibration):
    residual_error: float = setting(0.0, "residual (calibration) error, 1 sigma [climate units]",
                                    low=0.0)
    coefficient_correlation: float = setting(0.0, "correlation of the two coefficients' errors",
                                             low=-1.0, high=1.0)
    shared_error_fraction: float | None = _shared_fraction(
        "0 with coefficient errors, else 0.5")
    proxy_range: tuple | None = setting(None, "proxy values the form was calibrated on [proxy "
                                        "units]; samples outside are flagged",
                                        kind="pair[float]")
    climate_range: tuple | None = setting(None, "climate values it was calibrated on [climate "
                                          "units]; samples outside are flagged",
                                          kind="pair[float]")

    _pair: ClassVar[tuple[str, str]] = ("", "")
    #: the coefficient of the climate value: zero would make the form not invertible
    _climate_coefficient: ClassVar[str] = ""
    #: coefficients that must be positive
    _positive: ClassVar[tuple[str, ...]] = ()

    @classmethod
    def cross_check(cls, values, where):
        a, b = cls._pair
        problems = [Problem(where, f"method '{values['method']}' needs '{k}'",
                            f"give {k} = <number>", column=k) for k in (a, b) if values[k] is None]
        key = cls._climate_coefficient
        if values[key] == 0:
            problems.append(Problem(where, f"{key} must not be zero (not invertible)", column=key))
        problems += [Problem(where, f"{k} must be positive", column=k)
                     for k in cls._positive if values[k] is not None and values[k] <= 0]
        problems += _missing_key(values, where, "variable", "the climate variable name", _VARIABLE_FIX)
        coefficient_errors = values[f"{a}_error"] > 0 or values[f"{b}_error"] > 0
        if coefficient_errors and (values["shared_error_fraction"] or 0) > 0:
            problems.append(Problem(where, "coefficient errors and a shared_error_fraction "
                                    "would count the systematic error twice",
                                    _COMMON_USER_DOC, column="shared_error_fraction"))
        return problems

    def shared_fraction(self) -> float:
        a, b = self._pair
        if self.shared_error_fraction is not None:
            return self.shared_error_fraction
        return 0.0 if getattr(self, f"{a}_error") > 0 or getattr(self, f"{b}_error") > 0 else 0.5


def _user_form(name: str, formula: str, coefficients: dict[str, str], climate_coefficient: str,
               positive: tuple[str, ...] = ()) -> type:
    """A :class:`_UserForm` ``proxy = formula`` (T: the climate value) with two coefficients,
    each a required key with its own 1-sigma error key ``<coefficient>_error``.

    ``coefficients``: coefficient -> its units; ``climate_coefficient`` multiplies T (zero
    would make the form not invertible); ``positive``: coefficients that must be > 0.
    """
    values = [(key, float | None, setting(None, f"{key} of proxy = {formula} [{units}]", kind=float))
              for key, units in coefficients.items()]
    errors = [(f"{key}_error", float, setting(0.0, f"1-sigma error of the {key} (shared by all "
                                               "samples of a member)", low=0.0))
              for key in coefficients]
    form = dataclasses.make_dataclass(name, values + errors, bases=(_UserForm,), frozen=True, namespace={
        "__doc__": f"A user-defined form ``proxy = {formula}`` (T: the climate value).",
        "_pair": tuple(coefficients), "_climate_coefficient": climate_coefficient, "_positive": positive})
    form.__module__ = __name__
    return form


LinearCalibration = _user_form("LinearCalibration", "slope T + intercept",
                               {"slope": "proxy units per climate unit", "intercept": "proxy units"},
                               climate_coefficient="slope")
ExponentialCalibration = _user_form("ExponentialCalibration", "prefactor exp(exponent T)",
                                    {"prefactor": "proxy units", "exponent": "per climate unit"},
                                    climate_coefficient="exponent", positive=("prefactor",))


@dataclass(frozen=True)
class OverlapCalibrationSettings(ProxyCalibration):
    """Calibration on the overlap with an instrumental series (fit per age member)."""

    series: str | None = setting(None, "name of an [instrumental.<name>] section", kind=str)
    fit: str = setting("inverse", "line fitted to the overlap pairs", choices=FIT_METHODS)
    error_ratio: float | None = setting(None, "errors-in-variables: var(climate errors) / "
                                        "var(proxy errors) (reduced major axis if unset)",
                                        kind=float, low=0.0, low_open=True)
    min_coverage: float = setting(0.5, "share of a sample's window years that must have "
                                  "instrumental data", low=0.0, high=1.0)
    min_pairs: int = setting(8, "fewest overlap pairs of the median member; members with "
                             "fewer are fitted on what they have (wider error)", low=4)
    skill_test: str = setting("re_and_ce", "verification needs RE > 0 and CE > 0 in both "
                              "splits (re_and_ce) or RE > 0 only (re)", choices=("re_and_ce", "re"))
    on_no_skill: str = setting("refuse", "when verification shows no skill: refuse the record "
                               "or calibrate it with a warning", choices=("refuse", "warn"))

    @classmethod
    def cross_check(cls, values, where):
        return _names_table(values, where, "series", "instrumental", "an instrumental series")


@dataclass(frozen=True)
class TransferCalibration(ProxyCalibration):
    """A transfer function fitted on a modern training set (assemblage counts only)."""

    training: str | None = setting(None, "name of a [training.<name>] section", kind=str)
    shared_error_fraction: float | None = _shared_fraction("0.5")

    @classmethod
    def cross_check(cls, values, where):
        return _names_table(values, where, "training", "training", "a training set")


@dataclass(frozen=True)
class StatedCalibration(ProxyCalibration):
    """A series already in climate units (e.g. a published temperature record), passed
    through with its stated error."""

    error: float = setting(0.0, "1-sigma error independent per sample [climate units], used "
                           "where the <column>_error column is missing or empty", low=0.0)
    shared_error: float = setting(0.0, "1-sigma error shared by every sample of a member "
                                  "(a calibration offset) [climate units]", low=0.0)

    @classmethod
    def cross_check(cls, values, where):
        return _missing_key(values, where, "variable", "the climate variable name", _VARIABLE_FIX)


#: method name -> its settings class (the calibration functions: stage.CALIBRATORS)
METHOD_SETTINGS: Mapping[str, type] = {
    "equation": EquationCalibration, "linear": LinearCalibration,
    "exponential": ExponentialCalibration, "overlap": OverlapCalibrationSettings,
    "transfer": TransferCalibration, "stated": StatedCalibration,
}


def read_proxy_calibration(column: str, mapping: Any, where: str) -> ProxyCalibration:
    """Validate one ``[calibration.<column>]`` table against its method's declarations."""
    where = f"{where} [calibration.{column}]"
    if not isinstance(mapping, Mapping):
        raise InputError(Problem(where, f"'{column}' must be a table [calibration.{column}]",
                                 "write it as a table with method = ...", column=column))
    method = mapping.get("method")
    if method not in METHOD_SETTINGS:
        message = "no method given" if method is None else f"unknown method {method!r}"
        raise InputError(Problem(where, message, did_you_mean(method, METHODS) or
                                 f"set method to one of {', '.join(METHODS)}", column="method"))
    cls = METHOD_SETTINGS[method]
    problems = []
    if (column == COUNTS_KEY) != (method == "transfer"):
        problems.append(Problem(where, "method 'transfer' applies to the assemblage counts "
                                f"only, and [calibration.{COUNTS_KEY}] can only use it",
                                f'use method = "transfer" in [calibration.{COUNTS_KEY}] only',
                                column="method"))
    try:
        settings = settings_from_mapping(
            cls, mapping, where, lambda values: cls.cross_check(values, where))
    except InputError as error:
        raise InputError(problems + error.problems) from None
    if problems:
        raise InputError(problems)
    return dataclasses.replace(settings, column=column)


@dataclass(frozen=True)
class CalibrationSettings:
    """Calibration of every configured proxy column (the whole ``[calibration]`` table).

    Columns not listed are carried through uncalibrated.
    """

    proxies: tuple[ProxyCalibration, ...] = ()

    @classmethod
    def from_mapping(cls, mapping: Mapping[str, Any] | None,
                     where: str = "run.toml") -> "CalibrationSettings":
        """Validate ``[calibration]``: a table of ``[calibration.<column>]`` tables.

        ``where`` is the config file; problems name ``<where> [calibration.<column>]`` and the
        key.
        """
        where = where.removesuffix(" [calibration]")
        if mapping is None:
            return cls()
        if not isinstance(mapping, Mapping):
            raise InputError(Problem(where, "[calibration] must be a table", column="calibration"))
        problems, proxies = [], []
        for column, table in mapping.items():
            try:
                proxies.append(read_proxy_calibration(column, table, where))
            except InputError as error:
                problems.extend(error.problems)
        if problems:
            raise InputError(problems)
        return cls(tuple(proxies))

    def for_column(self, column: str) -> ProxyCalibration | None:
        return next((p for p in self.proxies if p.column == column), None)

    @property
    def training_names(self) -> tuple[str, ...]:
        return tuple(p.training for p in self.proxies if isinstance(p, TransferCalibration))

    @property
    def series_names(self) -> tuple[str, ...]:
        return tuple(p.series for p in self.proxies
                     if isinstance(p, OverlapCalibrationSettings))
