"""Settings of the chronology stage: the ``[chronology]`` section of the run config.

Every key is declared once, with its type, bounds, default and meaning
(:mod:`proxies.settings_spec`); the README's key table is checked against these declarations.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from proxies.problems import Problem
from proxies.settings_spec import DeclaredSection, setting

__all__ = ["ChronologySettings", "MODELS", "JOINS"]

#: age-depth models by name
MODELS = ("memory", "accumulation", "interpolation")
#: curves joining dates in the interpolation model
JOINS = ("linear", "smooth")


@dataclass(frozen=True)
class ChronologySettings(DeclaredSection):
    """How dates are calibrated and age-depth models built (one attribute per key).

    ``model``: ``"memory"`` is the Bayesian accumulation model with a persistent rate,
    ``"accumulation"`` the one with independent increments, both solved exactly;
    ``"interpolation"`` Monte Carlo interpolation with monotonic rejection.
    ``node_spacing_cm`` "auto": half the median distance between neighbouring date depths,
    kept between 1/150 and 1/25 of the modelled depth range. ``grid_step_yr``
    "auto": the age span / 4000 rounded up to 1, 2, 5, 10, 20, 50 or 100 yr.
    ``mean_rate_yr_cm`` "auto": the Theil-Sen slope of the calibrated date medians against
    event-free depth. ``default_curve`` unset: the only curve of ``[curves]``, or the one
    named ``atmosphere``. The Student-t likelihood is that of Christen & Perez (2009), whose
    gamma prior (shape a, rate b) on each date's precision multiplier is integrated out.
    """

    SECTION: ClassVar[str] = "chronology"

    model: str = setting("memory", "age-depth model", choices=MODELS)
    join: str = setting("linear", "interpolation model only: curve joining the dates", choices=JOINS)
    node_spacing_cm: float | None = setting(
        None, "spacing of the regular depth nodes of the accumulation models [cm, event-free]; "
        "every date depth is a node too", kind=float, low=0.0, low_open=True, auto=True, example="4")
    max_nodes: int = setting(300, "the spacing is widened so that the regular nodes stay below "
                             "this number (long cores)", low=2, low_open=True)
    grid_step_yr: float | None = setting(None, "calendar grid step of the accumulation models [yr]",
                                         kind=float, low=0.0, low_open=True, auto=True, example="10")
    calibration_step_yr: float = setting(1.0, "step of the regular grid curves are interpolated "
                                         "onto for calibration [yr]", low=0.0, high=100.0, low_open=True)
    mean_rate_yr_cm: float | None = setting(None, "centre of the mean accumulation-rate grid [yr/cm]",
                                            kind=float, low=0.0, low_open=True, auto=True, example="20")
    mean_rate_factors: tuple[float, ...] = setting(
        (0.2, 0.34, 0.58, 1.0, 1.7, 2.9, 5.0), "mean rates tried = centre x these (equal prior weight)",
        low=0.0, low_open=True)
    rate_variability: tuple[float, ...] = setting(
        (0.15, 0.5, 1.2), "coefficients of variation of the accumulation rate tried (memory: spread "
        "of the rate classes; independent: over reference_depth_cm)", low=0.0, low_open=True)
    rate_memory: tuple[float, ...] = setting(
        (0.1, 0.5, 0.9), "memory model: probabilities that the rate class persists over "
        "reference_depth_cm tried", low=0.0, high=1.0, high_open=True)
    rate_memory_prior: tuple[float, float] = setting(
        (6.0, 1.0), "memory model: (a, b), shapes of the beta prior over rate_memory; each point "
        "tried is weighted by the beta density there ([1, 1]: equal weight)", kind="pair[float]", low=1.0)
    reference_depth_cm: float = setting(10.0, "depth over which rate variability and memory are "
                                        "stated [cm]", low=0.0, low_open=True)
    rate_classes: int = setting(8, "memory model: number of equal-probability rate classes", low=2, high=32)
    within_class_variability: float = setting(
        0.15, "memory model: coefficient of variation of the rate within a class over "
        "reference_depth_cm", low=0.0, low_open=True)
    hiatus_gap_yr: float = setting(5000.0, "mean of the exponential gap prior at a hiatus [yr]",
                                   low=0.0, low_open=True)
    outlier_prior: float = setting(0.05, "prior probability that a date is an outlier (the core top "
                                   "is a constraint, never an outlier)", low=0.0, high=0.5)
    outlier_shift_scale: tuple[float, float] = setting(
        (500.0, 0.1), "an outlier's shift from the true age is Student-t (3 d.o.f.) with scale "
        "hypot(first [yr], second x the date's age) (widened by the date's own spread)",
        kind="pair[float]", low=0.0)
    student_t: bool = setting(False, "calibrate radiocarbon dates with the Student-t likelihood")
    error_multiplier_prior: tuple[float, float] = setting(
        (3.0, 4.0), "Student-t only: (a, b), shape and rate of the gamma prior on each date's "
        "precision multiplier (Christen & Perez 2009)", kind="pair[float]", low=0.0, low_open=True)
    default_curve: str | None = setting(None, "curve for radiocarbon dates whose curve cell is empty",
                                        kind=str, example='"atmosphere"')
    core_top: bool = setting(True, "the core top is the sediment surface of the collection year: "
                             "age 1950 - collected (error top_age_error) at depth 0, a constraint "
                             "that cannot be an outlier; core.toml's top_intact overrides it per core")
    top_age_error_yr: float = setting(5.0, "core-top error when core.toml gives none [yr]",
                                      low=0.0, low_open=True)
    lead210_model: str = setting("crs", "model dating a core's lead210 table (CRS: constant rate of "
                                 "supply; CIC: constant initial concentration)", choices=("crs", "cic"))
    lead210_draws: int = setting(1000, "Monte Carlo draws of the 210Pb activities", low=10, high=100000)
    output_step_cm: float = setting(1.0, "depth step of chronology.parquet and the ensemble table [cm]",
                                    low=0.0, low_open=True)

    @classmethod
    def cross_check(cls, values: dict, where: str) -> list[Problem]:
        """The memory model needs a memory its prior weighs: the Beta(a, b) density is 0 at a
        memory of 0 when a > 1, so a grid of zeros alone would leave no hyper-parameter point
        (caught here, before any core is run, not in the chronology stage)."""
        a, b = values["rate_memory_prior"]
        if values["model"] == "memory" and a > 1 and all(w == 0 for w in values["rate_memory"]):
            return [Problem(where, f"every rate_memory tried is 0, where the Beta({a:g}, {b:g}) "
                            "rate_memory_prior gives no weight (its density is 0 at 0 when a > 1)",
                            "add a memory between 0 and 1, e.g. rate_memory = [0.1, 0.5, 0.9], or "
                            "set rate_memory_prior = [1, <b>]", column="rate_memory")]
        return []
