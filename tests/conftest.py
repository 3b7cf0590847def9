"""Shared test set-up.

The environment below keeps Prefect offline, quiet and out of the user's home (the
``downcore`` command's own defaults, see ../shared/PREFECT.md). Flow tests ask for the
``prefect_harness`` fixture, which starts one ``prefect_test_harness`` per test session (per
xdist worker).
"""

from __future__ import annotations

import os
import pathlib
import tempfile

from pipelines.flows.runners import apply_environment_defaults  # imports no Prefect

os.environ.setdefault("PREFECT_HOME", tempfile.mkdtemp(prefix="downcore-test-prefect-"))
apply_environment_defaults()  # the quiet, offline defaults the downcore command sets
# the science runs in the tasks' threads (a test's patch of this process is seen by every stage);
# tests/test_science_pool.py turns the worker processes on
os.environ.setdefault("DOWNCORE_SCIENCE_PROCESSES", "0")

import pytest  # noqa: E402

REPO_ROOT = pathlib.Path(__file__).resolve().parents[1]
SHARED_REFERENCE = REPO_ROOT.parent / "shared" / "reference"
DEMO_CORES = REPO_ROOT / "demo_cores"


@pytest.fixture(scope="session")
def intcal20_path() -> pathlib.Path:
    """The published IntCal20 curve (Reimer et al. 2020, doi:10.1017/RDC.2020.41), tests only."""
    path = SHARED_REFERENCE / "intcal20.14c"
    if not path.exists():
        pytest.skip(f"reference curve not found at {path}")
    return path


@pytest.fixture(scope="session")
def prefect_harness():
    """One Prefect test harness per session; flows run against its temporary database."""
    from prefect.testing.utilities import prefect_test_harness

    with prefect_test_harness(server_startup_timeout=120):
        yield
