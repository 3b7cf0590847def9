"""Where a run may write: never inside its inputs, never where its inputs are read from.

A run writes two folders, the run folder (``--out``) and the work store (``--cache-dir``).
Neither may lie inside a core folder (the next run would hash the outputs as the core's
input files and the core would change under its own results), nor where a ``[run] cores``
pattern would pick it up as a core folder, nor contain an input (deleting a work store, which
the README allows at any time, must never delete a core, a curve or the config). The check
runs before anything is written and names the option, the folder and the input involved.
"""

from __future__ import annotations

import os
import pathlib
from typing import Any, Iterable

from proxies.problems import InputError, Problem

__all__ = ["check_run_locations", "location_problems"]


def _inside(path: pathlib.Path, folder: pathlib.Path) -> bool:
    return path == folder or folder in path.parents


def _patterns(cores: tuple[str, ...], config_dir: pathlib.Path) -> list[tuple[str, str]]:
    """``(absolute pattern, pattern as written)`` of each ``[run] cores`` entry."""
    return [(os.path.normpath(str(config_dir / p)), p) for p in cores]


def _matched_by(path: pathlib.Path, patterns: Iterable[tuple[str, str]]) -> tuple[pathlib.Path, str] | None:
    """The first of ``path`` and its parents that a cores pattern would match (glob's ``*``
    never matches a hidden name, so hidden folders are skipped)."""
    for candidate in (path, *path.parents):
        if candidate.name.startswith(".") or candidate == candidate.parent:
            continue
        for pattern, written in patterns:
            if candidate.match(pattern):
                return candidate, written
    return None


def _input_files(plan: Any) -> list[pathlib.Path]:
    files = [plan.config_path] + [path for _, path, _ in plan.curves]
    files += [path for section in plan.auxiliary.values() for path, _ in section.values()]
    return [pathlib.Path(f) for f in files]


#: files that only a run folder holds (its lock, its in-progress marker, its manifest)
RUN_FOLDER_SIGNS = (".downcore-lock", ".downcore-in-progress", "manifest.json")


def _run_folders_inside(core: pathlib.Path) -> list[pathlib.Path]:
    """Folders below a core folder that are run folders (left there by an older version):
    their files would be hashed as the core's inputs."""
    found = []
    for folder, subfolders, files in os.walk(core):
        subfolders[:] = [name for name in subfolders if not name.startswith(".")]
        if pathlib.Path(folder) != core and any(name in files for name in RUN_FOLDER_SIGNS):
            found.append(pathlib.Path(folder))
            subfolders[:] = []
    return found


def location_problems(plan: Any, out_dir: str | os.PathLike[str],
                      cache_dir: str | os.PathLike[str]) -> list[Problem]:
    """Every reason why ``out_dir`` or ``cache_dir`` may not be written for this run.

    Parameters
    ----------
    plan : pipelines.flows.plan.RunPlan
        The run's plan (config path and text, core folders, curve and auxiliary files).
    out_dir, cache_dir : path-like
        The run folder and the work store the run would write.
    """
    config = pathlib.Path(plan.config_path)
    cores = [pathlib.Path(f) for f in plan.core_folders]
    patterns = _patterns(plan.config.core_patterns, config.parent)
    inputs = _input_files(plan)
    problems = [Problem(str(config), f"the core folder {core} holds the run folder {run}: its files "
                        "would be read as the core's input files", "move the run folder out of the core "
                        "folder", column="run.cores")
                for core in cores for run in _run_folders_inside(core)]
    for option, given in (("--out", out_dir), ("--cache-dir", cache_dir)):
        folder = pathlib.Path(given).expanduser().resolve()
        where = f"{option} {folder}"
        for core in cores:
            if _inside(folder, core):
                problems.append(Problem(str(config), f"{where} is inside the core folder {core}: the "
                                        "run would write into its input and the next run would read "
                                        "the results as the core's files", f"give {option} a folder "
                                        "outside every core folder", column=option))
            elif _inside(core, folder):
                problems.append(Problem(str(config), f"{where} holds the core folder {core}",
                                        f"give {option} a folder that holds no input", column=option))
        matched = _matched_by(folder, patterns)
        if matched and not any(_inside(folder, core) for core in cores):
            problems.append(Problem(str(config), f"{where}: {matched[0]} matches the cores pattern "
                                    f"{matched[1]!r}, so the next run would read it as a core folder",
                                    f"give {option} a folder outside the pattern's reach (or narrow "
                                    "the pattern in [run] cores)", column=option))
        for file in inputs:
            if _inside(file, folder):
                problems.append(Problem(str(config), f"{where} holds the input file {file}",
                                        f"give {option} a folder that holds no input", column=option))
    return problems


def check_run_locations(plan: Any, out_dir: str | os.PathLike[str], cache_dir: str | os.PathLike[str]) -> None:
    """Raise :class:`~proxies.problems.InputError` listing :func:`location_problems`, if any."""
    problems = location_problems(plan, out_dir, cache_dir)
    if problems:
        raise InputError(problems)
