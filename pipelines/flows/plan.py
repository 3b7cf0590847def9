"""The run plan: everything the tasks need, read once from the run config at the edge.

A :class:`RunPlan` holds paths, hashes and settings objects only (no data), so it is cheap to
send to Dask workers. The config is parsed and validated once (:func:`pipelines.config.load_run_config`,
each stage's settings by :func:`pipelines.config.stage_settings`), and every input file is
hashed once (:func:`pipelines.manifest.hash_inputs`): the manifest records those hashes and
the cache keys are built from them.
"""

from __future__ import annotations

import os
import pathlib
from dataclasses import dataclass, field

from pipelines.config import STAGE_SETTINGS, RunConfig, load_run_config, stage_settings
from pipelines.flows.keys import code_fingerprint, content_key
from pipelines.manifest import collect_input_files, hash_inputs
from pipelines.textfiles import read_text
from proxies.problems import InputError, Problem

__all__ = ["RunPlan", "build_plan"]


@dataclass(frozen=True)
class RunPlan:
    """A resolved run: its config, core folders, auxiliary inputs and their hashes (see the
    module docstring).

    Attributes
    ----------
    config : RunConfig
        The parsed, validated run config (raw stage sections in ``config.sections``).
    config_text : str
        The config file's text (recorded in the manifest).
    core_folders : tuple of str
        Absolute core folders, sorted, duplicates removed.
    curves : tuple of (name, path, sha256)
        ``[curves]`` entries.
    auxiliary : dict
        ``{"training": {name: (path, sha256)}, "instrumental": {...}, "series": {...}}``.
    settings : dict
        Stage name -> settings object from :func:`pipelines.config.stage_settings`.
    inputs : tuple of dict
        Every input file once: ``{"path", "role", "sha256"}`` (the manifest's list).
    fingerprint : str
        :func:`pipelines.flows.keys.code_fingerprint` of the code that produced the plan.
    """

    config: RunConfig = field(repr=False)
    config_text: str
    core_folders: tuple[str, ...]
    curves: tuple[tuple[str, str, str], ...]
    auxiliary: dict
    settings: dict
    inputs: tuple[dict, ...] = field(repr=False)
    fingerprint: str = ""

    @property
    def config_path(self) -> str:
        return str(self.config.path)

    @property
    def run_seed(self) -> int:
        return self.config.seed

    @property
    def ensemble(self) -> int:
        return self.config.ensemble

    def has_section(self, section: str) -> bool:
        """Whether the config file has a non-empty ``[section]``."""
        return bool(self.config.sections.get(section))

    def settings_key(self, stage: str) -> str:
        """Content hash of one stage's settings and of its raw config section."""
        return content_key(stage, self.settings.get(stage), self.config.sections.get(stage))

    def file_digest(self, path: str | os.PathLike[str]) -> str | None:
        """The SHA-256 of an input file (``None`` when it is not an input of the run)."""
        wanted = str(pathlib.Path(path).resolve())
        return next((item["sha256"] for item in self.inputs if item["path"] == wanted), None)

    @property
    def curve_hashes(self) -> dict[str, str]:
        return {name: digest for name, _, digest in self.curves}

    def folder_digest(self, folder: str) -> list[tuple[str, str]]:
        """``(relative path, sha256)`` of every input file of a core folder (under it at any
        depth)."""
        root = pathlib.Path(folder)
        return sorted((path.relative_to(root).as_posix(), digest) for path, digest in self._files_under().get(root, ()))

    def _files_under(self) -> dict[pathlib.Path, list[tuple[pathlib.Path, str]]]:
        """Folder -> the core input files under it, built once per plan object (a scan of
        every input per core made the cache keys of a 1,000-core run cost O(cores^2))."""
        index = self.__dict__.get("_core_files_index")
        if index is None:
            index = {}
            for item in self.inputs:
                if item["role"] == "core":
                    path = pathlib.Path(item["path"])
                    for parent in path.parents:
                        index.setdefault(parent, []).append((path, item["sha256"]))
            object.__setattr__(self, "_core_files_index", index)  # a cache, not a field
        return index

    def __getstate__(self) -> dict:
        """Pickled without the index (rebuilt where it is needed)."""
        return {name: value for name, value in self.__dict__.items() if name != "_core_files_index"}


def _file_entries(config: RunConfig, section: str, digests: dict[str, str]) -> dict[str, tuple[str, str]]:
    """``name -> (absolute path, sha256)`` for a ``[section.<name>]`` table with a ``file``."""
    out: dict[str, tuple[str, str]] = {}
    problems: list[Problem] = []
    for name, value in sorted(config.sections.get(section, {}).items()):
        text = value.get("file") if isinstance(value, dict) else None
        if not isinstance(text, str):
            continue
        path = config.resolve(text)
        if str(path) not in digests:
            problems.append(Problem(str(config.path), f"file not found: {path}",
                                    "give the path relative to the run config", column=f"{section}.{name}"))
            continue
        out[name] = (str(path), digests[str(path)])
    if problems:
        raise InputError(problems)
    return out


def build_plan(config_path: str | os.PathLike[str]) -> RunPlan:
    """Read and validate a run config and resolve everything the run needs.

    Raises
    ------
    proxies.problems.InputError
        For any problem in the config (unknown keys, missing files, bad values), listing all.
    """
    config = load_run_config(pathlib.Path(config_path).expanduser())
    text = read_text(config.path, str(config.path))  # UTF-8 (a byte-order mark accepted)
    settings = {stage: stage_settings(config, stage) for stage in STAGE_SETTINGS}
    folders = tuple(str(folder) for folder in config.core_folders)
    if not folders:
        raise InputError(Problem(str(config.path), "no core folder found", "list core folders (or glob "
                                 "patterns) in [run] cores, relative to the config", column="run.cores"))
    inputs = tuple(hash_inputs(collect_input_files(config.path, config.sections | {"curves": {
        name: str(path) for name, path in config.curves.items()}}, folders)))
    digests = {item["path"]: item["sha256"] for item in inputs}
    curves = tuple((name, str(path), digests[str(path)]) for name, path in sorted(config.curves.items()))
    auxiliary = {section: _file_entries(config, section, digests) for section in ("training", "instrumental",
                                                                                  "series")}
    if config.sections.get("series"):
        from pipelines.series_inputs import series_specs

        series_specs(config)  # every [series.<name>] table valid before any stage runs
    return RunPlan(config=config, config_text=text, core_folders=folders, curves=curves,
                   auxiliary=auxiliary, settings=settings, inputs=inputs, fingerprint=code_fingerprint())
