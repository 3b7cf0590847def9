"""The work store: content-addressed folders holding each stage's finished results.

``<cache>/<stage>/<key[:2]>/<key>/`` holds what one stage produced for one key (see
:mod:`pipelines.flows.keys`): the Parquet tables of the run-folder contract, a pickled result
object for the next stage and ``entry.json`` (warnings, notes, file list). An entry is built in
a hidden staging folder and renamed into place when complete, so a killed run leaves no
half-written entry, two runs computing the same key at once both succeed (the second rename
finds the folder there and discards its copy), and a re-run reuses every finished entry.
"""

from __future__ import annotations

import json
import os
import pathlib
import pickle
import shutil
import time
from dataclasses import dataclass
from typing import Any, Callable

from pipelines.runfolder import (atomic_write_bytes, atomic_write_json, publish_folder,
                                 sha256_file, staging_folder)

__all__ = ["WorkStore", "ENTRY_FILE", "RESULT_FILE"]

ENTRY_FILE = "entry.json"
RESULT_FILE = "result.pkl"


@dataclass(frozen=True)
class WorkStore:
    """A work store rooted at ``root`` (created on first write)."""

    root: str

    def entry_dir(self, stage: str, key: str) -> pathlib.Path:
        return pathlib.Path(self.root) / stage / key[:2] / key

    def lookup(self, stage: str, key: str) -> dict[str, Any] | None:
        """The finished entry's description, or ``None`` when there is none."""
        folder = self.entry_dir(stage, key)
        try:
            info = json.loads((folder / ENTRY_FILE).read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        files = info.get("files", {})
        if not all((folder / name).is_file() for name in files.values()):
            return None
        return _described(folder, info)

    def build(self, stage: str, key: str, produce: Callable[[pathlib.Path], dict[str, Any]],
              replace: bool = False) -> dict[str, Any]:
        """Run ``produce(staging_dir)`` and publish its folder as the entry for ``key``.

        ``produce`` writes its files into the staging folder and returns the entry description
        (``files``: logical name -> file name, plus ``warnings``, ``notes`` and anything small).
        With ``replace`` an existing entry is retired first (``--recompute``); otherwise an
        entry published meanwhile by another run wins and the new copy is discarded.
        """
        target = self.entry_dir(stage, key)
        if replace and target.exists():
            retired = target.with_name(f".{key}.retired-{os.getpid()}-{time.monotonic_ns()}")
            try:
                os.rename(target, retired)
                shutil.rmtree(retired, ignore_errors=True)
            except OSError:
                pass
        with staging_folder(target.parent, key) as staged:
            info = produce(staged)
            info.setdefault("files", {})
            info.setdefault("warnings", [])
            info.setdefault("notes", [])
            info["stage"], info["key"] = stage, key
            info["sha256"] = {}
            for file in sorted(staged.iterdir()):
                file.chmod(0o444)  # finished results are hard-linked into run folders: never edit
                info["sha256"][file.name] = sha256_file(file)
            atomic_write_json(staged / ENTRY_FILE, info)
            publish_folder(staged, target)
        found = self.lookup(stage, key)
        if found is None:  # pragma: no cover - published folder vanished underneath us
            raise RuntimeError(f"work store entry {target} disappeared after publishing")
        return found


def _described(folder: pathlib.Path, info: dict[str, Any]) -> dict[str, Any]:
    out = dict(info)
    out["dir"] = str(folder)
    out["paths"] = {name: str(folder / file) for name, file in info.get("files", {}).items()}
    return out


def save_object(folder: pathlib.Path, obj: Any, name: str = RESULT_FILE) -> str:
    """Pickle a stage result into an entry folder (internal cache format, never an output)."""
    atomic_write_bytes(folder / name, pickle.dumps(obj, protocol=5), sync_folder=False)
    return name


def load_object(entry: dict[str, Any], name: str = "result") -> Any:
    """Load the pickled result of a finished entry."""
    with open(entry["paths"][name], "rb") as handle:
        return pickle.load(handle)
