"""``downcore new-core DIR --id ID``: start a new core folder from a commented template.

Writes ``DIR/core.toml`` (every key explained; values not given as options left as commented
REQUIRED lines) and empty ``samples.csv`` and ``dates.csv`` with the right headers. Fill them
in, then ``downcore check DIR``. Exit status: 0 written; 2 bad option or DIR not new and empty.
"""

from __future__ import annotations

import pathlib
import sys

import click

from proxies.cores.validation import ARCHIVES, DEPTH_UNITS


@click.command(name="new-core")
@click.argument("folder", type=click.Path(path_type=pathlib.Path))
@click.option("--id", "core_id", required=True, help="The core's id (letters, digits, '-', '_').")
@click.option("--archive", type=click.Choice(ARCHIVES), default="lake", show_default=True,
              help="Kind of archive.")
@click.option("--depth-unit", type=click.Choice(tuple(DEPTH_UNITS)), default="cm", show_default=True,
              help="Unit of the tables' depth and thickness columns.")
@click.option("--latitude", type=click.FloatRange(-90, 90), default=None, help="Decimal degrees north.")
@click.option("--longitude", type=click.FloatRange(-180, 180), default=None, help="Decimal degrees east.")
@click.option("--collected", type=int, default=None, help="Year CE the core was taken.")
@click.option("--site", default="", help="Free text: where the core comes from.")
@click.option("--proxy", "proxies", multiple=True, metavar="COLUMN",
              help="A proxy column for samples.csv (repeat for several), e.g. --proxy uk37.")
def command(folder, core_id, archive, depth_unit, latitude, longitude, collected, site, proxies) -> None:
    """Write a new core folder FOLDER from a commented template (core.toml with every key
    explained, empty samples.csv and dates.csv with their headers)."""
    from pipelines.coretemplate import write_core_template

    try:
        written = write_core_template(folder, core_id, archive=archive, depth_unit=depth_unit,
                                      latitude=latitude, longitude=longitude, collected=collected,
                                      site=site, proxies=proxies)
    except (ValueError, FileExistsError, OSError) as error:
        click.echo(f"downcore new-core: {getattr(error, 'strerror', None) or error}", err=True)
        sys.exit(2)
    for path in written:
        click.echo(f"wrote {path}")
    click.echo(f"next: fill in the REQUIRED lines of {folder / 'core.toml'} and the tables' rows, "
               f"then run: downcore check {folder}")
