"""Stage runner of the per-sample table (``<core id>/samples_dated.parquet``).

It runs for every core whose chronology finished, whatever happened after (calibration
skipped, reconstruction thin or failed), just before the core's folder is published (a stage
of :data:`pipelines.flows.stage_table.STAGES` with ``at_publish``), so that
every dated core has its samples with ages -- calibrated or not. The science is
:func:`proxies.reconstruction.dated_samples.dated_sample_table`. The stage writes the table's
CSV copy (``samples_dated.csv``) beside it in its work-store entry, so the CSV exists with
``--no-report`` too; its bytes are those the exports write for any other table
(:func:`pipelines.report.csv.table_csv_text` of the Parquet file read back).
"""

from __future__ import annotations

import pathlib

from pipelines.flows.plan import RunPlan
from pipelines.flows.shared import shared_result
from pipelines.flows.stages import _cached_or_build, _collect_warnings, _unique, write_tables
from pipelines.flows.store import WorkStore, load_object
from pipelines.outputs_tables import TABLES
from pipelines.runfolder import atomic_write_bytes

__all__ = ["run_dated_samples", "write_csv_copies"]


def run_dated_samples(plan: RunPlan, store: WorkStore, key: str, recompute: bool, *, ingest: dict,
                      chronology: dict, calibration: dict | None) -> dict:
    """Write the per-sample table of one core (ages from its chronology, calibrated values
    from its calibration when there is one: ``calibration`` is ``None`` when the core's
    calibration was skipped or failed)."""
    core_id = ingest["core_id"]

    def produce(staged: pathlib.Path) -> dict:
        from proxies.reconstruction.dated_samples import dated_sample_table

        core, chron = shared_result(ingest), load_object(chronology)
        cal = load_object(calibration) if calibration else None
        with _collect_warnings() as caught:
            result = dated_sample_table(core, chron, cal)
        files = write_tables(staged, {"samples_dated": result.table})
        files.update(write_csv_copies(staged, ["samples_dated"]))
        return {"files": files, "n_samples": len(result.table), "warnings": _unique(caught)}

    return _cached_or_build(store, "samples", key, produce, {"core_id": core_id}, recompute)


def write_csv_copies(staged: pathlib.Path, keys: list[str]) -> dict[str, str]:
    """Write the CSV copy beside each table of ``keys`` declared ``with_csv`` (read back from
    its Parquet file, so the text is what the exports would write from the run folder);
    returns ``{file name: file name}`` for the entry."""
    import pyarrow.parquet as pq

    from pipelines.report.csv import table_csv_text

    files = {}
    for key in keys:
        spec = TABLES[key]
        if spec.with_csv:
            text = table_csv_text(pq.read_table(staged / spec.file_name).to_pandas())
            atomic_write_bytes(staged / spec.csv_file_name, text.encode("utf-8"), sync_folder=False)
            files[spec.csv_file_name] = spec.csv_file_name
    return files
