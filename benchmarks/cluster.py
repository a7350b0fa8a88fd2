"""The Monte Carlo of method.md §13 on a 2-worker Dask LocalCluster against the same run here.

``python -m benchmarks.cluster [--walls N] [--draws D]`` prints the table (part of the full
``python -m benchmarks`` run too). Both sides run ``screening.evaluate`` on the same register
with the same settings, in the same process, so a busy machine slows both alike; the cluster's
results are checked to be the local run's, bit for bit, before any time is printed. Where the
size measured is not the size asked about, the scaled figure is printed as an extrapolation.
"""

from __future__ import annotations

import argparse
import dataclasses
import time
from typing import Any

import pandas as pd

from benchmarks.run import _table, machine, synthetic_register
from screening.config import Config
from screening.distributed import dask_client
from screening.pipeline import evaluate

TARGET_WALLS, TARGET_DRAWS = 100_000, 1_000
"""The size the issue asks about (10^5 walls x 1000 draws x 3 cases)."""


def _same(a: Any, b: Any) -> None:
    for name in ("results", "walls"):
        pd.testing.assert_frame_equal(getattr(a, name), getattr(b, name), check_exact=True)


def _timed(register: pd.DataFrame, config: Config, client: Any = None) -> tuple[float, Any]:
    start = time.perf_counter()
    run = evaluate(register, config, client=client)
    return time.perf_counter() - start, run


def cluster_rows(walls: int, draws: int, small: int = 1_000, workers: int = 2) -> list[dict[str, object]]:
    """Local against cluster: the Monte Carlo at ``walls`` x ``draws``, the overhead at ``small`` walls."""
    big = synthetic_register(walls)
    # at least 8 chunks, so that both workers have work (the same chunks on both sides)
    size = min(Config().chunk_size, -(-walls // 8))
    mc_big = dataclasses.replace(Config(), samples=draws, chunk_size=size)
    mc = dataclasses.replace(Config(), samples=draws)
    det = dataclasses.replace(Config(), samples=0)
    little = synthetic_register(small, seed=1)
    start = time.perf_counter()
    with dask_client(workers=workers) as client:
        t_start = time.perf_counter() - start
        rows: list[dict[str, object]] = []
        for label, register, config in (
            (f"Monte Carlo, {draws:,} draws, chunks of {size:,}", big, mc_big),
            ("samples off", little, det),
            (f"Monte Carlo, {draws:,} draws", little, mc),
        ):
            t_local, local = _timed(register, config)
            t_cluster, remote = _timed(register, config, client)
            _same(local, remote)
            rows.append(
                {
                    "walls": len(register),
                    "run": label,
                    "local s": t_local,
                    f"{workers}-worker cluster s": t_cluster,
                    "local / cluster": t_local / t_cluster,
                    "cluster overhead s": t_cluster - t_local,
                }
            )
    rows.append(
        {
            "walls": 0,
            "run": f"starting the {workers}-worker LocalCluster",
            f"{workers}-worker cluster s": t_start,
        }
    )
    scale = (TARGET_WALLS * TARGET_DRAWS) / (walls * draws)
    if scale != 1:
        first = rows[0]
        rows.append(
            {
                "walls": TARGET_WALLS,
                "run": f"EXTRAPOLATED x{scale:g} from the first row: {TARGET_DRAWS:,} draws",
                "local s": float(first["local s"]) * scale,  # type: ignore[arg-type]
                f"{workers}-worker cluster s": float(first[f"{workers}-worker cluster s"]) * scale,  # type: ignore[arg-type]
                "local / cluster": first["local / cluster"],
            }
        )
    return rows


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.cluster")
    parser.add_argument("--walls", type=int, default=TARGET_WALLS)
    parser.add_argument("--draws", type=int, default=TARGET_DRAWS)
    args = parser.parse_args(argv)
    print(f"wallscreen benchmarks: {machine()}")
    _table(
        "The Monte Carlo (method.md §13) on a Dask LocalCluster, results identical to the local run",
        cluster_rows(args.walls, args.draws),
    )


if __name__ == "__main__":
    main()
