"""The ``downcore`` command line.

Each sub-command lives in its own module of this package and exposes a click command named
``command``; :data:`SUBCOMMANDS` maps the command name to that module. Modules are imported
only when their command is used, so ``downcore check`` never pays for importing Prefect.
"""

from __future__ import annotations

import importlib

import click

#: command name -> module (relative to this package) holding a click command called ``command``
SUBCOMMANDS: dict[str, str] = {
    "check": "check",
    "run": "run",
    "demo": "demo",
    "replay": "replay",
    "compare": "compare",
    "radiocarbon": "radiocarbon",
    "report": "report",
    "new-core": "new_core",
}

#: one-line help shown by ``downcore --help`` without importing every command's module
SHORT_HELP: dict[str, str] = {
    "run": "Run the chain on the cores a run config lists into a new run folder.",
    "demo": "Run the invented demo cores offline and print where the results are.",
    "replay": "Re-run a recorded run from its manifest and compare every output.",
    "compare": "Per core, how chronology, reconstruction and events moved between two runs.",
    "new-core": "Start a new core folder from a commented template.",
}


class _LazyGroup(click.Group):
    def format_commands(self, ctx: click.Context, formatter: click.HelpFormatter) -> None:
        rows = []
        for name in self.list_commands(ctx):
            text = SHORT_HELP.get(name)
            if text is None:
                command = self.get_command(ctx, name)
                text = command.get_short_help_str(limit=formatter.width) if command else ""
            rows.append((name, text))
        if rows:
            with formatter.section("Commands"):
                formatter.write_dl(rows)

    def list_commands(self, ctx: click.Context) -> list[str]:
        return sorted(SUBCOMMANDS)

    def get_command(self, ctx: click.Context, name: str) -> click.Command | None:
        module_name = SUBCOMMANDS.get(name)
        if module_name is None:
            return None
        module = importlib.import_module(f"{__name__}.{module_name}")
        return module.command


@click.group(cls=_LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="downcore")
def main() -> None:
    """downcore: sediment cores to dated, calibrated climate reconstructions."""
