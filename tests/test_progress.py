"""The progress display: the steps around the flow (server start-up, report writing) are
shown too, as one line each off a terminal and as a spinner on one; quiet shows nothing."""

from __future__ import annotations

import io

from pipelines.progress import RunProgress


class _Track:
    label = name = "CORE-1"
    status = "ok"
    reached = "events"
    error = ""


def test_phases_are_shown_as_lines_off_a_terminal():
    stream = io.StringIO()
    progress = RunProgress(stream=stream, live=False)
    progress.phase("starting the Prefect server")
    progress.started(1)
    progress.finished(_Track())
    progress.phase("writing the report and exports")
    progress.close()
    lines = stream.getvalue().splitlines()
    assert lines == ["downcore: starting the Prefect server ...", "[1/1] CORE-1: ok (reached events)",
                     "downcore: writing the report and exports ..."]


def test_live_phase_is_stopped_by_the_next_step_and_by_close():
    stream = io.StringIO()
    progress = RunProgress(stream=stream, live=True)
    progress.phase("starting the Prefect server")
    assert progress._status is not None
    progress.started(2)
    assert progress._status is None and progress._progress is not None
    progress.phase("writing the report and exports")
    progress.close()
    assert progress._status is None and progress._progress is None
    assert "writing the report and exports" in stream.getvalue()


def test_quiet_shows_nothing():
    stream = io.StringIO()
    progress = RunProgress(quiet=True, stream=stream)
    progress.phase("starting the Prefect server")
    progress.close()
    assert stream.getvalue() == ""
