"""Generate archives of small synthetic cores (tests and benchmarks).

Each core is a folder in the core-folder format of DEVELOPERS.md: ``core.toml``,
``dates.csv`` (radiocarbon dates) and ``samples.csv`` (one proxy, ``uk37``, with its analytical
error). The truth is known: ages follow a constant accumulation rate per core, and the proxy
follows a smooth signal plus one step. The radiocarbon curve is invented and built in code
(14C age = 0.97 x cal BP + a gentle wiggle, sigma 15 yr), so nothing here depends on a
published curve.

``broken`` cores carry one defect each (a missing required column, a negative error, an
unreadable core.toml) that ingest must reject with a clear message.
"""

from __future__ import annotations

import pathlib
import textwrap

import numpy as np

CURVE_NAME = "atmosphere"  # the [curves] key (file: curves/invented.14c)
BROKEN_KINDS = ("missing_column", "negative_error", "bad_toml")

#: config sections that take the synthetic cores through every stage (published UK'37
#: equation of Mueller et al. 1998, as the demo config spells it)
FULL_CHAIN = """
[calibration.uk37]
method = "equation"
equation = "uk37_mueller1998"
variable = "sst"
units = "degC"

[reconstruction]
grid_step_yr = 100.0

[events]
n_surrogates = 50
"""


def invented_curve_rows(shift_14c: float = 0.0) -> np.ndarray:
    """Rows (cal BP, 14C age, sigma, Delta14C, sigma) of an invented curve, 0..12000 cal BP,
    every 10 yr. ``shift_14c`` adds a constant to every 14C age (a "curve update")."""
    cal = np.arange(0.0, 12001.0, 10.0)
    c14 = 0.97 * cal + 40.0 * np.sin(cal / 700.0) + shift_14c
    sigma = np.full_like(cal, 15.0)
    delta = 1000.0 * (np.exp((cal - c14) / 8267.0) - 1.0)
    return np.column_stack([cal, c14, sigma, delta, np.full_like(cal, 2.0)])


def write_curve(path: pathlib.Path, shift_14c: float = 0.0) -> pathlib.Path:
    """Write the invented curve in the five-column text layout."""
    rows = invented_curve_rows(shift_14c)
    lines = ["# invented test curve: cal BP, 14C age, sigma, Delta14C, sigma"]
    lines += [",".join(f"{v:.1f}" for v in row) for row in rows]
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _core_toml(core_id: str, index: int) -> str:
    return textwrap.dedent(f"""\
        [core]
        id = "{core_id}"
        archive = "lake"
        latitude = {55.0 + (index % 20) * 0.5}
        longitude = {10.0 + (index % 30) * 0.3}
        collected = 2015
        site = "an invented lake, number {index}"

        [files]
        samples = "samples.csv"
        dates = "dates.csv"
        """)


def write_core(folder: pathlib.Path, core_id: str, index: int, n_dates: int = 6,
               n_samples: int = 40, broken: str | None = None,
               sample_spacing_yr: tuple[float, float] | None = None) -> pathlib.Path:
    """Write one synthetic core folder (see the module docstring).

    ``sample_spacing_yr = (low, high)``: instead of ``n_samples`` evenly spaced samples, the
    samples are spaced (in true age) by independent uniform draws between ``low`` and
    ``high`` years, down the whole core (a lake core sampled every few cm).
    """
    rng = np.random.default_rng(1000 + index)
    folder.mkdir(parents=True, exist_ok=True)
    rate_yr_cm = 8.0 + 4.0 * rng.random()           # yr per cm, the known truth
    length_cm = 400.0
    curve = invented_curve_rows()
    date_depths = np.linspace(20.0, length_cm - 10.0, n_dates)
    true_ages = -65.0 + rate_yr_cm * date_depths
    c14 = np.interp(true_ages, curve[:, 0], curve[:, 1]) + rng.normal(0.0, 30.0, n_dates)
    error = np.full(n_dates, 30.0)
    if broken == "negative_error":
        error[2] = -30.0
    date_lines = ["label,depth_cm,kind,age,error"]
    date_lines += [f"{core_id}-d{k + 1},{d:.1f},radiocarbon,{a:.0f},{e:.0f}"
                   for k, (d, a, e) in enumerate(zip(date_depths, c14, error))]
    (folder / "dates.csv").write_text("\n".join(date_lines) + "\n", encoding="utf-8")

    sample_depths = np.linspace(2.0, length_cm - 2.0, n_samples)
    if sample_spacing_yr is not None:
        gaps_cm = rng.uniform(*sample_spacing_yr, size=int(length_cm * rate_yr_cm / sample_spacing_yr[0])) / rate_yr_cm
        sample_depths = 2.0 + np.concatenate([[0.0], np.cumsum(gaps_cm)])
        sample_depths = np.round(sample_depths[sample_depths <= length_cm - 2.0], 1)
        n_samples = sample_depths.size
    ages = -65.0 + rate_yr_cm * sample_depths
    signal = 0.6 + 0.1 * np.sin(ages / 900.0) + 0.08 * (ages > 2500.0)
    uk37 = signal + rng.normal(0.0, 0.01, n_samples)
    header = "depth_cm,uk37,uk37_error" if broken != "missing_column" else "uk37,uk37_error"
    sample_lines = [header]
    for depth, value in zip(sample_depths, uk37):
        prefix = f"{depth:.1f}," if broken != "missing_column" else ""
        sample_lines.append(f"{prefix}{value:.4f},0.0100")
    (folder / "samples.csv").write_text("\n".join(sample_lines) + "\n", encoding="utf-8")

    toml = _core_toml(core_id, index)
    if broken == "bad_toml":
        toml = toml.replace('archive = "lake"', "archive = lake without quotes")
    (folder / "core.toml").write_text(toml, encoding="utf-8")
    return folder


def write_archive(root: str | pathlib.Path, n_cores: int, broken: int = 0, ensemble: int = 200,
                  seed: int = 20261201, n_dates: int = 6, n_samples: int = 40,
                  extra_config: str = "", sample_spacing_yr: tuple[float, float] | None = None) -> pathlib.Path:
    """Write ``n_cores`` core folders, the invented curve and a run config; return the config.

    Parameters
    ----------
    root : path
        Folder to write into (``root/cores/<id>``, ``root/curves/invented.14c``,
        ``root/run.toml``).
    broken : int
        How many cores (the last ones, cycling through :data:`BROKEN_KINDS`) carry a defect.
    extra_config : str
        TOML appended to the run config (e.g. a ``[reconstruction]`` section).
    sample_spacing_yr : (float, float), optional
        Irregular sample spacing in years (see :func:`write_core`).
    """
    root = pathlib.Path(root)
    for index in range(n_cores):
        kind = None
        if index >= n_cores - broken:
            kind = BROKEN_KINDS[(index - (n_cores - broken)) % len(BROKEN_KINDS)]
        write_core(root / "cores" / f"SYN-{index:03d}", f"SYN-{index:03d}", index,
                   n_dates=n_dates, n_samples=n_samples, broken=kind, sample_spacing_yr=sample_spacing_yr)
    write_curve(root / "curves" / "invented.14c")
    config = textwrap.dedent(f"""\
        [run]
        seed = {seed}
        ensemble = {ensemble}
        cores = ["cores/*"]

        [curves]
        {CURVE_NAME} = "curves/invented.14c"
        """) + extra_config
    path = root / "run.toml"
    path.write_text(config, encoding="utf-8")
    return path


def broken_ids(n_cores: int, broken: int) -> list[str]:
    """Ids of the cores :func:`write_archive` made broken."""
    return [f"SYN-{i:03d}" for i in range(n_cores - broken, n_cores)]
