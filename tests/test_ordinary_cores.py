"""Defaults that fit ordinary cores: no [reconstruction] section, cores sampled every
100-300 yr, and the status of cores whose reconstruction is empty or absent.

The cores come from tests/archive_factory.py (invented curve, constant accumulation rate
8-12 yr/cm per core, samples spaced by uniform draws of 100-300 yr of true age).
"""

from __future__ import annotations

import numpy as np
import pytest

from archive_factory import write_archive
from pipelines.flows.run import execute_run
from pipelines.flows.runners import ExecutorChoice
from pipelines.runfolder import read_parquet

pytestmark = pytest.mark.usefixtures("prefect_harness")

#: published UK'37 equation only: no [reconstruction] section, events off (not under test)
CALIBRATION_ONLY = """
[calibration.uk37]
method = "equation"
equation = "uk37_mueller1998"
variable = "sst"
units = "degC"

[events]
enabled = false
"""

N_CORES = 20


def _span_share(table, ages):
    """Share of the grid cells inside a record's sample span (median ages of its youngest and
    oldest sample) that have a reconstructed median."""
    young, old = float(np.min(ages)), float(np.max(ages))
    step = float(np.diff(table["age_cal_bp"])[0])
    inside = (table["age_cal_bp"] + step / 2 > young) & (table["age_cal_bp"] - step / 2 <= old)
    return float(table.loc[inside, "value_median"].notna().mean())


@pytest.mark.slow
def test_twenty_lake_cores_sampled_every_100_to_300_yr_are_filled_on_defaults(tmp_path):
    """Must show (issue 10): >= 90 % of each record's span has reconstructed values; a core
    whose proxy column is empty is not 'ok' (it is 'dated'); a core measured only at its top
    and bottom is 'thin' (the long gap is not bridged)."""
    config = write_archive(tmp_path, n_cores=N_CORES + 2, ensemble=60, n_dates=5,
                           sample_spacing_yr=(100.0, 300.0), extra_config=CALIBRATION_ONLY)
    empty = tmp_path / "cores" / f"SYN-{N_CORES:03d}" / "samples.csv"
    lines = empty.read_text().splitlines()
    empty.write_text("\n".join([lines[0]] + [f"{ln.split(',')[0]},," for ln in lines[1:]]) + "\n")
    sparse = tmp_path / "cores" / f"SYN-{N_CORES + 1:03d}" / "samples.csv"
    lines = sparse.read_text().splitlines()
    # measured only in the three top samples and the bottom one: a long gap in the middle
    kept = [ln if k < 3 or k == len(lines) - 2 else f"{ln.split(',')[0]},,"
            for k, ln in enumerate(lines[1:])]
    sparse.write_text("\n".join([lines[0]] + kept) + "\n")

    outcome = execute_run(config, tmp_path / "run", cache_dir=tmp_path / "cache", report=False,
                          choice=ExecutorChoice(workers=2))
    summary = outcome.summary.set_index("core_id")
    shares = {}
    for index in range(N_CORES):
        core_id = f"SYN-{index:03d}"
        assert summary.loc[core_id, "status"] == "ok", summary.loc[core_id].to_dict()
        table = read_parquet(outcome.run_dir / core_id / "reconstruction.parquet")
        steps = set(np.diff(table["age_cal_bp"]))
        assert steps <= {100.0, 200.0}, steps        # the grid followed the ~200-yr spacing
        calibrated = read_parquet(outcome.run_dir / core_id / "calibrated_samples.parquet")
        chronology = read_parquet(outcome.run_dir / core_id / "chronology.parquet")
        ages = np.interp(calibrated["depth_cm"], chronology["depth_cm"], chronology["age_median"])
        shares[core_id] = _span_share(table, ages)
        assert "median sample spacing" in summary.loc[core_id, "notes"]
    print("filled share of each record's span:", {k: round(v, 3) for k, v in shares.items()})
    assert min(shares.values()) >= 0.90, shares
    assert summary.loc[f"SYN-{N_CORES:03d}", "status"] == "dated"
    assert summary.loc[f"SYN-{N_CORES + 1:03d}", "status"] == "thin"
    assert "the reconstruction is thin" in summary.loc[f"SYN-{N_CORES + 1:03d}", "warnings"]
    assert outcome.failed == []
