"""``downcore check PATH...``: validate core folders and run configs without running anything.

Each PATH is a core folder (or its ``core.toml``), a run config ``.toml`` (then the config
and every core it lists are checked, including the dates' curve names against ``[curves]``),
or a folder holding core folders (each core folder below it is checked). Other files and
folders without cores are listed as skipped, so ``downcore check demo_cores/*`` checks the
demo's cores and configs; a call with nothing to check at all is a usage error.
Prints one line per problem grouped per core, in row order, the same problem on several rows
of a file folded into one line with the rows and their count; then notes on what reading
skipped (comment lines, title rows, the sheet read), the number of rejected table rows and
a summary. A run config is checked as ``run`` would meet it (curve files, date ranges, age
control, memory; :mod:`pipelines.run_checks`). Exit code 0 when everything is clean, 1 when any problem was found, 2 for usage
errors. Nothing is written.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import click
from rich.console import Console
from rich.text import Text

from proxies.problems import InputError, Problem

__all__ = ["command", "rejected_rows", "folded", "in_row_order"]


@dataclass
class _Group:
    """Problems of one checked thing (a core folder or a config file)."""

    title: str
    problems: list[Problem] = field(default_factory=list)
    summary: str = ""
    is_core: bool = True
    notes: list[str] = field(default_factory=list)
    warnings: list[Problem] = field(default_factory=list)


def rejected_rows(problems: list[Problem]) -> int:
    """Number of distinct data rows of tables named in ``problems``."""
    from pipelines.tables import TABLE_SUFFIXES

    rows = {
        (p.file, p.row)
        for p in problems
        if p.row is not None and p.row > 1 and Path(p.file).suffix.lower() in TABLE_SUFFIXES
    }
    return len(rows)


def _core_group(title: str, core, problems: list[Problem]) -> _Group:
    group = _Group(title=title, problems=problems)
    if core is not None:
        counts = f", {len(core.counts)} count rows" if core.counts is not None else ""
        group.title = f"{core.id} ({title})"
        group.summary = f"{len(core.samples)} samples, {len(core.dates)} dates{counts}"
        group.warnings = _event_layer_warnings(core)
    return group


def _event_layer_warnings(core) -> list[Problem]:
    """Samples and counts inside the core's event layers (left out of calibration)."""
    from pipelines.ingest import read_toml
    from proxies.calibration import event_layer_sample_warnings

    if not core.event_layers:
        return []
    mapping, _ = read_toml(Path(core.folder) / "core.toml", "core.toml")
    files = (mapping or {}).get("files", {})
    files = files if isinstance(files, dict) else {}
    return event_layer_sample_warnings(core, str(files.get("samples", "samples")),
                                       str(files.get("counts", "counts")))


def _check_core(path: Path) -> _Group:
    from pipelines.ingest import inspect_core

    notes: list[str] = []
    core, problems = inspect_core(str(path), notes=notes)
    group = _core_group(str(path), core, problems)
    group.notes = notes
    return group


def _check_config(path: Path) -> list[_Group]:
    from pipelines.config_problems import check_run_config_by_core

    notes: list[str] = []
    (config_title, (_, config_problems)), *cores = check_run_config_by_core(path, notes=notes).items()
    groups = [_Group(title=f"run config {config_title}", problems=config_problems, is_core=False)]
    groups.extend(_core_group(title, core, problems) for title, (core, problems) in cores)
    for group in groups[1:]:
        folder = group.title.split("(")[-1].rstrip(")")
        group.notes = [note for note in notes if note.startswith(folder + "/") or note.startswith(folder + "\\")]
    return groups


def in_row_order(problems: list[Problem]) -> list[Problem]:
    """Problems file by file (in the order the files were first named), each file by row."""
    first = {}
    for problem in problems:
        first.setdefault(problem.file, len(first))
    return sorted(problems, key=lambda p: (first[p.file], p.row if p.row is not None else 0))


def _rows_text(rows: list[int]) -> str:
    """``[2, 3, 4, 9]`` -> ``"2-4, 9"`` (at most eight spans)."""
    spans: list[list[int]] = []
    for row in rows:
        if spans and row == spans[-1][1] + 1:
            spans[-1][1] = row
        else:
            spans.append([row, row])
    text = [str(a) if a == b else f"{a}-{b}" for a, b in spans]
    return ", ".join(text[:8]) + (", ..." if len(text) > 8 else "")


def folded(problems: list[Problem]) -> list[str]:
    """One line per problem, problems repeated on several rows of one file folded into one
    line naming the rows and their count."""
    groups: dict[tuple, list[Problem]] = {}
    for problem in in_row_order(problems):
        groups.setdefault((problem.file, problem.column, problem.message, problem.fix), []).append(problem)
    lines = []
    for (file, column, message, fix), members in groups.items():
        rows = sorted({p.row for p in members if p.row is not None})
        if len(members) == 1 or len(rows) < 2:
            lines.append(str(members[0]))
            continue
        where = f"{file}, rows {_rows_text(rows)} ({len(rows)} rows)"
        if column is not None:
            where += f", column '{column}'"
        lines.append(f"{where}: {message}" + (f" -- fix: {fix}" if fix else ""))
    return lines


def _targets(paths: tuple[Path, ...]) -> tuple[list[Path], list[Path], list[Path]]:
    """Split PATHs into run configs, core folders (each once, in order) and skipped paths."""
    configs, cores, skipped = [], [], []
    for path in paths:
        if path.is_dir() and (path / "core.toml").is_file():
            found = [path]
        elif path.is_dir():
            found = sorted(toml.parent for toml in path.rglob("core.toml"))
        elif path.name == "core.toml":
            found = [path.parent]
        elif path.suffix.lower() == ".toml":
            configs.append(path)
            continue
        else:
            found = []
        if not found:
            skipped.append(path)
        cores.extend(folder for folder in found if folder.resolve() not in {c.resolve() for c in cores})
    return configs, cores, skipped


def _covered_by(configs: list[Path]) -> set[Path]:
    """Core folders that the run configs list (they are checked with their config)."""
    from pipelines.config import load_run_config

    covered: set[Path] = set()
    for config in configs:
        try:
            covered.update(folder.resolve() for folder in load_run_config(config).core_folders)
        except (InputError, OSError, tomllib.TOMLDecodeError, UnicodeDecodeError):
            continue  # its own check reports why
    return covered


def _check_path(path: Path, is_config: bool) -> list[_Group]:
    try:
        return _check_config(path) if is_config else [_check_core(path)]
    except InputError as error:
        return [_Group(title=str(path), problems=error.problems)]
    except (OSError, tomllib.TOMLDecodeError, UnicodeDecodeError) as error:
        return [_Group(title=str(path), problems=[Problem(str(path), f"cannot be read: {error}",
                                                          "check the file")])]


def _print_group(console: Console, group: _Group) -> None:
    line = Text()
    if group.problems:
        line.append("FAIL ", style="bold red")
    else:
        line.append("ok   ", style="bold green")
    line.append(group.title, style="bold")
    if group.problems:
        n = len(group.problems)
        rows = rejected_rows(group.problems)
        line.append(f": {n} problem{'s' if n != 1 else ''}, {rows} rejected row{'s' if rows != 1 else ''}")
    elif group.summary:
        line.append(f": {group.summary}")
    console.print(line)
    for note in group.notes:
        console.print(Text("  note: " + note, style="dim"))
    for line in folded(group.problems):
        console.print(Text("  - " + line))
    for warning in group.warnings:
        console.print(Text("  ! warning: " + str(warning), style="yellow"))


@click.command("check")
@click.argument("paths", nargs=-1, required=True, type=click.Path(exists=True, path_type=Path))
def command(paths: tuple[Path, ...]) -> None:
    """Check core folders and run configs (PATH: a core folder, a run config .toml, or a
    folder holding core folders)."""
    configs, cores, skipped = _targets(paths)
    if not configs and not cores:
        raise click.BadParameter(
            f"{', '.join(map(str, paths))}: neither a core folder, a folder of core folders, "
            "nor a .toml run config", param_hint="PATH")
    covered = _covered_by(configs)
    cores = [core for core in cores if core.resolve() not in covered]
    console = Console(soft_wrap=True, highlight=False)
    for path in skipped:
        console.print(Text(f"skip {path}: not a core folder or run config, and no core folder inside",
                           style="dim"))
    groups = [group for path in configs for group in _check_path(path, is_config=True)]
    groups += [group for path in cores for group in _check_path(path, is_config=False)]
    for group in groups:
        _print_group(console, group)
    cores = [g for g in groups if g.is_core]
    bad = [g for g in groups if g.problems]
    n_problems = sum(len(g.problems) for g in groups)
    n_rows = sum(rejected_rows(g.problems) for g in groups)
    clean_cores = sum(1 for g in cores if not g.problems)
    summary = Text()
    summary.append("\nSummary: ", style="bold")
    summary.append(
        f"{len(cores)} core{'s' if len(cores) != 1 else ''} checked, {clean_cores} clean; "
        f"{n_problems} problem{'s' if n_problems != 1 else ''}, "
        f"{n_rows} rejected row{'s' if n_rows != 1 else ''}."
    )
    console.print(summary)
    if bad:
        click.get_current_context().exit(1)
