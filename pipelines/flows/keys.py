"""Cache keys: content hashes of a task's inputs, settings and the science code.

A key changes when, and only when, something that can change a stage's result changes: the
bytes of its input files, its settings, the run seed or ensemble size, the key of the stage
before it, or the source code of the science package (``proxies``) and of the modules that
read inputs and run stages. Prefect's ``TASK_SOURCE`` policy alone misses changes in the
functions a task calls (measured, see ../shared/PREFECT.md), hence :func:`code_fingerprint`.
"""

from __future__ import annotations

import dataclasses
import enum
import functools
import hashlib
import json
import math
import pathlib
from typing import Any

import numpy as np

__all__ = ["canonical", "content_key", "code_fingerprint", "KEY_FORMAT"]

#: bump to invalidate every cache entry written by an older layout of the work store
KEY_FORMAT = "downcore-key/1"

_PIPELINE_MODULES = ("ingest.py", "tables.py", "config.py", "curvefiles.py", "auxiliary.py",
                     "runfolder.py", "flows/stages.py", "flows/dated_samples.py", "flows/keys.py",
                     "flows/store.py", "flows/shared.py", "report/csv.py")


def canonical(value: Any) -> Any:
    """A JSON-ready, order-independent form of settings and other small values.

    Dataclasses become dicts (tagged with their class name), mappings are key-sorted, tuples
    and sets become lists, floats keep their exact ``repr`` and paths become strings.
    """
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        fields = {f.name: canonical(getattr(value, f.name)) for f in dataclasses.fields(value)}
        return {"__class__": type(value).__qualname__, **fields}
    if isinstance(value, dict):
        return {str(k): canonical(v) for k, v in sorted(value.items(), key=lambda kv: str(kv[0]))}
    if isinstance(value, (list, tuple)):
        return [canonical(v) for v in value]
    if isinstance(value, (set, frozenset)):
        return sorted(canonical(v) for v in value)
    if isinstance(value, enum.Enum):
        return canonical(value.value)
    if isinstance(value, np.ndarray):
        return {"__array__": hashlib.sha256(np.ascontiguousarray(value).tobytes()).hexdigest(),
                "dtype": str(value.dtype), "shape": list(value.shape)}
    if isinstance(value, np.generic):
        return canonical(value.item())
    if isinstance(value, float):
        return repr(value) if not math.isfinite(value) else float.hex(value)
    if isinstance(value, pathlib.PurePath):
        return str(value)
    if value is None or isinstance(value, (str, int, bool)):
        return value
    return repr(value)


def content_key(*parts: Any) -> str:
    """SHA-256 (hex) of the canonical JSON of ``parts`` prefixed with :data:`KEY_FORMAT`."""
    text = json.dumps([KEY_FORMAT, *map(canonical, parts)], sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


@functools.lru_cache(maxsize=1)
def code_fingerprint() -> str:
    """SHA-256 over the source of the ``proxies`` package and the input/stage modules of
    ``pipelines`` (file names and bytes, in sorted order)."""
    import pipelines
    import proxies

    digest = hashlib.sha256()
    science = pathlib.Path(proxies.__file__).parent
    files = [(f"proxies/{p.relative_to(science).as_posix()}", p) for p in science.rglob("*.py")]
    pipes = pathlib.Path(pipelines.__file__).parent
    files += [(f"pipelines/{name}", pipes / name) for name in _PIPELINE_MODULES if (pipes / name).is_file()]
    for name, path in sorted(files):
        digest.update(name.encode("utf-8") + b"\0" + path.read_bytes() + b"\0")
    return digest.hexdigest()
