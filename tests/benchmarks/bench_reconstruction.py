"""Benchmark: full event detection with significance on 1,000 members x 400 grid points.

Prints one JSON line. The series is an invented 50-yr grid (20,000 yr) with a slow trend,
AR(1) noise and one abrupt cold excursion; the timing covers persistence estimation,
change points on every member, the red-noise null (200 surrogates), p-values, ramp fits
and clustering (``proxies.events.detect_series_events``). Also times the reconstruction
stage on a synthetic core with 1,000 members, and the run-level lead/lag table
(``proxies.events.leadlag.lead_lag_table``) for one event found in 10 cores x 1,000 member
onsets each (45 core pairs, every member pair of each).
"""

from __future__ import annotations

import json
import pathlib
import sys
import time

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[1]))

from proxies.events import EventSettings, detect_series_events  # noqa: E402
from proxies.events.leadlag import lead_lag_table  # noqa: E402
from proxies.events.persistence import ar1_surrogates  # noqa: E402
from proxies.reconstruction import ReconstructionSettings, reconstruct_core  # noqa: E402
from synthetic_cores import make_synthetic_core  # noqa: E402

N_MEMBERS, N_POINTS, STEP_YR = 1000, 400, 50.0
N_CORES = 10


def _lead_lag_seconds(rng: np.random.Generator) -> tuple[float, int]:
    import pandas as pd

    cores = [f"C{k:02d}" for k in range(N_CORES)]
    true_onset = 11700.0 + 20.0 * np.arange(N_CORES)
    events = pd.DataFrame({"core_id": cores, "event_id": "t-E01", "variable": "t", "kind": "shift",
                           "direction": "positive", "onset_median": true_onset, "significant": True})
    onsets = pd.concat([pd.DataFrame({"core_id": c, "event_id": "t-E01", "member": np.arange(N_MEMBERS),
                                      "onset_cal_bp": rng.normal(m, 80.0, N_MEMBERS)})
                        for c, m in zip(cores, true_onset)], ignore_index=True)
    start = time.perf_counter()
    table = lead_lag_table(events, onsets, 1000.0)
    return time.perf_counter() - start, len(table)


def main() -> None:
    rng = np.random.default_rng(20261201)
    ages = np.arange(N_POINTS) * STEP_YR
    noise = ar1_surrogates(ages, 60.0, N_MEMBERS, rng)
    values = 10 - 0.1 * ages[:, None] / 1000 + 0.8 * noise
    values[(ages >= 9200) & (ages <= 9400)] -= 2.7
    start = time.perf_counter()
    events, _, _, _ = detect_series_events(ages, values, EventSettings(), rng)
    detection = time.perf_counter() - start

    core, chron, cal, _, _ = make_synthetic_core(rng, n_members=N_MEMBERS)
    start = time.perf_counter()
    reconstruct_core(core, chron, cal, ReconstructionSettings(), rng)
    reconstruction = time.perf_counter() - start
    lead_lag, n_pairs = _lead_lag_seconds(rng)
    print(json.dumps({"event_detection_seconds": round(detection, 3),
                      "reconstruction_seconds": round(reconstruction, 3),
                      "lead_lag_seconds": round(lead_lag, 3), "lead_lag_pairs": n_pairs,
                      "members": N_MEMBERS, "points": N_POINTS,
                      "events_found": int(len(events))}))


if __name__ == "__main__":
    main()
