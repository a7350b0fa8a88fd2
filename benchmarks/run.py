"""Benchmarks: how fast and how big, measured side by side in one run.

``python -m benchmarks [--quick]`` prints one table with the machine and the date.
Ratios are measured in the same process on the same data, so a busy machine
slows both sides alike. Nothing here is asserted: the tests only smoke-run it.
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import platform
import time
from collections.abc import Callable

import numpy as np
import pandas as pd

from benchmarks.scalar import screen_wall
from screening.config import Config
from screening.engine import ENGINE_INPUTS, run_cases
from screening.prepare import prepare


def synthetic_register(n: int, seed: int = 0) -> pd.DataFrame:
    """A seeded register of n walls in realistic ranges (canonical columns)."""
    rng = np.random.default_rng(seed)
    h = rng.uniform(1, 6, n)
    b = h * rng.uniform(0.4, 0.8, n)
    t = np.minimum(rng.uniform(0.3, 0.8, n), 0.9 * b)
    return pd.DataFrame(
        {
            "wall_id": np.char.add("W", np.arange(n).astype(str)),
            "name": "synthetic wall",
            "lat": 53.72 + rng.uniform(-0.5, 0.5, n),
            "lon": -1.94 + rng.uniform(-0.8, 0.8, n),
            "height_m": h,
            "base_width_m": b,
            "top_width_m": t,
            "front_batter_m": (b - t) * rng.uniform(0, 1, n) * (rng.random(n) < 0.5),
            "retained_height_m": h * rng.uniform(0.7, 1.0, n),
            "lean_deg": np.where(rng.random(n) < 0.15, rng.uniform(0.5, 4, n), 0.0),
            "crack_height_m": np.where(rng.random(n) < 0.1, h * rng.uniform(0.3, 0.7, n), np.nan),
            "material": rng.choice(["mass_concrete", "stone_masonry", "brick_masonry", "drystone"], n),
            "foundation": rng.choice(["rock", "gravel", "sand", "stiff_clay", "firm_clay"], n),
            "drainage": rng.choice(["working", "partial", "blocked", "unknown"], n),
            "condition_rating": rng.integers(1, 6, n),
            "consequence": rng.choice(["railway", "road", "building", "footpath", "open_land"], n),
        }
    )


def _best(fn: Callable[[], object], repeat: int = 3) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def engine_rows(sizes: list[int], scalar_n: int) -> list[dict[str, object]]:
    """Engine throughput, the per-wall Python ratio and the numpy floor at each size."""
    config = Config(chunk_size=10**7)
    rows: list[dict[str, object]] = []
    for n in sizes:
        inputs = prepare(synthetic_register(n)).inputs
        t_engine = _best(lambda inputs=inputs: run_cases(inputs, config))
        # the floor: one pass of simple arithmetic over the same columns, all cases
        cols = [np.tile(inputs[c], 3) for c in ENGINE_INPUTS]

        def floor(cols=cols) -> float:
            acc = np.zeros_like(cols[0])
            for c in cols:
                acc += c * 1.0001
            return float(acc[0])

        t_floor = _best(floor)
        # the plain per-wall implementation on the first walls, scaled per wall
        k = min(n, scalar_n)
        walls = [{c: float(inputs[c][i]) for c in ENGINE_INPUTS} for i in range(k)]
        t_scalar = _best(lambda walls=walls: [screen_wall(w) for w in walls], repeat=1) / k * n
        rows.append(
            {
                "walls": n,
                "engine s": t_engine,
                "walls×cases/s": 3 * n / t_engine,
                "per-wall Python s (scaled)": t_scalar,
                "engine speed-up": t_scalar / t_engine,
                "numpy floor s": t_floor,
                "engine / floor": t_engine / t_floor,
            }
        )
    return rows


def machine() -> str:
    return (
        f"{dt.date.today().isoformat()}, {platform.machine()}, {os.cpu_count()} cores, "
        f"Python {platform.python_version()}, numpy {np.__version__}, pandas {pd.__version__}"
    )


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks")
    parser.add_argument("--quick", action="store_true", help="10^3 walls only (the test smoke run)")
    args = parser.parse_args(argv)
    sizes = [1_000] if args.quick else [1_000, 10_000, 100_000, 1_000_000]
    print(f"wallscreen benchmarks — {machine()}")
    frame = pd.DataFrame(engine_rows(sizes, scalar_n=200 if args.quick else 2_000))
    print(frame.to_string(index=False, float_format=lambda v: f"{v:,.3g}"))


if __name__ == "__main__":
    main()
