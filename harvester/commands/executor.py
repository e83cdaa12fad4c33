"""Run an embarrassingly parallel list of tasks: in-process, on local processes, or on Dask.

A design study is a grid of independent tasks (gaps × frequencies × amplitudes × seeds).  Each
task carries everything it needs, its random seed included, so the results are the same whichever
executor runs them; only the wall-clock time changes.

    results = run_tasks(simulate_cell, cells)                           # in this process
    results = run_tasks(simulate_cell, cells, workers=4)                # local process pool
    results = run_tasks(simulate_cell, cells, cluster="tcp://10.0.0.5:8786")   # Dask cluster

`fn` and the tasks must be picklable: a top-level function and frozen dataclasses of plain
values.  On a cluster, every worker must have harvester installed at the same version.

Nothing is lost when a worker is.  A worker process that dies (killed, out of memory) takes its
unfinished tasks with it; they are run again, and the rerun says so on stderr.  The local pool
breaks as a whole when one of its processes dies: the tasks that finished keep their results,
the rest go to a fresh pool (up to `MAX_POOL_RESTARTS` times).  A Dask scheduler reschedules a
dead worker's tasks itself (up to its `distributed.scheduler.allowed-failures`); the run reads
the scheduler's event log to say so.  Since every task carries its seed, a rerun gives the same
numbers.
"""

from __future__ import annotations

import math
import multiprocessing
import re
import sys
import time
from collections.abc import Callable, Iterable, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from harvester.errors import CaseError

Progress = Callable[[int, int], None]

# Small chunks keep the progress bar moving and balance uneven tasks (at the end one worker may
# still run its last chunk while the others idle); a chunk costs about a millisecond to schedule,
# so sixteen per worker trims that tail of a spread's hundreds of builds at no visible cost.
CHUNKS_PER_WORKER = 16
CLUSTER_ADDRESS = re.compile(r"^tcp://(\[[0-9A-Fa-f:.]+\]|[A-Za-z0-9_.-]+):(\d{1,5})$")
_TASK_LABEL_CHARS = 200
# Fresh pools after worker processes died: a task that kills every process it runs on (one that
# runs out of memory, say) fails the run after this many, instead of looping for ever.
MAX_POOL_RESTARTS = 3


class TaskFailed(RuntimeError):
    """One task raised: says which task (index and value) and why.

    The original exception is chained as ``__cause__`` (in-process) or carried as the remote
    traceback text (process pool, Dask).
    """

    def __init__(self, index: int, task_label: str, reason: str):
        # Plain positional args so the exception pickles back from a worker process.
        super().__init__(index, task_label, reason)
        self.index = index
        self.task_label = task_label
        self.reason = reason

    def __str__(self) -> str:
        return f"task {self.index} ({self.task_label}) failed: {self.reason}"


class WorkerLost(RuntimeError):
    """Worker processes kept dying: the tasks they ran were not finished after every rerun."""


def _say(message: str) -> None:
    """A notice on stderr (never stdout, which may carry JSON)."""
    print(f"harvester: {message}", file=sys.stderr, flush=True)


class ClusterUnavailable(RuntimeError):
    """The Dask cluster cannot be used: dask is not installed or the scheduler is unreachable."""


def run_tasks(
    fn: Callable[[Any], Any],
    tasks: Sequence,
    *,
    workers: int | None = None,
    cluster: str | None = None,
    progress: Progress | None = None,
    connect_timeout_s: float = 10.0,
) -> list:
    """Return ``[fn(task) for task in tasks]``, computed serially, on local processes or on Dask.

    Parameters
    ----------
    fn : top-level function of one task (picklable for processes and clusters)
    tasks : the tasks, each picklable and carrying its own seed if it draws random numbers
    workers : local worker processes; None or 1 runs in this process
    cluster : address ``tcp://HOST:PORT`` of a running Dask scheduler (optional extra ``cluster``)
    progress : called as ``progress(done, total)`` once before any work and after each batch
    connect_timeout_s : how long to try to reach the cluster's scheduler [s]

    Returns
    -------
    The results in task order.

    Raises
    ------
    TaskFailed : a task raised; names the task, with the original error chained
    ClusterUnavailable : dask is not installed or the scheduler cannot be reached
    CaseError : a malformed worker count or cluster address
    """
    tasks = list(tasks)
    if workers is not None and (
        isinstance(workers, bool) or not isinstance(workers, int) or workers < 1
    ):
        raise CaseError(f"expected a whole number of workers >= 1, got {workers!r}", key="workers")
    if cluster is not None and workers not in (None, 1):
        raise CaseError(
            "give either a number of local workers or a cluster, not both", key="workers"
        )
    if cluster is not None and not CLUSTER_ADDRESS.match(cluster):
        raise CaseError(
            f"expected a Dask scheduler address tcp://HOST:PORT, got {cluster!r}", key="cluster"
        )
    report = progress or (lambda done, total: None)
    report(0, len(tasks))
    if not tasks:
        return []
    if cluster is not None:
        return _run_on_dask(fn, tasks, cluster, report, connect_timeout_s)
    if workers is None or workers == 1:
        return _run_in_process(fn, tasks, report)
    return _run_on_processes(fn, tasks, min(workers, len(tasks)), report)


def _run_chunk(fn: Callable[[Any], Any], first_index: int, chunk: list) -> list:
    """Run consecutive tasks, naming the one that fails (runs inside a worker)."""
    results = []
    for offset, task in enumerate(chunk):
        try:
            results.append(fn(task))
        except Exception as exc:
            label = repr(task)
            if len(label) > _TASK_LABEL_CHARS:
                label = label[: _TASK_LABEL_CHARS - 1] + "…"
            raise TaskFailed(first_index + offset, label, f"{type(exc).__name__}: {exc}") from exc
    return results


def _chunks(tasks: list, n_workers: int) -> list[tuple[int, list]]:
    size = max(1, math.ceil(len(tasks) / (n_workers * CHUNKS_PER_WORKER)))
    return [(start, tasks[start : start + size]) for start in range(0, len(tasks), size)]


def _share_cores(n_workers: int) -> None:
    """In a pool process: numba's threads for this process's share of the cores, so that N
    workers do not each start a thread per core and contend for them."""
    import os

    import numba

    numba.set_num_threads(max(1, min(numba.config.NUMBA_NUM_THREADS,
                                     (os.cpu_count() or 1) // n_workers)))


def _run_in_process(fn: Callable[[Any], Any], tasks: list, report: Progress) -> list:
    results = []
    for index, task in enumerate(tasks):
        results.extend(_run_chunk(fn, index, [task]))
        report(index + 1, len(tasks))
    return results


def _gather(completed: Iterable[tuple[int, list]], n_chunks: int, total: int, report: Progress):
    """Put chunk results back in task order as they arrive, reporting progress."""
    slots: list[list] = [[] for _ in range(n_chunks)]
    done = 0
    for slot, chunk_results in completed:
        slots[slot] = chunk_results
        done += len(chunk_results)
        report(done, total)
    return [result for chunk_results in slots for result in chunk_results]


def _run_on_processes(
    fn: Callable[[Any], Any], tasks: list, n_workers: int, report: Progress
) -> list:
    # "spawn" behaves the same on every platform and never forks a process that holds threads
    # (numba, BLAS), so a study runs identically on a laptop and in CI.
    context = multiprocessing.get_context("spawn")
    chunks = _chunks(tasks, n_workers)
    slots: list[list | None] = [None] * len(chunks)
    waiting = list(range(len(chunks)))
    done = 0
    for restart in range(MAX_POOL_RESTARTS + 1):
        lost = []
        pool = ProcessPoolExecutor(max_workers=n_workers, mp_context=context,
                                   initializer=_share_cores, initargs=(n_workers,))
        try:
            slot_of = {pool.submit(_run_chunk, fn, *chunks[i]): i for i in waiting}
            for future in as_completed(slot_of):
                i = slot_of[future]
                try:
                    slots[i] = future.result()
                except BrokenProcessPool:  # a process died: this chunk did not finish
                    lost.append(i)
                    continue
                done += len(slots[i])
                report(done, len(tasks))
        finally:
            pool.shutdown(wait=True, cancel_futures=True)
        if not lost:
            return [result for chunk_results in slots for result in chunk_results]
        waiting = sorted(lost)
        count = sum(len(chunks[i][1]) for i in waiting)
        if restart == MAX_POOL_RESTARTS:
            break
        _say(f"a worker process died; running its {count} unfinished task(s) again on a "
             "fresh pool (each task carries its seed: same numbers)")
    raise WorkerLost(f"worker processes died {MAX_POOL_RESTARTS + 1} times; {count} task(s) "
                     "never finished (does a task run out of memory?)")


def _connect_to_dask(address: str, timeout_s: float):
    try:
        from distributed import Client
    except ImportError as exc:
        raise ClusterUnavailable(
            "running on a cluster needs dask, the optional extra 'cluster': "
            "pip install 'harvester[cluster]'"
        ) from exc
    try:
        return Client(address, timeout=timeout_s, set_as_default=False)
    except (OSError, TimeoutError) as exc:
        raise ClusterUnavailable(
            f"cannot reach the Dask scheduler at {address} within {timeout_s:g} s: {exc}"
        ) from exc


def _run_on_dask(
    fn: Callable[[Any], Any], tasks: list, address: str, report: Progress, timeout_s: float
) -> list:
    client = _connect_to_dask(address, timeout_s)
    from distributed import as_completed as dask_as_completed

    started = time.time()
    try:
        chunks = _chunks(tasks, max(1, sum(client.nthreads().values())))
        # pure=False: identical chunks (same seeds) must still each be run and returned.
        futures = [
            client.submit(_run_chunk, fn, start, chunk, pure=False) for start, chunk in chunks
        ]
        slot_of = {future.key: i for i, future in enumerate(futures)}
        try:
            completed = (
                (slot_of[f.key], f.result()) for f in dask_as_completed(futures, loop=client.loop)
            )
            results = _gather(completed, len(chunks), len(tasks), report)
        finally:
            client.cancel([f for f in futures if not f.done()])
        _report_lost_workers(client, set(slot_of), started)
        return results
    finally:
        client.close()


def _report_lost_workers(client, keys: set, since: float) -> None:
    """Say on stderr which workers the scheduler lost while they ran these tasks (it ran them
    again elsewhere: `remove-worker` events of its log with their processing tasks)."""
    try:
        events = client.get_events("all")
    except Exception:  # noqa: BLE001 - an old scheduler without the log: nothing to say
        return
    for stamp, event in events:
        if not isinstance(event, dict) or event.get("action") != "remove-worker" \
                or stamp < since or event.get("expected"):
            continue
        rerun = keys & set(event.get("processing-tasks", ()))
        if rerun:
            _say(f"Dask worker {event.get('worker', '?')} died while running {len(rerun)} "
                 "chunk(s) of tasks; the scheduler ran them again on other workers (each task "
                 "carries its seed: same numbers)")
