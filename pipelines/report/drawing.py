"""Who draws which figure of a report: this process, and a helper process on a second CPU.

Drawing is most of a report's time (Matplotlib layout and text, ~0.25 s a figure) and the
figures are independent, so a report of several cores is drawn by two processes: this one and
one helper (:class:`ReportHelper`). Both walk the report's figures in the same order; each
figure is *claimed* by whoever reaches it first (a file created exclusively in a private claims
folder), so the work is shared out as it goes, whatever the speed of either process. During
a run the helper is started with the flow (its imports overlap the science), draws each core's
figures as soon as the core's folder is published (a core's figures need only its own tables),
and at the end writes the exports (CSV copies, netCDF) before it joins the drawing. The
report page is then assembled in this process from every drawn figure, in the report's order.
A figure's bytes depend only on the run folder, never on which process drew it (fixed SVG hash
salt, no dates), so the report is byte-identical to one drawn alone; a figure the helper
claimed but did not deliver (it crashed) is drawn here.
"""

from __future__ import annotations

import concurrent.futures
import multiprocessing
import os
import pathlib
import re
import shutil
import tempfile
import threading
from typing import Callable

from pipelines.report import style
from pipelines.spawning import helper_context
from pipelines.spawning import main_script_not_rerun as _main_script_not_rerun

__all__ = ["FigureClaims", "DrawnFigures", "ReportHelper", "ForkedHelper", "fork_is_safe",
           "helpers_wanted", "own_helper", "HELPERS_ENV", "HELPER_MIN_CORES"]

#: environment variable: helper processes for drawing (0 = draw everything in this process)
HELPERS_ENV = "DOWNCORE_REPORT_HELPERS"

#: a run with fewer cores holding tables is drawn in one process (starting a helper costs
#: ~1.5 s of imports, more than a small report takes to draw)
HELPER_MIN_CORES = 3


def helpers_wanted(n_cores_with_tables: int, helpers: int | None = None,
                   min_cores: int = HELPER_MIN_CORES) -> int:
    """How many helper processes to draw with: ``helpers`` if given, else ``$DOWNCORE_REPORT_HELPERS``,
    else one on a machine of two or more CPUs for a run of ``min_cores`` cores or more."""
    if helpers is None and os.environ.get(HELPERS_ENV, "").strip():
        helpers = int(os.environ[HELPERS_ENV])
    if helpers is None:
        helpers = 1 if (os.cpu_count() or 1) >= 2 and n_cores_with_tables >= min_cores else 0
    return max(0, min(int(helpers), 1))


class FigureClaims:
    """Exclusive claims on figure keys, shared between processes through a folder."""

    def __init__(self, folder: str):
        self.folder = folder

    @classmethod
    def create(cls) -> "FigureClaims":
        return cls(tempfile.mkdtemp(prefix="downcore-figure-claims-"))

    def claim(self, key: str) -> bool:
        """True for the first process to ask for ``key``, False for every later one."""
        try:
            name = re.sub(r"[^A-Za-z0-9_.-]+", "_", key)
            os.close(os.open(os.path.join(self.folder, name), os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600))
        except FileExistsError:
            return False
        return True

    def remove(self) -> None:
        shutil.rmtree(self.folder, ignore_errors=True)


class DrawnFigures:
    """The figures one process drew (key -> :class:`~pipelines.report.style.SavedFigure`, or
    ``None`` for a figure the tables do not allow)."""

    def __init__(self, run_dir: pathlib.Path, png: bool, claims: FigureClaims | None):
        self.run_dir, self.png, self.claims = run_dir, png, claims
        self.drawn: dict[str, style.SavedFigure | None] = {}

    def draw(self, make: Callable[[], object], key: str, title: str, caption: str) -> None:
        """Draw and save figure ``key`` unless another process has claimed it."""
        if key in self.drawn or (self.claims is not None and not self.claims.claim(key)):
            return
        fig = make()
        self.drawn[key] = None if fig is None else style.save_figure(fig, self.run_dir, key, title, caption,
                                                                      png=self.png)


def _warm_up() -> None:
    """Import what drawing and the exports need (in the helper, while the science runs)."""
    import pipelines.report.build  # noqa: F401
    import pipelines.report.exports  # noqa: F401


def _exports_part(run_dir: str, exports) -> dict:
    """The exports a helper was asked for (``exports``: False, True or ``{"csv": bool}``,
    optionally with ``"netcdf": False`` when the report's own process writes the netCDF):
    ``{"exports": None or the failure's text, "written": [paths], "unreadable": [sentences]}``
    (``written`` is None when none were asked for)."""
    if not exports:
        return {"exports": None, "written": None, "unreadable": []}
    from pipelines.report.exports import write_exports

    asked = exports if isinstance(exports, dict) else {}
    unreadable: list[str] = []
    try:
        written = [str(p) for p in write_exports(run_dir, csv=asked.get("csv", True), unreadable=unreadable,
                                                 netcdf=asked.get("netcdf", True))]
    except Exception as error:  # noqa: BLE001 - reported by the caller (a run note, or done again)
        return {"exports": f"{type(error).__name__}: {error}", "written": None, "unreadable": []}
    return {"exports": None, "written": written, "unreadable": unreadable}


def _helper_job(run_dir: str, png: bool, claims_folder: str, exports) -> dict:
    """The helper process: the exports first (when asked), then every figure nobody has
    claimed yet. Returns ``{"drawn": {...}}`` and :func:`_exports_part`'s keys."""
    from pipelines.report.build import draw_claimed

    done = _exports_part(run_dir, exports)
    return {"drawn": draw_claimed(pathlib.Path(run_dir), png, FigureClaims(claims_folder)), **done}


#: the run a :class:`ForkedHelper` draws (read by this process before the fork, inherited)
_FORKED_RUN = None


def _forked_job(png: bool, claims_folder: str, exports) -> dict:
    """A forked helper's part (as :func:`_helper_job`), on the run read before the fork."""
    from pipelines.report.build import draw_claimed

    run = _FORKED_RUN
    done = _exports_part(str(run.folder), exports)
    return {"drawn": draw_claimed(run, png, FigureClaims(claims_folder)), **done}


def _core_job(run_dir: str, core_id: str, claims_folder: str) -> dict:
    """The helper process: the figures of one published core (see :meth:`ReportHelper.draw_core`)."""
    from pipelines.report.build import draw_core_claimed

    return draw_core_claimed(pathlib.Path(run_dir), core_id, FigureClaims(claims_folder))


def _submitted(executor, job, *args) -> concurrent.futures.Future:
    """``executor.submit(job, *args)``, or a failed future when the helper has died."""
    try:
        return executor.submit(job, *args)
    except RuntimeError as error:  # BrokenProcessPool is a RuntimeError
        future: concurrent.futures.Future = concurrent.futures.Future()
        future.set_exception(error)
        return future


class ReportHelper:
    """One helper process for a report (see the module docstring), started early so that its
    imports (~1.5 s) overlap the run's science; :meth:`draw_core` has it draw a core's
    figures as soon as the core's folder is published (while the other cores' science runs),
    :meth:`submit` gives it the report to help with."""

    def __init__(self) -> None:
        self.executor = concurrent.futures.ProcessPoolExecutor(
            max_workers=1, mp_context=helper_context())
        with _main_script_not_rerun():  # the one process is spawned here, by the first task
            self.executor.submit(_warm_up)
        self.claims = FigureClaims.create()
        self._early: list[concurrent.futures.Future] = []

    def draw_core(self, run_dir: pathlib.Path, core_id: str) -> None:
        """Draw the figures of a core whose folder is published (those that need nothing but
        its own tables), claiming them for this run's report."""
        try:
            self._early.append(self.executor.submit(_core_job, str(run_dir), core_id, self.claims.folder))
        except RuntimeError:  # the helper died (BrokenProcessPool) or is closed: drawn by the report
            pass

    def early_figures(self) -> dict:
        """The figures :meth:`draw_core` delivered (a failed job's figures are drawn later)."""
        drawn: dict = {}
        for future in self._early:
            try:
                drawn.update(future.result())
            except Exception:  # noqa: BLE001 - claimed but not delivered: drawn by the report
                pass
        return drawn

    @classmethod
    def start_if_useful(cls) -> "ReportHelper | None":
        """A helper on a machine of two or more CPUs (unless ``$DOWNCORE_REPORT_HELPERS`` is 0);
        ``None`` when none can be started."""
        if os.environ.get(HELPERS_ENV, "").strip() == "0" or (os.cpu_count() or 1) < 2:
            return None
        try:
            return cls()
        except (OSError, RuntimeError):
            return None

    def submit(self, run_dir: pathlib.Path, png: bool, claims: FigureClaims,
               exports=False) -> concurrent.futures.Future:
        """The helper's part of a report (a failed future when the helper has died);
        ``exports`` as :func:`_exports_part` takes it."""
        return _submitted(self.executor, _helper_job, str(run_dir), png, claims.folder, exports)

    def close(self) -> None:
        self.executor.shutdown(wait=True, cancel_futures=True)
        self.claims.remove()


def fork_is_safe() -> bool:
    """True where a helper can be forked from this process: the platform forks and this
    process runs no other Python thread (a thread holding a lock at the fork would leave the
    child stuck on it)."""
    return "fork" in multiprocessing.get_all_start_methods() and threading.active_count() == 1


class ForkedHelper:
    """A helper process forked from this one once the run folder is read: it shares this
    process's imports and tables, so it starts drawing at once (a spawned
    :class:`ReportHelper` spends ~1.5 s importing and reading first). Used by a report that
    was given no helper, where :func:`fork_is_safe`."""

    def __init__(self, run) -> None:
        global _FORKED_RUN
        _FORKED_RUN = run
        self.run = run
        self.executor = concurrent.futures.ProcessPoolExecutor(
            max_workers=1, mp_context=multiprocessing.get_context("fork"))

    def submit(self, run_dir: pathlib.Path, png: bool, claims: FigureClaims,
               exports=False) -> concurrent.futures.Future:
        """The helper's part of the report of ``self.run`` (``run_dir`` is its folder)."""
        return _submitted(self.executor, _forked_job, png, claims.folder, exports)

    def close(self) -> None:
        global _FORKED_RUN
        self.executor.shutdown(wait=True, cancel_futures=True)
        _FORKED_RUN = None


def own_helper(run, helpers: int | None):
    """A helper for a report given none (``run`` read already): forked from this process where
    that is safe (it costs nothing to start, so any run with tables is worth it), else spawned
    for a run of :data:`HELPER_MIN_CORES` cores or more; ``None`` when not wanted."""
    with_tables = sum(bool(c.tables) for c in run.cores)
    if fork_is_safe():
        return ForkedHelper(run) if helpers_wanted(with_tables, helpers, min_cores=1) else None
    return ReportHelper.start_if_useful() if helpers_wanted(with_tables, helpers) else None
