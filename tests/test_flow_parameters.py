"""The archive flow's parameters stay small whatever the archive's size.

Prefect sends flow parameters to its server, which refuses large payloads (HTTP 422 at
about 512 KB, measured in ../shared/PREFECT.md); a 1,000-core plan lists 3,000 input files
with their hashes, so the plan itself must never be a flow parameter.
"""

from __future__ import annotations

import inspect
import json

from pipelines.flows.archive import archive_flow, register_plan, unregister_plan, _PLANS


def test_archive_flow_takes_only_small_scalar_parameters():
    signature = inspect.signature(archive_flow.fn)
    for name, parameter in signature.parameters.items():
        assert parameter.annotation in ("str", "str | None", "bool", "tuple[str, ...]"), name


def test_registered_plan_is_found_by_an_id_of_constant_size():
    class FakePlan:
        fingerprint = "f" * 64
        inputs = tuple({"path": f"/cores/C{i:05d}/dates.csv", "sha256": "0" * 64} for i in range(30_000))

    plan = FakePlan()
    key = register_plan(plan)  # type: ignore[arg-type]
    try:
        assert _PLANS[key] is plan
        assert len(json.dumps({"plan_id": key})) < 100
    finally:
        unregister_plan(key)
    assert key not in _PLANS
