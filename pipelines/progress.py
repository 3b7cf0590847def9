"""Progress display for long runs: cores done / total and the stages now running.

Three modes: a live ``rich`` display on a terminal, one line per finished core when the
output is not a terminal (logs, CI), and nothing at all in quiet mode (scripts). The archive
flow calls :meth:`started`, :meth:`stage` and :meth:`finished` from its driver thread; the
run calls :meth:`phase` for the steps around it (waiting for the Prefect server, writing the
report), shown as a spinner with the elapsed time on a terminal and as one line otherwise.
"""

from __future__ import annotations

import collections
import sys
from typing import Any, TextIO

__all__ = ["RunProgress"]


class RunProgress:
    """Progress of one run (see the module docstring).

    Parameters
    ----------
    quiet : bool
        Show nothing.
    stream : file-like
        Where to write (default ``sys.stderr``, so stdout stays clean for scripts).
    live : bool or None
        Force the live display on or off; default: on when ``stream`` is a terminal.
    """

    def __init__(self, quiet: bool = False, stream: TextIO | None = None, live: bool | None = None):
        self.quiet = quiet
        self.stream = stream or sys.stderr
        self.live = (not quiet) and (self.stream.isatty() if live is None else live)
        self.total = 0
        self.done = 0
        self.failed = 0
        self.current: dict[str, str] = {}
        self._progress: Any = None
        self._bar: Any = None
        self._status: Any = None

    def phase(self, text: str) -> None:
        """Say what the run is doing outside the flow (e.g. ``"writing the report"``)."""
        if self.quiet:
            return
        self._end_phase()
        if self.live:
            from rich.console import Console
            from rich.progress import Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

            self._status = Progress(SpinnerColumn(), TextColumn(text), TimeElapsedColumn(),
                                    console=Console(file=self.stream), transient=False)
            self._status.add_task(text, total=None)
            self._status.start()
        else:
            print(f"downcore: {text} ...", file=self.stream, flush=True)

    def _end_phase(self) -> None:
        if self._status is not None:
            self._status.stop()
            self._status = None

    # -- observer interface used by the archive flow -----------------------------------------
    def started(self, total: int) -> None:
        self.total, self.done, self.failed = total, 0, 0
        self._end_phase()
        if self.live:
            from rich.console import Console
            from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

            self._progress = Progress(TextColumn("cores"), BarColumn(), MofNCompleteColumn(),
                                      TimeElapsedColumn(), TextColumn("{task.description}"),
                                      console=Console(file=self.stream), transient=False)
            self._progress.start()
            self._bar = self._progress.add_task("", total=total)

    def stage(self, label: str, stage: str) -> None:
        self.current[label] = stage
        self._refresh()

    def finished(self, track: Any) -> None:
        self.current.pop(track.label, None)
        self.current.pop(track.name, None)
        self.done += 1
        self.failed += track.status == "failed"
        if self.live:
            self._refresh(advance=1)
        elif not self.quiet:
            text = f"[{self.done:>{len(str(self.total))}}/{self.total}] {track.name}: {track.status}"
            text += f" (reached {track.reached or 'none'})"
            if track.error:
                text += f" -- {track.error.splitlines()[0][:160]}"
            print(text, file=self.stream, flush=True)

    def describe(self) -> str:
        """``"chronology 3, calibration 1"``: how many cores are in each running stage."""
        counts = collections.Counter(self.current.values())
        return ", ".join(f"{stage} {n}" for stage, n in sorted(counts.items()))

    def _refresh(self, advance: int = 0) -> None:
        if self._progress is not None:
            extra = f" ({self.failed} failed)" if self.failed else ""
            self._progress.update(self._bar, advance=advance, description=self.describe() + extra)

    def close(self) -> None:
        self._end_phase()
        if self._progress is not None:
            self._progress.stop()
            self._progress = None
