"""The chunks of a run on a real Dask cluster: a LocalCluster of two worker processes, no mocks.

The cluster's results must equal the local run's bit for bit (method.md §13: the common random
numbers make a wall's result independent of the chunking); a worker killed mid-run has its
chunks recomputed; a scheduler that cannot be reached is a clean error naming the address.
"""

from __future__ import annotations

import dataclasses
import functools
import os
import signal
import socket
import time
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

import screening
from screening.config import Config
from screening.core.engine import run_cases
from screening.errors import ScreeningError
from screening.pipeline import evaluate, evaluate_chunk, split_prepared
from screening.prepare import prepare
from tests.conftest import worked_wall

distributed = pytest.importorskip("distributed")

from screening.distributed import DaskRunner, check_options, check_scheduler  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
README_WORKER_YAML = (ROOT / "README.md").read_text(encoding="utf-8").split("```yaml\n")[1].split("```")[0]
"""The workers' settings file the README gives (its first yaml block)."""

pytestmark = pytest.mark.dask


def _screening_file() -> str:
    return screening.__file__


@pytest.fixture(scope="module")
def client() -> Any:
    import logging

    with (
        distributed.LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            dashboard_address=":0",
            silence_logs=logging.ERROR,
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
    inputs = prepare(pd.DataFrame(rows)).inputs
    return [{k: v[s : s + size] for k, v in inputs.items()} for s in range(0, n_walls, size)]


def _dies_once(chunk: Any, config: Config, *, marker: str, delay_s: float) -> Any:
    """The chunk function, slowed; the first worker to run it is killed (SIGKILL) mid-chunk."""
    time.sleep(delay_s)
    try:
        fd = os.open(marker, os.O_CREAT | os.O_EXCL | os.O_WRONLY)
    except FileExistsError:
        return evaluate_chunk(chunk, config)
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


def _sample_chunks(size: int) -> tuple[list[Any], Config]:
    from screening.demo import sample_paths
    from screening.io import load_register

    config = dataclasses.replace(Config(), samples=500)
    register, mapping = sample_paths(2026)
    loaded = load_register(register, mapping=mapping)
    prepared = prepare(loaded.frame, config, labels=loaded.labels, shown=loaded.shown)
    return split_prepared(prepared, size), config


def test_a_worker_killed_mid_run_has_its_chunk_recomputed(client: Any, tmp_path: Path) -> None:
    client.wait_for_workers(2)
    chunks, config = _sample_chunks(20)  # the sample register, samples on, in 6 chunks
    before = _pids(client)
    marker = tmp_path / "killed"
    fn = functools.partial(_dies_once, marker=str(marker), delay_s=0.3)
    remote = DaskRunner(client).map(fn, chunks, config)
    killed = int(marker.read_text())
    assert killed in before  # a worker of this cluster died mid-chunk ...
    client.wait_for_workers(2)
    assert killed not in _pids(client)  # ... and its nanny started a new one
    local = [evaluate_chunk(c, config) for c in chunks]
    assert len(remote) == len(local) == 6
    for a, b in zip(local, remote, strict=True):  # every chunk, recomputed where lost
        pd.testing.assert_frame_equal(a.results, b.results, check_exact=True)
        pd.testing.assert_frame_equal(a.walls, b.walls, check_exact=True)
    assert local[0].results["p_failure"].notna().any()  # the probabilities were computed


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


def _sample_run(config: Config, client: Any = None) -> Any:
    from screening.demo import sample_paths
    from screening.io import load_register

    register, mapping = sample_paths(2026)
    loaded = load_register(register, mapping=mapping)
    return evaluate(loaded.frame, config, labels=loaded.labels, shown=loaded.shown, client=client)


def test_the_sample_register_on_the_cluster_gives_every_table_of_the_local_run(client: Any) -> None:
    # chunks of 25 walls: the 120-wall sample goes out as 5 tasks (and comes back in order)
    config = dataclasses.replace(Config(), chunk_size=25, samples=500)
    local = _sample_run(config)
    remote = _sample_run(config, client)
    assert len(local.results) == 3 * len(local.walls) > 300
    for name in ("results", "walls", "problems"):
        pd.testing.assert_frame_equal(getattr(local, name), getattr(remote, name), check_exact=True)
    for part in ("table", "codes", "sources"):
        pd.testing.assert_frame_equal(
            getattr(local.prepared.assumptions, part), getattr(remote.prepared.assumptions, part)
        )
    # and the chunking changes nothing: one chunk of every wall gives the same tables
    whole = _sample_run(dataclasses.replace(config, chunk_size=20_000), client)
    pd.testing.assert_frame_equal(local.results, whole.results, check_exact=True)
    pd.testing.assert_frame_equal(local.walls, whole.walls, check_exact=True)


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


def _cli(*args: str) -> Any:
    from typer.testing import CliRunner

    from screening.cli import app

    return CliRunner().invoke(app, list(args))


def test_cli_unreachable_scheduler_is_exit_2_naming_the_address_before_any_work(tmp_path: Path) -> None:
    from screening.cli import EXIT_NOTHING_SCREENED
    from screening.demo import sample_paths

    register, mapping = sample_paths(2026)
    address = f"tcp://127.0.0.1:{_free_port()}"
    out = tmp_path / "out"
    start = time.perf_counter()
    result = _cli("run", str(register), "-m", str(mapping), "-o", str(out), "--dask", address)
    elapsed = time.perf_counter() - start
    assert result.exit_code == EXIT_NOTHING_SCREENED, result.output
    assert address in result.output and "Traceback" not in result.output
    assert len([line for line in result.output.splitlines() if line.strip()]) == 1  # one line
    assert not out.exists()  # nothing read, nothing written
    # the bound on giving up (a behaviour of the check, not a speed target)
    assert elapsed < 30


@pytest.mark.parametrize(
    ("args", "message"),
    [(["--workers", "2", "--dask", "tcp://127.0.0.1:8786"], "not both"), (["--workers", "0"], "one worker")],
)
def test_cli_cluster_options_are_checked_first(tmp_path: Path, args: list[str], message: str) -> None:
    result = _cli("run", str(tmp_path / "missing.csv"), "-o", str(tmp_path / "out"), *args)
    assert result.exit_code == 2 and message in result.output, result.output


def test_cli_run_with_two_workers_writes_the_tables_of_the_local_run(tmp_path: Path) -> None:
    from screening.demo import sample_paths

    register, mapping = sample_paths(2026)
    config = tmp_path / "config.toml"
    config.write_text("chunk_size = 40\nsamples = 500\n")
    common = ["run", str(register), "-m", str(mapping), "-c", str(config), "--no-history"]
    local = _cli(*common, "-o", str(tmp_path / "local"))
    remote = _cli(*common, "-o", str(tmp_path / "cluster"), "--workers", "2")
    assert local.exit_code == remote.exit_code == 1, remote.output  # the sample has rejected rows
    for name in ("results.csv", "walls.csv", "problems.csv", "assumptions.csv", "assumption_sources.csv"):
        a = (tmp_path / "local" / name).read_bytes()
        b = (tmp_path / "cluster" / name).read_bytes()
        assert a == b, name


def test_the_three_commands_of_the_readme_scheduler_worker_and_run_with_dask(tmp_path: Path) -> None:
    """`dask scheduler`, `dask worker ADDRESS` and `wallscreen run ... --dask ADDRESS`, as separate
    processes (the README's cluster section), give the tables of the local run."""
    import subprocess
    import sys

    from screening.demo import sample_paths

    address = f"tcp://127.0.0.1:{_free_port()}"
    settings = tmp_path / "dask"  # the worker settings file of the README, in DASK_CONFIG
    settings.mkdir()
    (settings / "wallscreen.yaml").write_text(README_WORKER_YAML)
    env = dict(os.environ, PYTHONPATH=str(ROOT), DASK_CONFIG=str(settings))
    env.pop("MALLOC_TRIM_THRESHOLD_", None)  # a fresh shell; without the file Dask would set 65536
    dask = [sys.executable, "-m", "dask"]
    port = address.rsplit(":", 1)[1]
    logs = (tmp_path / "scheduler.log").open("w"), (tmp_path / "worker.log").open("w")
    scheduler = subprocess.Popen(
        [*dask, "scheduler", "--host", "127.0.0.1", "--port", port, "--no-dashboard"],
        env=env, cwd=ROOT, stdout=logs[0], stderr=subprocess.STDOUT,
    )  # fmt: skip
    worker = subprocess.Popen(
        [*dask, "worker", address, "--nworkers", "1", "--nthreads", "1", "--no-dashboard"],
        env=env, cwd=ROOT, stdout=logs[1], stderr=subprocess.STDOUT,
    )  # fmt: skip
    try:
        with distributed.Client(address, timeout=30) as c:
            c.wait_for_workers(1, timeout=60)
            # the worker runs this checkout's code (a lambda travels by value, this module need not import)
            assert set(c.run(lambda: __import__("screening").__file__).values()) == {screening.__file__}
            trim = c.run(lambda: __import__("os").environ.get("MALLOC_TRIM_THRESHOLD_"))
            assert set(trim.values()) == {None}
        register, mapping = sample_paths(2026)
        config = tmp_path / "config.toml"
        config.write_text("chunk_size = 40\nsamples = 300\n")
        common = ["run", str(register), "-m", str(mapping), "-c", str(config), "--no-history"]
        local = _cli(*common, "-o", str(tmp_path / "local"))
        remote = _cli(*common, "-o", str(tmp_path / "cluster"), "--dask", address)
        assert local.exit_code == remote.exit_code == 1, remote.output  # the sample has rejected rows
        for name in ("results.csv", "walls.csv", "problems.csv"):
            assert (tmp_path / "local" / name).read_bytes() == (tmp_path / "cluster" / name).read_bytes(), (
                name
            )
    finally:
        for proc in (worker, scheduler):
            proc.terminate()
            try:
                proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                proc.kill()
        for log in logs:
            log.close()


def test_the_workers_we_start_keep_the_adaptive_allocator(monkeypatch: pytest.MonkeyPatch) -> None:
    # Dask's nanny default MALLOC_TRIM_THRESHOLD_=65536 turns off glibc's adaptive mmap threshold
    # (glibc mallopt(3): setting M_TRIM_THRESHOLD disables the dynamic adjustment); measured here,
    # it made every chunk's arrays fresh page faults and the cluster 2.4x slower than one process
    from screening.distributed import dask_client

    # as left in this process by an earlier cluster's nanny (or set by the user): restored after
    monkeypatch.setenv("MALLOC_TRIM_THRESHOLD_", "65536")
    with dask_client(workers=1) as c:
        assert set(c.run(lambda: os.environ.get("MALLOC_TRIM_THRESHOLD_")).values()) == {None}
    assert os.environ["MALLOC_TRIM_THRESHOLD_"] == "65536"
