"""The chunks of a run on a Dask cluster (the optional extra ``pip install "wallscreen[dask]"``).

Only the per-chunk work goes to the workers: the same picklable chunk function that runs in
this process runs there, one task per chunk (the chunk's inputs and the run's settings in, the
chunk's result tables out). Reading, preparing, ranking and writing stay with the caller. The
chunk's inputs travel inside its task, so a worker lost mid-run costs only a recomputation:
the scheduler still holds every task and hands the lost ones to another worker.

:class:`DaskRunner` has the runner shape of the pipeline, ``map(fn, chunks, config)``;
:func:`dask_client` starts a ``LocalCluster`` (``--workers N``) or connects to a running
scheduler (``--dask ADDRESS``), and closes what it opened.
"""

from __future__ import annotations

import asyncio
import logging
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from typing import Any

from screening.errors import ScreeningError
from screening.progress import Progress

CONNECT_TIMEOUT_S = 10.0
"""How long to wait for a scheduler before giving up (the check must fail within 30 s)."""

EXTRA = 'pip install "wallscreen[dask]"'


def _require_distributed() -> Any:
    try:
        import distributed
    except ImportError:
        raise ScreeningError(f"running on a Dask cluster needs the optional extra: {EXTRA}") from None
    return distributed


def _settings(config: Any) -> Any:
    """The run's settings as a task result: sent once, fetched by every worker, recomputed if lost."""
    return config


class DaskRunner:
    """Runs each chunk as one task on the workers of a ``distributed.Client``.

    ``progress`` hears of every finished chunk. Results come back in the order of the chunks,
    whatever order the workers finish them in.
    """

    def __init__(self, client: Any, progress: Progress | None = None) -> None:
        self.client = client
        self.progress = progress

    def map(self, fn: Callable[[Any, Any], Any], chunks: Iterable[Any], config: Any) -> list[Any]:
        distributed = _require_distributed()
        chunks = list(chunks)
        if not chunks:
            return []
        client = self.client
        # the settings go to the cluster once, as a task (scattered data would be lost with the
        # worker that held it; a task result is recomputed)
        settings = client.submit(_settings, config, pure=False)
        futures = [client.submit(fn, chunk, settings, pure=False) for chunk in chunks]
        try:
            n = len(futures)
            for done, _ in enumerate(distributed.as_completed(futures, loop=client.loop), start=1):
                if self.progress is not None:
                    self.progress(f"chunk {done:,} of {n:,} done on the cluster")
            return list(client.gather(futures))
        finally:
            client.cancel([*futures, settings])


async def _identity(address: str, timeout: float) -> dict[str, Any]:
    from distributed.comm import connect

    comm = await connect(address, timeout=timeout)
    try:
        await comm.write({"op": "identity", "reply": True})
        return await asyncio.wait_for(comm.read(), timeout)
    finally:
        comm.abort()


def check_scheduler(address: str, timeout: float = CONNECT_TIMEOUT_S) -> None:
    """Refuse an address where no Dask scheduler answers within ``timeout`` seconds.

    One connection and one identity request, before a ``Client`` is made: a client that failed to
    connect would spend another two timeouts closing itself when it is collected.
    """
    _require_distributed()
    try:
        reply = asyncio.run(asyncio.wait_for(_identity(address, timeout), timeout + 1))
    except Exception as exc:  # refused, timed out, unresolvable, a malformed address, garbage back
        why = str(exc).strip() or type(exc).__name__
        raise ScreeningError(f"--dask {address}: no Dask scheduler reachable there ({why})") from None
    kind = reply.get("type") if isinstance(reply, dict) else None
    if kind != "Scheduler":
        raise ScreeningError(f"--dask {address}: answers, but is not a Dask scheduler ({kind or 'unknown'})")


def check_options(workers: int | None, address: str | None) -> None:
    """The cluster options, checked before any work starts."""
    if workers is not None and address is not None:
        raise ScreeningError("give --workers or --dask, not both")
    if workers is not None and workers < 1:
        raise ScreeningError(f"--workers {workers}: give one worker or more")
    if workers is not None or address is not None:
        _require_distributed()


TRIM_VARIABLE = "MALLOC_TRIM_THRESHOLD_"


@contextmanager
def _adaptive_allocator() -> Iterator[None]:
    """Workers started within keep glibc's adaptive mmap threshold.

    Dask's nanny sets MALLOC_TRIM_THRESHOLD_=65536 for its workers (and leaves it in the
    nanny's own process, which for a LocalCluster is this one). Setting it turns off glibc's
    adaptive threshold (mallopt(3)): every array of a chunk is then a fresh mmap whose pages
    are faulted in again, and the Monte Carlo ran 2.4x slower on two workers than in one process
    (benchmarks/cluster.py). Unset in the nanny settings and in this process's environment for
    as long as the cluster lives (workers restarted after a crash included), then restored.
    """
    import os

    import dask

    saved = os.environ.pop(TRIM_VARIABLE, None)
    try:
        with dask.config.set({f"distributed.nanny.pre-spawn-environ.{TRIM_VARIABLE}": None}):
            yield
    finally:
        os.environ.pop(TRIM_VARIABLE, None)
        if saved is not None:
            os.environ[TRIM_VARIABLE] = saved


@contextmanager
def dask_client(
    workers: int | None = None, address: str | None = None, timeout: float = CONNECT_TIMEOUT_S
) -> Iterator[Any]:
    """A ``distributed.Client`` for the run, or ``None`` when neither option is given.

    ``workers``: a ``LocalCluster`` of that many worker processes, one thread each (the engine
    is numpy: one process per core), closed at the end. ``address``: an existing scheduler, e.g.
    ``tcp://host:8786``; only the client is closed.
    """
    check_options(workers, address)
    if workers is None and address is None:
        yield None
        return
    distributed = _require_distributed()
    if address is not None:
        check_scheduler(address, timeout)
        with distributed.Client(address, timeout=timeout, set_as_default=False) as client:
            yield client
        return
    with (
        _adaptive_allocator(),
        distributed.LocalCluster(
            n_workers=workers,
            threads_per_worker=1,
            processes=True,
            dashboard_address=":0",
            silence_logs=logging.ERROR,
        ) as cluster,
        distributed.Client(cluster, set_as_default=False) as client,
    ):
        yield client
