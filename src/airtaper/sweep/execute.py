"""Running a sweep's scenarios on Dask: a local cluster sized to the machine, or an existing one.

:func:`run_tasks` submits one task per scenario and yields each row as it
arrives. A task is a plain dict (picklable, the same for every cluster); the
function that runs it is passed in by the command (``airtaper sweep`` runs the
``optimize`` command in each worker), must be importable by the workers, and
writes the scenario's row file itself before returning it: a row reaches the
disk even when the client is stopped at that moment.

The local cluster has one process per core with one thread each: Ipopt with
MUMPS and the Python interpreter's lock give nothing to a second thread, and a
process per scenario keeps a solver's crash to one worker (the nanny restarts it
and the scheduler hands its scenario to another; a scenario whose workers keep
dying becomes a ``lost`` row, not written to the journal, so the next run tries it
again). ``scheduler`` names an existing Dask scheduler (``tcp://host:8786``); its
workers need airtaper importable and the sweep folder and layout on a shared
file system, and the cluster is used as it is.
"""

from __future__ import annotations

import logging
import os
import sys
import time
from typing import Callable, Iterator

from airtaper.errors import EXIT_FAILURE, InputError, Problem


def machine_workers() -> int:
    """Cores this process may run on (the local cluster's default size)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def _peak_rss_bytes() -> int:
    """This process's peak resident memory (run on each worker)."""
    import resource

    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return int(peak if sys.platform == "darwin" else peak * 1024)


def lost_row(task: dict, message: str) -> dict:
    """The row of a scenario whose task did not return (a worker lost, an internal failure)."""
    return {"scenario": task["id"], "inputs": task["inputs"], "status": "lost", "exit_code": EXIT_FAILURE,
            "message": message, "folder": None, "fingerprint": None}


class Progress:
    """One line on stderr: scenarios done of all, failed, elapsed; rewritten in place on a terminal."""

    def __init__(self, total: int, enabled: bool = True, stream=None):
        self.total, self.done, self.failed = total, 0, 0
        self.enabled = enabled
        self.stream = stream if stream is not None else sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.t0 = time.perf_counter()

    def update(self, row: dict) -> None:
        self.done += 1
        self.failed += row.get("exit_code") not in (0,)
        if not self.enabled:
            return
        width = 30
        filled = int(width * self.done / max(1, self.total))
        text = (f"[{'#' * filled}{'.' * (width - filled)}] {self.done}/{self.total} scenarios, "
                f"{self.failed} not optimal, {time.perf_counter() - self.t0:6.1f} s")
        if self.tty:
            self.stream.write("\r" + text + ("\n" if self.done == self.total else ""))
        elif self.done == self.total or self.done % max(1, self.total // 20) == 0:
            self.stream.write(text + "\n")
        self.stream.flush()


def _client(scheduler: str | None, workers: int | None):
    """(client, cluster or None). An unreachable scheduler is bad input naming --scheduler."""
    from dask.distributed import Client, LocalCluster

    if scheduler:
        try:
            return Client(scheduler, timeout="20s"), None
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(Problem("<command line>", "--scheduler", f"cannot reach the Dask scheduler: {exc}",
                                     scheduler, "the address of a running scheduler, e.g. tcp://host:8786")) \
                from None
    # A cluster stopped by Ctrl-C or SIGTERM leaves multiprocessing's tracker a raw "leaked semaphore" warning to
    # print at exit: the interruption is reported in words already, so the tracker (started with this process's
    # -W options) is told to keep it to itself.
    quiet = "ignore::UserWarning:multiprocessing.resource_tracker"
    if quiet not in sys.warnoptions:
        sys.warnoptions.append(quiet)
    cluster = LocalCluster(n_workers=workers or machine_workers(), threads_per_worker=1, processes=True,
                           dashboard_address=":0", silence_logs=logging.ERROR)  # a free port: never a clash
    return Client(cluster), cluster


class Execution:
    """The Dask run of a sweep's tasks; iterate :meth:`rows`, then read ``peak_memory_bytes``."""

    def __init__(self, tasks: list[dict], fn: Callable[[dict], dict], *, scheduler: str | None = None,
                 workers: int | None = None, progress: bool = True):
        self.tasks, self.fn = tasks, fn
        self.scheduler, self.workers = scheduler, workers
        self.progress = Progress(len(tasks), enabled=progress)
        self.peak_memory_bytes: dict[str, int] = {}
        self.n_workers = 0

    def rows(self) -> Iterator[dict]:
        if not self.tasks:
            return
        from dask.distributed import as_completed

        client, cluster = _client(self.scheduler, self.workers)
        futures = {}
        try:
            self.n_workers = len(client.scheduler_info().get("workers", {})) or (self.workers or 0)
            for task in self.tasks:
                fut = client.submit(self.fn, task, key=f"airtaper-{task['id']}-{task['fingerprint'][:12]}",
                                    pure=False)
                futures[fut.key] = (fut, task)
            for fut in as_completed([f for f, _ in futures.values()]):
                task = futures[fut.key][1]
                try:
                    row = fut.result()
                except Exception as exc:  # a worker lost again and again, or a failure outside the command
                    row = lost_row(task, f"{type(exc).__name__}: {exc}")
                # the row is on disk: let the cluster forget the result, so a worker lost later does not make
                # the scheduler compute this scenario again
                futures.pop(fut.key, None)
                fut.release()
                self.progress.update(row)
                yield row
            try:
                self.peak_memory_bytes = client.run(_peak_rss_bytes)
            except Exception:  # a worker gone at the end: the figure is missing, the rows are not
                self.peak_memory_bytes = {}
        finally:
            for fut, _ in futures.values():
                fut.cancel()
            client.close()
            if cluster is not None:
                cluster.close()


def run_serial(tasks: list[dict], fn: Callable[[dict], dict], progress: bool = False) -> Iterator[dict]:
    """The same tasks one by one in this process (the benchmark's reference; tests)."""
    bar = Progress(len(tasks), enabled=progress)
    for task in tasks:
        row = fn(task)
        bar.update(row)
        yield row


__all__ = ["Execution", "lost_row", "machine_workers", "run_serial"]
