"""The run plan: everything the tasks need, read once from the run config at the edge.

A :class:`RunPlan` holds paths, hashes and settings objects only (no data), so it is cheap to
send to Dask workers. The settings come from :mod:`pipelines.config` (which builds each
stage's ``Settings`` from its TOML section); the plan adds the content hashes the cache keys
are built from.
"""

from __future__ import annotations

import glob
import os
import pathlib
import tomllib
from dataclasses import dataclass, field
from typing import Any

from pipelines.flows.keys import code_fingerprint, content_key
from pipelines.runfolder import sha256_file
from proxies.problems import InputError, Problem

__all__ = ["RunPlan", "build_plan", "STAGES", "SCIENCE_STAGES"]

#: the stages of one core, in order
STAGES = ("ingest", "chronology", "calibration", "reconstruction", "events", "outputs")
#: stages whose settings come from a config section of the same name
SCIENCE_STAGES = ("chronology", "calibration", "reconstruction", "events")


@dataclass(frozen=True)
class RunPlan:
    """A resolved run (see the module docstring).

    Attributes
    ----------
    config_path : str
        Absolute path of the run config.
    config_text : str
        The config file's text (recorded in the manifest).
    raw : dict
        The parsed TOML.
    run_seed, ensemble : int
        ``[run] seed`` and ``[run] ensemble`` (members M).
    core_folders : tuple of str
        Absolute core folders, sorted, duplicates removed.
    curves : tuple of (name, path, sha256)
        ``[curves]`` entries.
    auxiliary : dict
        ``{"training": {name: (path, sha256)}, "instrumental": {...}}``.
    settings : dict
        Stage name -> settings object from :func:`pipelines.config.stage_settings`.
    sections : frozenset of str
        Top-level config sections present in the file.
    config : object
        The :class:`pipelines.config.RunConfig` (passed to the auxiliary readers).
    fingerprint : str
        :func:`pipelines.flows.keys.code_fingerprint` of the code that produced the plan.
    """

    config_path: str
    config_text: str
    raw: dict
    run_seed: int
    ensemble: int
    core_folders: tuple[str, ...]
    curves: tuple[tuple[str, str, str], ...]
    auxiliary: dict
    settings: dict
    sections: frozenset
    config: Any = field(repr=False, compare=False)
    fingerprint: str = ""

    def settings_key(self, stage: str) -> str:
        """Content hash of one stage's settings and of its raw config section."""
        return content_key(stage, self.settings.get(stage), self.raw.get(stage))

    @property
    def curve_hashes(self) -> dict[str, str]:
        return {name: digest for name, _, digest in self.curves}


def _resolve_core_folders(config: Any, raw: dict, config_dir: pathlib.Path) -> list[str]:
    folders = getattr(config, "core_folders", None)
    if folders is None:
        folders = []
        for pattern in raw.get("run", {}).get("cores", []):
            matches = sorted(glob.glob(str(config_dir / pattern)))
            folders += [m for m in matches if os.path.isdir(m)]
    unique = sorted({str(pathlib.Path(f).resolve()) for f in folders})
    return unique


def _file_entries(raw_table: dict, config_dir: pathlib.Path, section: str) -> dict[str, tuple[str, str]]:
    """``name -> (absolute path, sha256)`` for a ``[section.<name>]`` (or ``name = path``) table."""
    out: dict[str, tuple[str, str]] = {}
    problems: list[Problem] = []
    for name, value in sorted((raw_table or {}).items()):
        text = value if isinstance(value, str) else (value or {}).get("file") if isinstance(value, dict) else None
        if not isinstance(text, str):
            continue
        path = (config_dir / text).expanduser().resolve()
        if not path.is_file():
            problems.append(Problem(f"[{section}]", f"file not found: {path}",
                                    "give the path relative to the run config", column=name))
            continue
        out[name] = (str(path), sha256_file(path))
    if problems:
        raise InputError(problems)
    return out


def _settings_or_none(config_module, config, stage: str):
    """The stage's settings, or ``None`` when that stage is not installed (it then fails per
    core with a clear message instead of stopping the whole run)."""
    try:
        return config_module.stage_settings(config, stage)
    except (ImportError, AttributeError):
        return None


def build_plan(config_path: str | os.PathLike[str]) -> RunPlan:
    """Read and validate a run config and resolve everything the run needs.

    Raises
    ------
    proxies.problems.InputError
        For any problem in the config (unknown keys, missing files, bad values), listing all.
    """
    from pipelines import config as config_module

    path = pathlib.Path(config_path).expanduser().resolve()
    if not path.is_file():
        raise InputError(Problem(str(path), "run config not found", "give the path of a run config (.toml)"))
    from pipelines.textfiles import read_text

    text = read_text(path, str(path))  # UTF-8 (a byte-order mark accepted); else an InputError
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise InputError(Problem(str(path), f"invalid TOML: {error}", "fix the TOML syntax")) from error
    config = config_module.load_run_config(path)
    settings = {stage: _settings_or_none(config_module, config, stage) for stage in SCIENCE_STAGES}
    curves = _file_entries(raw.get("curves", {}), path.parent, "curves")
    auxiliary = {section: _file_entries(raw.get(section, {}), path.parent, section)
                 for section in ("training", "instrumental")}
    folders = _resolve_core_folders(config, raw, path.parent)
    if not folders:
        raise InputError(Problem(str(path), "no core folder found", "list core folders (or glob "
                                 "patterns) in [run] cores, relative to the config", column="cores"))
    return RunPlan(
        config_path=str(path), config_text=text, raw=raw,
        run_seed=int(getattr(config, "seed", raw.get("run", {}).get("seed", 0))),
        ensemble=int(getattr(config, "ensemble", raw.get("run", {}).get("ensemble", 1000))),
        core_folders=tuple(folders),
        curves=tuple((name, p, digest) for name, (p, digest) in sorted(curves.items())),
        auxiliary=auxiliary, settings=settings, sections=frozenset(raw), config=config,
        fingerprint=code_fingerprint(),
    )
