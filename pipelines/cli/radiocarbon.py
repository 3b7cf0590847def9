"""``downcore radiocarbon AGE:ERROR... --curve FILE``: calibrate a few ages and print them.

Each age is written ``AGE:ERROR`` in 14C yr BP (``4520:35``); ``--f14c`` reads them as
F14C values instead (``0.5703:0.0025``). For every age the command prints the calibrated
median, mode and mean [cal BP] and the HPD ranges at 68.3 % and 95.4 %. ``--csv FILE`` also
writes them as a table, one row per HPD range (columns in :data:`CSV_COLUMNS`), atomically;
nothing else is written.

Examples
--------
``downcore radiocarbon 4520:35 9870:60 --curve curves/atmosphere.14c``
``downcore radiocarbon 1530:40 --curve curves/marine.14c --reservoir 120:45``
``downcore radiocarbon 0.5703:0.0025 --f14c --curve curves/atmosphere.14c --student-t``
``downcore radiocarbon 4520:35 9870:60 --curve curves/atmosphere.14c --csv dates.csv``
"""

from __future__ import annotations

import warnings

import click
import numpy as np

__all__ = ["command", "parse_value_error", "ranges_table", "CSV_COLUMNS"]

#: columns of ``--csv``: one row per HPD range of each age
CSV_COLUMNS = ("input", "age_14c_bp", "error_14c_yr", "median_cal_bp", "mode_cal_bp", "mean_cal_bp",
               "hpd_level", "range_young_cal_bp", "range_old_cal_bp", "range_probability")


def parse_value_error(text: str, what: str) -> tuple[float, float]:
    """``"4520:35"`` -> ``(4520.0, 35.0)``; raises ``click.BadParameter`` otherwise."""
    parts = text.replace("+-", ":").replace("±", ":").split(":")
    try:
        value, error = (float(p) for p in parts)
    except ValueError:
        raise click.BadParameter(f"{text!r} is not VALUE:ERROR (e.g. 4520:35)", param_hint=what) from None
    if not np.isfinite(value) or not error > 0:
        raise click.BadParameter(f"{text!r}: the value must be finite and the error > 0", param_hint=what)
    return value, error


def ranges_table(inputs, values, errors, median, mode, mean, levels):
    """The ``--csv`` table: one row per HPD range (``levels``: ``{level: ranges per age}``)."""
    import pandas as pd

    rows = []
    for i, text in enumerate(inputs):
        for level, ranges in levels.items():
            for young, old, share in ranges[i]:
                rows.append((text, float(values[i]), float(errors[i]), float(median[i]), float(mode[i]),
                             float(mean[i]), level, float(young), float(old), float(share)))
    return pd.DataFrame(rows, columns=list(CSV_COLUMNS))


@click.command(name="radiocarbon")
@click.argument("ages", nargs=-1, required=True)
@click.option("--curve", "curve_path", required=True, type=click.Path(dir_okay=False),
              help="Calibration curve file (five columns: cal BP, 14C age, sigma, Delta14C, sigma).")
@click.option("--reservoir", default=None, metavar="OFFSET:ERROR",
              help="Reservoir offset and its 1-sigma error [14C yr], applied to every age.")
@click.option("--f14c", "as_f14c", is_flag=True, help="Read the ages as F14C:ERROR values.")
@click.option("--student-t", "student_t", is_flag=True,
              help="Student-t likelihood (Christen & Perez 2009) instead of the normal.")
@click.option("--step", default=1.0, show_default=True, type=click.FloatRange(min=0.0, max=100.0, min_open=True),
              help="Calendar grid step [yr], > 0 and at most 100.")
@click.option("--csv", "csv_path", default=None, type=click.Path(dir_okay=False),
              help="Also write the results as CSV (one row per HPD range) to this file.")
def command(ages, curve_path, reservoir, as_f14c, student_t, step, csv_path):
    """Calibrate radiocarbon AGES (each AGE:ERROR, 14C yr BP) and print their calendar ranges."""
    from pipelines.curvefiles import read_curve_file
    from proxies.chronology import calibrate_radiocarbon
    from proxies.chronology.calibrate import CurveRangeError
    from proxies.chronology.radiocarbon import age_from_f14c
    from proxies.chronology.stage import format_ranges
    from proxies.problems import InputError

    pairs = [parse_value_error(a, "AGES") for a in ages]
    values = np.array([p[0] for p in pairs])
    errors = np.array([p[1] for p in pairs])
    if as_f14c:
        if np.any(values <= 0):
            raise click.BadParameter("F14C values must be > 0", param_hint="AGES")
        values, errors = age_from_f14c(values, errors)
    offset, offset_error = parse_value_error(reservoir, "--reservoir") if reservoir else (0.0, 0.0)
    if reservoir and offset_error <= 0:
        raise click.BadParameter("the reservoir error must be > 0", param_hint="--reservoir")
    try:
        curve = read_curve_file(curve_path)
    except InputError as error:
        raise click.ClickException(str(error)) from None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            dates = calibrate_radiocarbon(values, errors, curve.on_grid(step), offset, offset_error,
                                          student_t=student_t, labels=list(ages))
        except CurveRangeError as error:
            raise click.ClickException(str(error)) from None
    median, mode, mean = dates.median(), dates.mode(), dates.mean()
    hpd68, hpd95 = dates.hpd(0.683), dates.hpd(0.954)
    likelihood = "Student-t" if student_t else "normal"
    click.echo(f"curve {curve.name} ({curve_path}), {likelihood} likelihood"
               + (f", reservoir offset {offset:g} +- {offset_error:g} 14C yr" if reservoir else ""))
    for i, text in enumerate(ages):
        shown = f"{values[i]:.0f} +- {errors[i]:.0f} 14C yr BP" + (f" (F14C {text})" if as_f14c else "")
        click.echo(f"\n{shown}")
        click.echo(f"  median {median[i]:.0f}  mode {mode[i]:.0f}  mean {mean[i]:.0f} cal BP")
        click.echo(f"  68.3% HPD: {format_ranges(hpd68[i])}")
        click.echo(f"  95.4% HPD: {format_ranges(hpd95[i])}")
    if csv_path:
        from pipelines.report.csv import table_csv_text
        from pipelines.runfolder import atomic_write_text

        table = ranges_table(list(ages), values, errors, median, mode, mean, {0.683: hpd68, 0.954: hpd95})
        atomic_write_text(csv_path, table_csv_text(table))
        click.echo(f"\nwritten: {csv_path}")
    for warning in caught:
        click.echo(f"warning: {warning.message}", err=True)
