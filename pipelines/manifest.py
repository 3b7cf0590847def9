"""``manifest.json``: what a run read, how it was set up and what it wrote.

The manifest makes a run checkable and repeatable: the SHA-256 of every input file (the run
config, every file of every core folder, curves, training sets, instrumental series), the
config text and its resolved form, the versions of Python and of the libraries that shape the
numbers, the run seed and the random streams derived from it, and the SHA-256 of every output
file. It is written last, so a run folder with a manifest is a complete run.
"""

from __future__ import annotations

import importlib.metadata
import os
import pathlib
import platform
import sys
from dataclasses import dataclass
from typing import Any, Iterable, Mapping

from pipelines.clock import utc_now
from pipelines.runfolder import IN_PROGRESS_MARKER, atomic_write_json, sha256_file

__all__ = [
    "MANIFEST_NAME",
    "MANIFEST_FORMAT",
    "InputChange",
    "collect_input_files",
    "hash_inputs",
    "package_versions",
    "hash_outputs",
    "output_kind",
    "build_manifest",
    "write_manifest",
    "read_manifest",
    "check_inputs",
]

MANIFEST_NAME = "manifest.json"
MANIFEST_FORMAT = "downcore-manifest/1"

#: libraries whose version can change the numbers or the bytes of the outputs
VERSIONED_PACKAGES = ("downcore", "numpy", "scipy", "pandas", "pyarrow", "scikit-learn",
                      "statsmodels", "prefect", "prefect-dask", "dask", "distributed",
                      "xarray", "h5netcdf", "netCDF4", "matplotlib", "threadpoolctl")


@dataclass(frozen=True)
class InputChange:
    """An input file whose content differs from the one a manifest recorded."""

    path: str
    role: str
    recorded_sha256: str
    current_sha256: str | None  # None: the file is gone

    def __str__(self) -> str:
        state = "missing" if self.current_sha256 is None else "changed"
        return f"{self.role} input {state}: {self.path}"


def _files_under(folder: pathlib.Path) -> list[pathlib.Path]:
    return sorted(p for p in folder.rglob("*")
                  if p.is_file() and not any(part.startswith(".") for part in p.relative_to(folder).parts))


def _strings(value: Any, path: tuple[str, ...] = ()) -> Iterable[tuple[tuple[str, ...], str]]:
    if isinstance(value, str):
        yield path, value
    elif isinstance(value, Mapping):
        for key, item in value.items():
            yield from _strings(item, path + (str(key),))
    elif isinstance(value, (list, tuple)):
        for item in value:
            yield from _strings(item, path)


def collect_input_files(config_path: str | os.PathLike[str], raw_config: Mapping[str, Any],
                        core_folders: Iterable[str | os.PathLike[str]]) -> list[tuple[str, str]]:
    """List every input file of a run as ``(absolute path, role)``.

    The roles are ``config`` (the run config), ``core`` (every file in a core folder) and the
    name of the config table that refers to the file (``curves``, ``training``,
    ``instrumental``, ...) for any string in the config that names an existing file relative
    to the config's folder.
    """
    config = pathlib.Path(config_path).resolve()
    found: dict[str, str] = {str(config): "config"}
    for folder in core_folders:
        for file in _files_under(pathlib.Path(folder).resolve()):
            found.setdefault(str(file), "core")
    for keys, text in _strings(raw_config):
        if not keys or keys[:2] == ("run", "cores") or "\n" in text or len(text) > 1000:
            continue
        candidate = (config.parent / text).expanduser()
        try:
            if candidate.is_file():
                found.setdefault(str(candidate.resolve()), keys[0])
        except OSError:
            continue
    return sorted(found.items())


def hash_inputs(files: Iterable[tuple[str, str]]) -> list[dict[str, str]]:
    """``[{"path", "role", "sha256"}]`` for the given ``(path, role)`` pairs."""
    return [{"path": path, "role": role, "sha256": sha256_file(path)} for path, role in files]


def package_versions() -> dict[str, str]:
    """Versions of Python, the platform and the libraries in :data:`VERSIONED_PACKAGES`."""
    versions = {"python": platform.python_version(), "platform": platform.platform(),
                "machine": platform.machine(), "byteorder": sys.byteorder}
    for name in VERSIONED_PACKAGES:
        try:
            versions[name] = importlib.metadata.version(name)
        except importlib.metadata.PackageNotFoundError:
            continue
    return versions


def output_kind(relative_path: str) -> str:
    """Classify an output file: ``table`` (Parquet), ``export`` (CSV, netCDF), ``report``
    (HTML, figures), ``log`` (core logs and ``timings.csv``, which hold clock times) or
    ``record`` (anything else)."""
    name = relative_path.rsplit("/", 1)[-1]
    suffix = name.rsplit(".", 1)[-1].lower() if "." in name else ""
    if name in ("log.txt", "timings.csv") or suffix == "log":
        return "log"
    if suffix == "parquet":
        return "table"
    if suffix in ("csv", "nc", "tsv"):
        return "export"
    if suffix in ("html", "png", "svg", "pdf", "css", "js"):
        return "report"
    return "record"


def hash_outputs(run_dir: str | os.PathLike[str],
                 known: Mapping[str, tuple[int, int, str]] | None = None) -> dict[str, dict[str, str]]:
    """``{relative path: {"sha256", "kind"}}`` for every file of a run folder except the
    manifest itself, the in-progress marker and hidden (temporary) files.

    ``known`` maps a relative path to ``(inode, size, sha256)`` of a file hard-linked from the
    work store, whose hash was computed when it was written; it is used only when the file
    is still that very inode with that size, otherwise the file is hashed.
    """
    root = pathlib.Path(run_dir)
    known = known or {}
    outputs: dict[str, dict[str, str]] = {}
    for file in _files_under(root):
        relative = file.relative_to(root).as_posix()
        if relative in (MANIFEST_NAME, IN_PROGRESS_MARKER):
            continue
        digest = None
        if relative in known:
            info = file.stat()
            inode, size, recorded = known[relative]
            digest = recorded if (info.st_ino, info.st_size) == (inode, size) else None
        outputs[relative] = {"sha256": digest or sha256_file(file), "kind": output_kind(relative)}
    return outputs


def build_manifest(*, config_path: str | os.PathLike[str], config_text: str,
                   resolved_config: Mapping[str, Any], inputs: list[dict[str, str]],
                   run_seed: int, streams: list[str], executor: Mapping[str, Any],
                   cores: list[Mapping[str, Any]], run_dir: str | os.PathLike[str],
                   started_utc: str, seconds: float,
                   known_hashes: Mapping[str, tuple[int, int, str]] | None = None,
                   created_utc: str | None = None) -> dict[str, Any]:
    """Assemble the manifest of a finished run (output hashes are computed here).

    Parameters
    ----------
    created_utc : str, optional
        When the run's results were complete (default: now). A run with a report gives its
        provisional manifest and its final one the same value, so that the report it writes
        states the finish time the manifest keeps (and equals a rewrite by ``downcore report``).
    streams : list of str
        The random streams used, as ``"stage/core"`` names; each is
        ``rng_for(run_seed, stage, core)``.
    executor : mapping
        How the tasks ran (threads and their number, or the Dask cluster); informative only,
        the numbers do not depend on it.
    cores : list of mapping
        One summary row per core (id, status, stage reached, warnings, seconds).
    """
    return {
        "format": MANIFEST_FORMAT,
        "created_utc": created_utc or utc_now(),
        "started_utc": started_utc,
        "seconds": round(float(seconds), 3),
        "config": {"path": str(pathlib.Path(config_path).resolve()), "text": config_text,
                   "resolved": resolved_config},
        "inputs": inputs,
        "seeds": {"run_seed": int(run_seed), "generator": "numpy PCG64 via "
                  "proxies.seeding.rng_for(run_seed, stage, core_id)", "streams": sorted(streams)},
        "versions": package_versions(),
        "executor": dict(executor),
        "cores": list(cores),
        "outputs": hash_outputs(run_dir, known_hashes),
    }


def write_manifest(run_dir: str | os.PathLike[str], manifest: Mapping[str, Any]) -> pathlib.Path:
    """Write ``manifest.json`` atomically into the run folder."""
    return atomic_write_json(pathlib.Path(run_dir) / MANIFEST_NAME, manifest)


def read_manifest(path: str | os.PathLike[str]) -> dict[str, Any]:
    """Read a manifest (a path to ``manifest.json`` or to its run folder).

    Raises
    ------
    ValueError
        When the file is not a downcore manifest.
    """
    import json

    file = pathlib.Path(path)
    if file.is_dir():
        file = file / MANIFEST_NAME
    if not file.is_file():
        raise FileNotFoundError(f"{file}: no manifest here -- give a run folder or its "
                                "manifest.json (an unfinished run has none)")
    data = json.loads(file.read_text(encoding="utf-8"))
    if not isinstance(data, dict) or data.get("format") != MANIFEST_FORMAT:
        raise ValueError(f"{file} is not a downcore manifest (format {MANIFEST_FORMAT!r} expected)")
    return data


def check_inputs(manifest: Mapping[str, Any]) -> list[InputChange]:
    """Compare the recorded input hashes with the files as they are now."""
    changes: list[InputChange] = []
    for entry in manifest.get("inputs", []):
        path = entry["path"]
        current = sha256_file(path) if os.path.isfile(path) else None
        if current != entry["sha256"]:
            changes.append(InputChange(path, entry.get("role", "input"), entry["sha256"], current))
    return changes
