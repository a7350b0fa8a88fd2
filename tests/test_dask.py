"""The chunks of a run on a real Dask cluster: a LocalCluster of two worker processes, no mocks.

The cluster's results must equal the local run's bit for bit (method.md §13: the common random
numbers make a wall's result independent of the chunking); a worker killed mid-run has its
chunks recomputed; a scheduler that cannot be reached is a clean error naming the address.
"""

from __future__ import annotations

import functools
import os
import signal
import socket
import time
from pathlib import Path
from typing import Any

import numpy as np
import pytest

import screening
from screening.config import Config
from screening.core.engine import run_cases
from screening.errors import ScreeningError
from screening.prepare import prepare
from tests.conftest import worked_wall

distributed = pytest.importorskip("distributed")

from screening.distributed import DaskRunner, check_options, check_scheduler  # noqa: E402

pytestmark = pytest.mark.dask


def _screening_file() -> str:
    return screening.__file__


@pytest.fixture(scope="module")
def client() -> Any:
    import logging

    with (
        distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None, silence_logs=logging.ERROR
        ) as cluster,
        distributed.Client(cluster, set_as_default=False) as c,
    ):
        # the workers run this worktree's code, not another installed copy
        assert set(c.run(_screening_file).values()) == {screening.__file__}
        yield c


def _pids(client: Any) -> set[int]:
    return set(client.run(os.getpid).values())


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _chunks(n_walls: int, size: int) -> list[dict[str, np.ndarray]]:
    rows = [
        worked_wall(f"W{i}", 1.2 + 0.05 * i, drainage=("working", "blocked", "partial")[i % 3])
        for i in range(n_walls)
    ]
    import pandas as pd

    inputs = prepare(pd.DataFrame(rows)).inputs
    return [{k: v[s : s + size] for k, v in inputs.items()} for s in range(0, n_walls, size)]


def _dies_once(chunk: dict, config: Config, *, marker: str, delay_s: float) -> dict:
    """The chunk function, slowed; the first worker to run it is killed (SIGKILL) mid-chunk."""
    time.sleep(delay_s)
    try:
        fd = os.open(marker, os.O_CREAT | os.O_EXCL | os.O_WRONLY)
    except FileExistsError:
        return run_cases(chunk, config)
    os.write(fd, str(os.getpid()).encode())
    os.close(fd)
    os.kill(os.getpid(), signal.SIGKILL)
    raise AssertionError("unreachable: the worker process was killed")


def _assert_same(local: list[dict], remote: list[dict]) -> None:
    assert len(local) == len(remote)
    for a, b in zip(local, remote, strict=True):
        assert a.keys() == b.keys()
        for k in a:
            assert a[k].dtype == b[k].dtype, k
            assert np.array_equal(a[k], b[k], equal_nan=True), k


def test_runner_returns_the_chunks_in_order_identical_to_a_local_loop(client: Any) -> None:
    config = Config()
    chunks = _chunks(25, 4)
    heard: list[str] = []
    remote = DaskRunner(client, progress=heard.append).map(run_cases, chunks, config)
    _assert_same([run_cases(c, config) for c in chunks], remote)
    # one progress line per finished chunk
    assert heard == [f"chunk {i} of {len(chunks)} done on the cluster" for i in range(1, len(chunks) + 1)]


def test_a_worker_killed_mid_run_has_its_chunk_recomputed(client: Any, tmp_path: Path) -> None:
    client.wait_for_workers(2)
    config = Config()
    chunks = _chunks(30, 5)
    before = _pids(client)
    marker = tmp_path / "killed"
    fn = functools.partial(_dies_once, marker=str(marker), delay_s=0.3)
    remote = DaskRunner(client).map(fn, chunks, config)
    killed = int(marker.read_text())
    assert killed in before  # a worker of this cluster died mid-chunk ...
    client.wait_for_workers(2)
    assert killed not in _pids(client)  # ... and its nanny started a new one
    _assert_same([run_cases(c, config) for c in chunks], remote)  # every chunk, recomputed where lost


def _fails_on_empty(chunk: dict, config: Config) -> dict:
    if len(chunk["height_m"]) == 0:
        raise ScreeningError("an empty chunk")
    return run_cases(chunk, config)


def test_an_error_in_a_chunk_reaches_the_caller_as_itself(client: Any) -> None:
    chunks = _chunks(4, 2)
    chunks.insert(1, {k: v[:0] for k, v in chunks[0].items()})
    # the worker's exception, re-raised here with its own type and message
    with pytest.raises(ScreeningError, match="an empty chunk"):
        DaskRunner(client).map(_fails_on_empty, chunks, Config())


def test_no_chunks_no_tasks(client: Any) -> None:
    assert DaskRunner(client).map(run_cases, [], Config()) == []


def test_an_address_without_a_scheduler_fails_naming_it() -> None:
    address = f"tcp://127.0.0.1:{_free_port()}"
    start = time.perf_counter()
    with pytest.raises(ScreeningError, match=address):
        check_scheduler(address, timeout=3)
    # the timeout is a behaviour of the check (it must give up), not a speed target
    assert time.perf_counter() - start < 10


def test_a_worker_address_is_not_taken_for_a_scheduler(client: Any) -> None:
    worker = next(iter(client.scheduler_info()["workers"]))
    with pytest.raises(ScreeningError, match="not a Dask scheduler"):
        check_scheduler(worker, timeout=5)
    check_scheduler(client.scheduler.address, timeout=5)  # the scheduler itself passes


@pytest.mark.parametrize(
    ("workers", "address", "message"),
    [(2, "tcp://127.0.0.1:8786", "not both"), (0, None, "one worker or more")],
)
def test_cluster_options_are_checked(workers: int | None, address: str | None, message: str) -> None:
    with pytest.raises(ScreeningError, match=message):
        check_options(workers, address)
