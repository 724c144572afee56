"""Running a sweep on dask.distributed: a local cluster or a scheduler address, progress, Ctrl-C."""

from __future__ import annotations

import math
import os
import signal
import sys
import threading
import time
import traceback
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from rmkit.errors import InputError
from rmkit.workflows.sweep.cells import Cell, expand_cells, run_cell_on, scenario_data
from rmkit.workflows.sweep.grid import Grid
from rmkit.workflows.sweep.read import write_combined
from rmkit.workflows.sweep.store import Store


@dataclass
class SweepReport:
    """What a run did: cells in the grid, found already stored, computed now, and failed."""

    store: Path
    total: int
    resumed: int = 0
    computed: int = 0
    failed: int = 0
    seconds: float = 0.0
    interrupted: bool = False
    cell_ids: tuple[str, ...] = ()
    failures: list[tuple[str, str, int, str]] = field(default_factory=list)
    corrupt: list[str] = field(default_factory=list)  # cell files set aside and recomputed
    dashboard: str = ""  # link of the local cluster's dashboard, when asked for


class SweepInterrupted(KeyboardInterrupt):
    """Ctrl-C during a sweep; ``report`` says what was stored (rerun the command to resume)."""

    def __init__(self, report: SweepReport) -> None:
        self.report = report
        self.stored = len(Store(report.store).stored_ids() & set(report.cell_ids))
        super().__init__(f"interrupted with {self.stored} of {report.total} cells stored in "
                         f"{report.store}")


def _start_client(scheduler: str | None, workers: int | None, dashboard: bool = False):
    import logging

    from distributed import Client, LocalCluster

    if scheduler:
        try:
            return Client(scheduler, timeout="20s"), None
        except OSError as err:
            raise InputError(
                f"scheduler: cannot reach a dask scheduler at {scheduler!r} ({err}); check the "
                "address (tcp://HOST:PORT) and that the scheduler is running"
            ) from None
    n = workers or os.cpu_count() or 1
    if n < 1:
        raise InputError(f"workers: must be >= 1, got {n}")
    # Worker processes inherit an ignored SIGINT, so Ctrl-C in the terminal (sent to the whole
    # process group) stops only this process, which closes the cluster and prints one line.
    main = threading.current_thread() is threading.main_thread()
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN) if main else None
    try:
        cluster = LocalCluster(
            n_workers=n, threads_per_worker=1, processes=True, host="127.0.0.1",
            # the dashboard is an unauthenticated page: only on request, and only on this machine
            dashboard_address="127.0.0.1:0", scheduler_kwargs={"dashboard": dashboard},
            silence_logs=logging.ERROR,
        )
    finally:
        if main:
            signal.signal(signal.SIGINT, previous)
    from rmkit.workflows.sweep.quiet_workers import QuietWorkerLogs

    client = Client(cluster)
    client.register_plugin(QuietWorkerLogs(), name="rmkit-quiet-worker-logs")
    return client, cluster


def run_sweep(
    grid: Grid,
    store: str | Path,
    *,
    scheduler: str | None = None,
    workers: int | None = None,
    retry_failed: bool = False,
    progress: bool = True,
    on_stored: Callable[[Cell, dict[str, Any]], None] | None = None,
    dashboard: bool = False,
) -> SweepReport:
    """Compute every cell of ``grid`` not yet in ``store``, writing each as soon as it finishes.

    Parameters
    ----------
    scheduler
        Address of a running dask scheduler (``tcp://host:8786``); default: start a local cluster.
    workers
        Worker processes of the local cluster (default: one per CPU); ignored with ``scheduler``.
    retry_failed
        Recompute cells stored with status ``error`` (default: keep their recorded error).
    on_stored
        Called in the client after each cell is written (progress hooks, tests).
    dashboard
        Serve the local cluster's dask dashboard on 127.0.0.1 (an unauthenticated page; off by
        default); its link is in the report and printed.

    A stored cell file that cannot be trusted (unreadable, or another cell's) is set aside as
    ``<id>.nc.corrupt``, named on one line on stderr, and its cell computed again.
    """
    started = time.perf_counter()
    cells, scenarios = expand_cells(grid)
    st = Store(store)
    st.create(grid, cells)
    corrupt = st.set_aside_bad(cells)
    if corrupt:
        print(f"rmkit sweep: {len(corrupt)} unreadable or misplaced cell file(s) set aside as "
              f".corrupt in {st.cells} and computed again: {', '.join(corrupt)}", file=sys.stderr)
    st.reconcile(cells)
    statuses = st.statuses()
    todo = [c for c in cells if c.cell_id not in statuses
            or (retry_failed and statuses[c.cell_id] == "error")]
    report = SweepReport(store=st.root, total=len(cells), resumed=len(cells) - len(todo),
                         cell_ids=tuple(c.cell_id for c in cells), corrupt=corrupt)
    if todo:
        _compute(todo, scenarios, st, report, scheduler, workers, progress, on_stored, dashboard)
    if not report.interrupted:
        write_combined(st.root)
    report.seconds = time.perf_counter() - started
    return report


def _preload() -> str:
    """Run on every worker before the cells: import the solvers and the simulator once, so a
    cell's ``seconds`` measure its own work, and report the worker's rmkit version."""
    import rmkit.workflows.simulate  # noqa: F401
    from rmkit._version import __version__
    from rmkit.methods.base import load_all

    load_all()
    return __version__


def _rmkit_version() -> str:
    from rmkit._version import __version__

    return __version__


def _check_workers(client) -> None:
    import warnings

    from rmkit._version import __version__

    try:
        # the scheduler unpickles task graphs, so it needs rmkit as much as the workers do
        versions = {"scheduler": client.run_on_scheduler(_rmkit_version), **client.run(_preload)}
    except Exception as err:  # the scheduler relays an ImportError as a plain Exception
        if "rmkit" not in str(err):
            raise
        raise InputError(
            f"scheduler: the cluster cannot import rmkit ({err}); install rmkit {__version__} "
            "where the scheduler and every worker run"
        ) from None
    other = sorted({v for v in versions.values() if v != __version__})
    if other:
        warnings.warn(f"the cluster runs rmkit {', '.join(other)}, this client {__version__}; "
                      "results may differ from a local run", stacklevel=3)


def _compute(todo, scenarios, st, report, scheduler, workers, progress, on_stored,
             dashboard=False) -> None:

    with _CtrlC() as ctrl_c:
        _compute_on(todo, scenarios, st, report, scheduler, workers, progress, on_stored,
                    dashboard, ctrl_c)


def _compute_on(todo, scenarios, st, report, scheduler, workers, progress, on_stored, dashboard,
                ctrl_c: _CtrlC) -> None:
    from distributed import wait

    client, cluster = _start_client(scheduler, workers, dashboard)
    futures = {}
    if cluster is not None and dashboard:
        report.dashboard = str(cluster.dashboard_link)
        print(f"rmkit sweep: dashboard (unauthenticated, this machine only) at {report.dashboard}",
              file=sys.stderr)
    try:
        _check_workers(client)
        held = {}
        for cell in todo:
            if cell.scenario not in held:
                sc = scenarios[cell.scenario]
                held[cell.scenario] = client.submit(
                    scenario_data, sc.network, sc.demand,
                    key=f"rmkit-scenario-{cell.fingerprint}-{len(held)}", pure=False)
            fut = client.submit(run_cell_on, cell, held[cell.scenario],
                                key=f"rmkit-cell-{cell.cell_id}", pure=False)
            futures[fut.key] = (fut, cell)
        with _Progress(len(todo), report.resumed, enabled=progress) as bar:
            pending = dict(futures)
            while pending:
                ctrl_c.check()
                try:
                    wait([f for f, _ in pending.values()], timeout=0.5, return_when="FIRST_COMPLETED")
                except TimeoutError:  # nothing finished within the poll: refresh the bar
                    pass
                for fut in [f for f, _ in pending.values() if f.done()]:
                    cell = pending.pop(fut.key)[1]
                    record = _collect(fut)
                    st.write(cell, record)
                    report.computed += 1
                    if record["status"] == "error":
                        report.failed += 1
                        report.failures.append(
                            (cell.scenario, cell.method.label, cell.seed, record["error"]))
                    if on_stored is not None:
                        on_stored(cell, record)
                bar.update(report.computed, report.failed, _running(client, pending))
    except KeyboardInterrupt:
        import logging

        report.interrupted = True
        # Ctrl-C: the user wants a prompt, not the cluster's connection-closed tracebacks
        logging.getLogger("distributed").setLevel(logging.CRITICAL)
        for fut, _ in futures.values():
            fut.cancel()
        raise SweepInterrupted(report) from None
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


class _CtrlC:
    """Ctrl-C as a flag that the poll loop turns into KeyboardInterrupt at a safe point. Raised
    wherever the signal lands, it can fall inside a weakref callback or a dask internal, where
    Python prints it and swallows it, and the sweep would go on."""

    def __init__(self) -> None:
        self.pressed = False
        self._previous: Any = None

    def __enter__(self) -> _CtrlC:
        if threading.current_thread() is threading.main_thread():
            self._previous = signal.signal(signal.SIGINT, self._press)
        return self

    def _press(self, signum: int, frame: Any) -> None:
        self.pressed = True

    def check(self) -> None:
        if self.pressed:
            raise KeyboardInterrupt

    def __exit__(self, *exc: object) -> None:
        if self._previous is not None:
            signal.signal(signal.SIGINT, self._previous)


def _collect(fut) -> dict[str, Any]:
    """The cell's record, or an error record when the task itself was lost (e.g. KilledWorker)."""
    try:
        return fut.result()
    except Exception as err:
        return {"value": math.nan, "value_stderr": math.nan, "seconds": math.nan,
                "status": "error", "error": f"{type(err).__name__}: {err}",
                "traceback": traceback.format_exc(limit=4), "revenue": None}


def _running(client, pending: dict) -> int:
    try:
        busy = client.processing()
    except Exception:  # a scheduler hiccup must not stop the sweep; the count is only shown
        return 0
    keys = {str(k) for ks in busy.values() for k in ks}
    return sum(1 for k in pending if str(k) in keys)


class _Progress:
    """A rich progress bar: cells done, running, failed, elapsed and time left."""

    def __init__(self, total: int, resumed: int, enabled: bool) -> None:
        self.total, self.resumed, self.enabled = total, resumed, enabled
        self._bar = None

    def __enter__(self) -> _Progress:
        if self.enabled:
            from rich.console import Console
            from rich.progress import (
                BarColumn,
                MofNCompleteColumn,
                Progress,
                TextColumn,
                TimeElapsedColumn,
                TimeRemainingColumn,
            )

            self._bar = Progress(
                TextColumn("cells"), BarColumn(), MofNCompleteColumn(),
                TextColumn("running {task.fields[running]}  failed {task.fields[failed]}"),
                TextColumn("elapsed"), TimeElapsedColumn(), TextColumn("left"), TimeRemainingColumn(),
                console=Console(stderr=True), transient=False,
            )
            self._bar.start()
            self._task = self._bar.add_task("sweep", total=self.total, running=0, failed=0)
            if self.resumed:
                self._bar.console.print(f"resuming: {self.resumed} cells already stored")
        return self

    def update(self, done: int, failed: int, running: int) -> None:
        if self._bar is not None:
            self._bar.update(self._task, completed=done, running=running, failed=failed)

    def __exit__(self, *exc: object) -> None:
        if self._bar is not None:
            self._bar.stop()
