"""The sweep executor: same results in-process, on a process pool and on a Dask cluster.

The reference for "same results" is Python itself: a plain serial list comprehension over the
tasks.  Seeded draws come from numpy's PCG64 generator, so equality is exact, not approximate.
"""

import math
import os
import signal
import socket
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from harvester.commands.executor import (
    MAX_POOL_RESTARTS,
    ClusterUnavailable,
    TaskFailed,
    WorkerLost,
    run_tasks,
)
from harvester.errors import CaseError


@dataclass(frozen=True)
class NoiseDraw:
    seed: int
    n_samples: int
    rms: float


def mean_square_of_noise(task: NoiseDraw) -> float:
    """Mean square of a seeded Gaussian record: random work that must not depend on the executor."""
    rng = np.random.default_rng(task.seed)
    record = task.rms * rng.standard_normal(task.n_samples)
    return float(np.mean(record**2))


def fails_on_seed_3(task: NoiseDraw) -> float:
    if task.seed == 3:
        raise ValueError("well depth is negative")
    return mean_square_of_noise(task)


TASKS = [NoiseDraw(seed=seed, n_samples=2000, rms=0.5 + 0.1 * (seed % 3)) for seed in range(12)]
SERIAL = [mean_square_of_noise(task) for task in TASKS]


@dataclass(frozen=True)
class Doomed:
    """A draw whose first run (the first process that finds no marker file) kills its worker
    process outright, as the operating system does to a process out of memory."""

    draw: NoiseDraw
    marker: str
    every_time: bool = False

    def __repr__(self) -> str:  # the marker path changes from run to run
        return f"Doomed(seed={self.draw.seed})"


def dies_the_first_time(job: Doomed) -> float:
    marker = Path(job.marker)
    if job.draw.seed == 5 and (job.every_time or not marker.exists()):
        marker.write_text("died once")
        os.kill(os.getpid(), signal.SIGKILL)
    return mean_square_of_noise(job.draw)


def doomed(tmp_path, every_time: bool = False) -> list[Doomed]:
    return [Doomed(task, str(tmp_path / "died"), every_time) for task in TASKS]


@pytest.fixture(scope="module")
def dask_address():
    distributed = pytest.importorskip("distributed", reason="the optional extra 'cluster'")
    with distributed.LocalCluster(
        processes=False, n_workers=2, threads_per_worker=1, dashboard_address=":0", protocol="tcp"
    ) as cluster:
        yield cluster.scheduler_address


def free_loopback_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def test_seeded_draws_are_distinct_and_have_the_right_mean_square():
    # For Gaussian x, n·mean(x²)/σ² is chi-square with n degrees of freedom: mean n, variance
    # 2n (Abramowitz & Stegun 1964, Handbook of Mathematical Functions, §26.4 (memory)), so
    # mean(x²) = σ² with standard error σ²·sqrt(2/n).  Five standard errors: a wrong seed use or
    # a wrong scale fails.
    assert len(set(SERIAL)) == len(SERIAL)
    for task, mean_square in zip(TASKS, SERIAL, strict=True):
        sigma2 = task.rms**2
        assert mean_square == pytest.approx(sigma2, abs=5 * sigma2 * math.sqrt(2 / task.n_samples))


def test_in_process_matches_serial_and_reports_progress():
    calls = []
    results = run_tasks(mean_square_of_noise, TASKS, progress=lambda d, t: calls.append((d, t)))
    assert results == SERIAL
    assert calls[0] == (0, len(TASKS)) and calls[-1] == (len(TASKS), len(TASKS))
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)


def test_process_pool_matches_serial_in_task_order():
    calls = []
    results = run_tasks(
        mean_square_of_noise, TASKS, workers=2, progress=lambda d, t: calls.append((d, t))
    )
    assert results == SERIAL
    assert calls[0] == (0, len(TASKS)) and calls[-1] == (len(TASKS), len(TASKS))
    assert len(calls) > 2


def test_dask_cluster_matches_serial_in_task_order(dask_address):
    calls = []
    results = run_tasks(
        mean_square_of_noise,
        TASKS,
        cluster=dask_address,
        progress=lambda d, t: calls.append((d, t)),
    )
    assert results == SERIAL
    assert calls[-1] == (len(TASKS), len(TASKS))


def test_a_killed_pool_worker_loses_nothing(tmp_path, capsys):
    # the process running seed 5 is killed mid-run: the pool breaks, the unfinished tasks run
    # again on a fresh pool, and the results are the serial ones, in order
    results = run_tasks(dies_the_first_time, doomed(tmp_path), workers=2)
    assert results == SERIAL
    assert (tmp_path / "died").exists()
    assert "worker process died" in capsys.readouterr().err


def test_a_task_that_always_kills_its_worker_fails_the_run(tmp_path, capsys):
    with pytest.raises(WorkerLost, match="never finished"):
        run_tasks(dies_the_first_time, doomed(tmp_path, every_time=True), workers=2)
    assert capsys.readouterr().err.count("worker process died") == MAX_POOL_RESTARTS


def test_a_killed_dask_worker_loses_nothing(tmp_path, capsys):
    # a LocalCluster of two worker processes (each under a nanny that restarts it): the
    # scheduler runs the killed worker's tasks again elsewhere, and the run says so
    distributed = pytest.importorskip("distributed", reason="the optional extra 'cluster'")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=":0", protocol="tcp") as cluster:
        results = run_tasks(dies_the_first_time, doomed(tmp_path),
                            cluster=cluster.scheduler_address)
    assert results == SERIAL
    assert (tmp_path / "died").exists()
    assert "the scheduler ran them again" in capsys.readouterr().err


def test_empty_task_list_returns_empty_without_starting_workers():
    assert run_tasks(mean_square_of_noise, [], workers=2) == []


def test_failed_task_is_named_in_process():
    with pytest.raises(TaskFailed) as caught:
        run_tasks(fails_on_seed_3, TASKS)
    assert caught.value.index == 3
    assert "seed=3" in str(caught.value) and "well depth is negative" in str(caught.value)
    assert isinstance(caught.value.__cause__, ValueError)


def test_failed_task_is_named_on_process_pool():
    with pytest.raises(TaskFailed) as caught:
        run_tasks(fails_on_seed_3, TASKS, workers=2)
    assert caught.value.index == 3
    assert "seed=3" in str(caught.value) and "ValueError: well depth is negative" in str(
        caught.value
    )


def test_failed_task_is_named_on_dask(dask_address):
    with pytest.raises(TaskFailed) as caught:
        run_tasks(fails_on_seed_3, TASKS, cluster=dask_address)
    assert caught.value.index == 3
    assert "well depth is negative" in str(caught.value)


def test_unreachable_cluster_fails_quickly_with_the_address():
    address = f"tcp://127.0.0.1:{free_loopback_port()}"
    started = time.monotonic()
    with pytest.raises(ClusterUnavailable, match="cannot reach the Dask scheduler") as caught:
        run_tasks(mean_square_of_noise, TASKS, cluster=address, connect_timeout_s=1.0)
    assert address in str(caught.value)
    assert time.monotonic() - started < 8.0


def test_missing_dask_names_the_optional_extra(monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # makes the import raise ImportError
    with pytest.raises(ClusterUnavailable, match=r"harvester\[cluster\]"):
        run_tasks(mean_square_of_noise, TASKS, cluster="tcp://127.0.0.1:8786")


@pytest.mark.parametrize("address", ["localhost:8786", "http://host:8786", "tcp://host", ""])
def test_malformed_cluster_address_is_bad_input(address):
    with pytest.raises(CaseError, match="tcp://HOST:PORT"):
        run_tasks(mean_square_of_noise, TASKS, cluster=address)


@pytest.mark.parametrize("workers", [0, -2, 1.5, True])
def test_bad_worker_count_is_bad_input(workers):
    with pytest.raises(CaseError, match="workers"):
        run_tasks(mean_square_of_noise, TASKS, workers=workers)


def test_workers_and_cluster_together_are_bad_input():
    with pytest.raises(CaseError, match="not both"):
        run_tasks(mean_square_of_noise, TASKS, workers=2, cluster="tcp://127.0.0.1:8786")
