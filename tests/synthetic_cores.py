"""Duck-typed stand-ins for a core, its chronology and its calibration, from a known truth.

Used by the reconstruction and event tests (and the benchmark) so that they do not depend on
the chronology and calibration stages. The truth is an invented climate history with one
abrupt cold event; observations carry one noise realisation, and each ensemble member adds
its own age path and calibration draw, as the real stages do.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from proxies.calibration import CalibratedRecord


def truth_with_cold_event(age_cal_bp, onset=9400.0, end=9150.0, amplitude=-2.8,
                          ramp_yr=40.0, trend_per_kyr=-0.15, base=12.0):
    """An invented temperature history [degC]: a slow trend and one abrupt cold event.

    The drop starts at ``onset`` (cal BP), reaches ``amplitude`` after ``ramp_yr``, holds,
    and recovers over ``ramp_yr`` ending at ``end``.
    """
    age = np.asarray(age_cal_bp, dtype=float)
    down = np.clip((onset - age) / ramp_yr, 0, 1)
    up = np.clip((end - age) / ramp_yr + 1, 0, 1)
    shape = np.minimum(down, 1 - up)
    return base + trend_per_kyr * age / 1000 + amplitude * np.clip(shape, 0, 1)


@dataclass
class FakeCore:
    id: str
    samples: pd.DataFrame
    collected_ce: float = 2018.0


@dataclass
class FakeChronology:
    """Linear age-depth with a per-member accumulation factor and wiggles."""

    top_cal_bp: float
    yr_per_cm: np.ndarray  # (M,)
    wiggle: np.ndarray     # (M,) amplitude [yr] of a slow sinusoidal deviation

    def age_at(self, depth_cm):
        d = np.asarray(depth_cm, dtype=float)[:, None]
        return self.top_cal_bp + d * self.yr_per_cm[None, :] + self.wiggle[None, :] * np.sin(d / 40.0)

    def true_age(self, depth_cm):
        return self.top_cal_bp + np.asarray(depth_cm, dtype=float) * 20.0



@dataclass
class FakeCalibration:
    records: list = field(default_factory=list)


def make_synthetic_core(rng, n_members=200, spacing_cm=1.0, max_depth_cm=600.0,
                        noise_sd=0.6, age_sd_frac=0.01, core_id="SYN-1", truth=truth_with_cold_event):
    """A synthetic core, chronology and calibration with a known truth.

    True ages are ``top + 20 yr/cm * depth`` (so 1 cm = 20 yr). Each member's age path has
    its own accumulation rate (relative sd ``age_sd_frac``) and a wiggle of up to 30 yr.
    The observed series is the truth plus one noise realisation (sd ``noise_sd``); member
    values add an independent calibration draw of the same sd, so the member spread
    reflects the measurement and calibration uncertainty of a single observation.

    Returns
    -------
    core, chronology, calibration, true_age (n,), true_values (n,)
    """
    depth = np.arange(0.5, max_depth_cm, spacing_cm)
    top = 1950.0 - 2018.0
    chron = FakeChronology(top, 20.0 * (1 + age_sd_frac * rng.standard_normal(n_members)),
                           30.0 * rng.uniform(-1, 1, n_members))
    true_age = chron.true_age(depth)
    true_values = truth(true_age)
    observed = true_values + noise_sd * rng.standard_normal(depth.size)
    values = observed[:, None] + noise_sd * rng.standard_normal((depth.size, n_members))
    record = CalibratedRecord("mgca_mmol_mol", "temperature", "degC", "test", "synthetic", depth, values)
    core = FakeCore(core_id, pd.DataFrame({"depth_cm": depth}))
    return core, chron, FakeCalibration([record]), true_age, true_values
