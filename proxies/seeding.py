"""Random generators derived from one run seed and stable names.

Every random draw in downcore comes from a generator made here, so that a result depends only
on the run seed and on *what* is being drawn (e.g. ``("chronology", "LAKE-1")``), never on the
order in which tasks were scheduled, the number of workers or the executor.
"""

from __future__ import annotations

import hashlib

import numpy as np

__all__ = ["stable_key", "rng_for"]


def stable_key(name: str) -> int:
    """Map a name to a 32-bit integer that is identical on every platform and process.

    Python's built-in ``hash`` is salted per process, so it cannot be used; the first four
    bytes of the name's SHA-256 are.
    """
    digest = hashlib.sha256(str(name).encode("utf-8")).digest()
    return int.from_bytes(digest[:4], "little")


def rng_for(run_seed: int, *names: str) -> np.random.Generator:
    """Return the generator for one (run seed, stage, core, ...) combination.

    Parameters
    ----------
    run_seed : int
        The run's seed (``[run] seed`` in the run config), a non-negative integer.
    *names : str
        Stable names of what is drawn, outermost first, e.g. ``"chronology", "LAKE-1"``.

    Returns
    -------
    numpy.random.Generator
        A PCG64 generator seeded by ``SeedSequence(run_seed, spawn_key=keys(names))``.

    Examples
    --------
    >>> a = rng_for(7, "chronology", "LAKE-1").normal()
    >>> b = rng_for(7, "chronology", "LAKE-1").normal()
    >>> a == b
    True
    """
    if int(run_seed) < 0:
        raise ValueError(f"run seed must be a non-negative integer, got {run_seed!r}")
    seq = np.random.SeedSequence(int(run_seed), spawn_key=tuple(stable_key(n) for n in names))
    return np.random.Generator(np.random.PCG64(seq))
