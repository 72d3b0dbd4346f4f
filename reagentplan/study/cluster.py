"""Running a study's cases on Dask distributed.

``cluster="local"`` starts a `distributed.LocalCluster` of ``workers`` processes (one
thread each: a case is one solve, and the solver and numpy would only fight over the
cores); an address (``tcp://host:8786``) connects to a running scheduler, whose workers
must have reagentplan installed.  ``cluster="serial"`` runs the cases one after the
other in this process, without Dask (for debugging, and as the reference the tests
compare a cluster's results with).

The shared futures (`reagentplan.forecast.futures.DriverSamples`) are scattered once,
to every worker (``broadcast=True``); each case is a task of `run_case` that refers to
them, so they are not shipped again per case.  Results come back as they finish
(``as_completed``, counted by a tqdm bar); a case that raises or times out comes back as
a row with its status and the rest go on.  Ctrl-C cancels the cases not finished and
returns those that are, marked ``interrupted``.
"""

from __future__ import annotations

import contextlib
import functools
import logging
import os
import signal
import sys
import threading
import time
import uuid
from collections.abc import Callable, Iterator
from dataclasses import dataclass

from ..forecast.futures import DriverSamples
from .grid import Case
from ..settings import PlanSettings
from .run import failed_row, run_case

#: Status of a case that Ctrl-C stopped before it finished.
NOT_RUN = "not run"


@dataclass
class StudyRun:
    """What came back from the cases.

    Attributes
    ----------
    rows : one result row per case, in case order.
    interrupted : Ctrl-C stopped the study; unfinished cases have status ``not run``.
    where : ``serial``, ``local`` or the scheduler's address.
    workers : number of workers that ran the cases.
    dashboard : the Dask dashboard's address, when there is one.
    scatter_seconds : time to ship the shared futures to every worker [s].
    seconds : wall time from the first submission to the last result [s].
    """

    rows: list[dict]
    interrupted: bool
    where: str
    workers: int
    dashboard: str | None
    scatter_seconds: float
    seconds: float


def default_workers() -> int:
    """One worker per core [-]."""
    return max(1, os.cpu_count() or 1)


@contextlib.contextmanager
def study_client(cluster: str = "local", workers: int | None = None, *,
                 dashboard: bool = True) -> Iterator[object]:
    """A `distributed.Client` for a study; the `LocalCluster` it started (if any) is
    closed on exit.  ``cluster`` is ``local`` or a scheduler address."""
    from distributed import Client, LocalCluster

    if cluster == "local":
        n = workers or default_workers()
        # Ctrl-C in a terminal reaches the whole process group: the worker processes are
        # started with SIGINT ignored, so only this process handles it (and closes them)
        # the workers' own log lines are silenced up to CRITICAL: a case that fails reaches
        # the study as its future's exception (with its message), and what they log
        # otherwise is shutdown noise (on a loaded machine, after Ctrl-C, a worker's
        # heartbeat to the scheduler already closed logs an ERROR with a traceback)
        with _sigint_ignored():
            local = LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                                 dashboard_address=":0" if dashboard else None,
                                 silence_logs=logging.CRITICAL)
        try:
            with Client(local) as client:
                yield client
        finally:
            local.close()
    else:
        with Client(cluster, timeout="20s") as client:
            yield client


@contextlib.contextmanager
def _sigint_ignored() -> Iterator[None]:
    """SIGINT ignored while child processes are started (they inherit it); restored
    after.  Only in the main thread, where signal handlers can be set."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    before = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, before)


class StudyClusterError(RuntimeError):
    """The cluster could not take the study (its workers cannot load the shared
    futures: most often a different reagentplan on the workers)."""


def dashboard_link(client) -> str | None:
    """The Dask dashboard's address, or ``None`` when the scheduler serves none."""
    try:
        if not client.run_on_scheduler(_serves_dashboard):
            return None
        link = client.dashboard_link
    except Exception:  # noqa: BLE001 - no dashboard (bokeh missing, or disabled)
        return None
    return link or None


def _serves_dashboard(dask_scheduler) -> bool:
    """Run on the scheduler: whether its web server carries the Bokeh dashboard (it
    serves only health and metrics without it)."""
    apps = getattr(dask_scheduler.http_application, "applications", [])
    return any("Bokeh" in type(a).__name__ for a in apps)


def _probe(shared) -> int:
    """Run in a worker: the shared futures arrived and load (their number of futures)."""
    return int(shared.n_futures)


def run_cases(cases: tuple[Case, ...] | list[Case], shared: DriverSamples | None, settings: PlanSettings,
              client=None, *, case_timeout: float | None = None, progress: bool = True,
              case_fn: Callable = run_case, failed_fn: Callable[..., dict] = failed_row,
              on_start: Callable[[StudyRun], None] | None = None) -> StudyRun:
    """Run every case (``case_fn(case, shared, settings)``, by default the station
    study's `run_case`) against the shared futures; serially when ``client`` is
    ``None``.  ``case_timeout``: see `run_case` (passed on to ``case_fn``).

    Any study runs here: ``case_fn`` plans one case and returns its row (a failure as a
    row, as `reagentplan.study.run.run_guarded` makes it), ``failed_fn(case, status,
    message)`` is the row of a case that came back with no row (a lost worker) or did
    not run (Ctrl-C), and ``shared`` is what every case reads, scattered once to every
    worker (``None``: nothing shared, ``case_fn`` gets ``None``).  ``cases`` need a
    ``case`` number.

    ``on_start`` is called once the futures are on the workers (with the workers and
    the dashboard filled in), before the first case runs.  Rows come back in case order
    whatever order the cases finished in.
    """
    from tqdm import tqdm

    if case_timeout is not None:
        case_fn = functools.partial(case_fn, case_timeout=case_timeout)
    by_case: dict[int, dict] = {}
    interrupted = False
    if client is None:
        info = StudyRun([], False, "serial", 1, None, 0.0, 0.0)
        if on_start:
            on_start(info)
        t0 = time.perf_counter()
        bar = tqdm(total=len(cases), desc="cases", unit="case", file=sys.stderr,
                   disable=not progress)
        try:
            for case in cases:
                by_case[case.case] = case_fn(case, shared, settings)
                bar.update(1)
        except KeyboardInterrupt:
            interrupted = True
        finally:
            bar.close()
        info.rows = _ordered(cases, by_case, interrupted, failed_fn)
        info.interrupted, info.seconds = interrupted, time.perf_counter() - t0
        return info

    from distributed import as_completed

    n_workers = len(client.scheduler_info(n_workers=-1).get("workers", {})) or 1
    t0 = time.perf_counter()
    shared_f, scatter = None, 0.0
    try:
        if shared is not None:
            shared_f = client.scatter(shared, broadcast=True, hash=False)
            shared_f.result()
            scatter = time.perf_counter() - t0
            client.submit(_probe, shared_f, pure=False).result()
    except Exception as exc:  # noqa: BLE001 - whatever the workers answer, say it plainly
        import reagentplan

        raise StudyClusterError(
            f"the workers could not load the shared futures ({type(exc).__name__}: {exc}); "
            f"they need the same reagentplan as this machine (version "
            f"{reagentplan.__version__}, from {os.path.dirname(reagentplan.__file__)})") from None
    info = StudyRun([], False, getattr(client.scheduler, "address", "?"), n_workers,
                    dashboard_link(client), scatter, 0.0)
    if on_start:
        on_start(info)
    token = uuid.uuid4().hex[:8]
    t0 = time.perf_counter()
    futures = {}
    bar = tqdm(total=len(cases), desc="cases", unit="case", file=sys.stderr, disable=not progress)
    try:
        for case in cases:
            f = client.submit(case_fn, case, shared_f, settings, key=f"study-{token}-case-{case.case}",
                              pure=False, retries=0)
            futures[f.key] = (f, case)
        for f in as_completed([f for f, _ in futures.values()]):
            case = futures[f.key][1]
            try:
                by_case[case.case] = f.result()
            except Exception as exc:  # noqa: BLE001 - lost worker, unpicklable result...
                by_case[case.case] = failed_fn(case, "failed", f"{type(exc).__name__}: {exc}")
            bar.update(1)
    except KeyboardInterrupt:
        interrupted = True
        pending = [f for f, case in futures.values() if case.case not in by_case]
        with contextlib.suppress(Exception):
            client.cancel(pending, force=True)
    finally:
        bar.close()
        if shared_f is not None:
            with contextlib.suppress(Exception):
                shared_f.release()  # its own key (hash=False): no other study shares it
    info.rows = _ordered(cases, by_case, interrupted, failed_fn)
    info.interrupted, info.seconds = interrupted, time.perf_counter() - t0
    return info


def run_on_cluster(cases, shared: DriverSamples | None, settings: PlanSettings, *, cluster: str = "local",
                   workers: int | None = None, dashboard: bool = True, case_timeout: float | None = None,
                   progress: bool = True, on_start: Callable[[StudyRun], None] | None = None,
                   case_fn: Callable = run_case, failed_fn: Callable[..., dict] = failed_row) -> StudyRun:
    """`run_cases` on ``cluster``: ``serial`` (in this process), ``local`` (a
    `LocalCluster` of ``workers`` processes, closed after) or a scheduler's address
    (`study_client`; ``dashboard``: whether a local cluster serves the Dask dashboard).
    A second Ctrl-C while the cluster closes keeps the rows that came back (the run is
    marked interrupted); one before any came back is raised."""
    if cluster == "serial":
        return run_cases(cases, shared, settings, None, case_timeout=case_timeout, progress=progress,
                         case_fn=case_fn, failed_fn=failed_fn, on_start=on_start)
    run = None
    try:
        with study_client(cluster, workers, dashboard=dashboard) as client:
            run = run_cases(cases, shared, settings, client, case_timeout=case_timeout, progress=progress,
                            case_fn=case_fn, failed_fn=failed_fn, on_start=on_start)
    except KeyboardInterrupt:  # a second Ctrl-C while the cluster closes
        if run is None:
            raise
        run.interrupted = True
    return run


def _ordered(cases, by_case: dict[int, dict], interrupted: bool, failed_fn: Callable[..., dict] = failed_row
             ) -> list[dict]:
    rows = []
    for case in cases:
        row = by_case.get(case.case)
        if row is None:
            row = failed_fn(case, NOT_RUN, "stopped by Ctrl-C before it finished"
                             if interrupted else "no result")
        rows.append(row)
    return rows


__all__ = ["StudyRun", "StudyClusterError", "study_client", "run_cases", "run_on_cluster", "dashboard_link",
           "default_workers", "NOT_RUN"]
