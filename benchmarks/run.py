"""Benchmarks: how fast and how big, measured side by side in one run.

``python -m benchmarks [--quick]`` prints one table with the machine and the date.
Ratios are measured in the same process on the same data, so a busy machine
slows both sides alike. Nothing here is asserted: the tests only smoke-run it.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import platform
import shutil
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd

from benchmarks import user
from benchmarks.scalar import screen_wall
from screening.config import Config
from screening.core import critical
from screening.core.engine import ENGINE_INPUTS, run_cases
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
    config = Config()
    size = config.chunk_size
    rows: list[dict[str, object]] = []
    for n in sizes:
        inputs = prepare(synthetic_register(n)).inputs

        def engine(inputs: dict = inputs, n: int = n) -> None:
            # as the pipeline runs it: chunks of config.chunk_size walls
            for start in range(0, n, size):
                run_cases({k: v[start : start + size] for k, v in inputs.items()}, config)

        t_engine = _best(engine)
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


def joint_rows(n: int) -> list[dict[str, object]]:
    """The cost of every bed joint (method.md §8) and of the §9 search, on n masonry walls."""
    register = synthetic_register(n)
    register["material"] = np.random.default_rng(1).choice(["stone_masonry", "brick_masonry", "drystone"], n)
    rows: list[dict[str, object]] = []
    size = Config().chunk_size
    for planes in (0, 10):
        config = Config(joint_planes=planes)
        inputs = prepare(register, config).inputs

        def engine(inputs: dict = inputs, config: Config = config) -> None:
            for start in range(0, n, size):
                run_cases({k: v[start : start + size] for k, v in inputs.items()}, config)

        def search(inputs: dict = inputs, config: Config = config) -> None:
            for start in range(0, n, size):
                chunk = {k: v[start : start + size] for k, v in inputs.items()}
                critical.critical_water_height(chunk, config)
                critical.critical_lean(chunk, config)

        rows.append(
            {
                "masonry walls": n,
                "joint_planes": planes,
                "engine s (3 cases)": _best(engine),
                "critical water + lean s": _best(search, repeat=1),
            }
        )
    return rows


def read_rows(n: int, folder: Path) -> list[dict[str, object]]:
    """Reading an n-row .xlsx register: calamine (ours) against openpyxl, and the same as CSV."""
    import xlsxwriter

    from screening.io import read_register

    frame = synthetic_register(n)
    frame["notes"] = "surveyed from the footway"
    xlsx, csv = folder / f"register_{n}.xlsx", folder / f"register_{n}.csv"
    book = xlsxwriter.Workbook(str(xlsx), {"constant_memory": True})
    sheet = book.add_worksheet("Walls")
    sheet.write_row(0, 0, list(frame.columns))
    for r, row in enumerate(frame.astype(object).where(frame.notna(), None).itertuples(index=False), start=1):
        sheet.write_row(r, 0, row)
    book.close()
    frame.to_csv(csv, index=False)
    t_cal = _best(lambda: read_register(xlsx), repeat=1)
    t_opx = _best(lambda: pd.read_excel(xlsx, engine="openpyxl"), repeat=1)
    t_csv = _best(lambda: read_register(csv), repeat=1)
    return [
        {"reader": "wallscreen (calamine), .xlsx", "rows": n, "s": t_cal, "vs openpyxl": t_opx / t_cal},
        {"reader": "pandas read_excel (openpyxl), .xlsx", "rows": n, "s": t_opx, "vs openpyxl": 1.0},
        {"reader": "wallscreen, the same data as .csv", "rows": n, "s": t_csv, "vs openpyxl": t_opx / t_csv},
    ]


def end_to_end_rows(sizes: list[int], folder: Path) -> list[dict[str, object]]:
    """``run`` on synthetic registers, each in a fresh process (its own peak memory)."""
    rows = []
    for n in sizes:
        csv = folder / f"e2e_{n}.csv"
        synthetic_register(n).to_csv(csv, index=False)
        out = subprocess.run(
            [sys.executable, "-m", "benchmarks.e2e", str(csv), str(folder / f"out_{n}")],
            capture_output=True,
            text=True,
            check=True,
        )
        result = json.loads(out.stdout.strip().splitlines()[-1])
        t = result["times"]
        rows.append(
            {
                "walls": n,
                "read+screen s": t["read + screen + rank"],
                "CSV s": t["CSV files"],
                "workbook s": t["workbook"],
                "GeoPackage s": t["GeoPackage"],
                "map s": t["map"],
                "total s": t["total"],
                "peak MB": result["peak_mb"],
            }
        )
    return rows


def map_rows(sizes: list[int], folder: Path, browser: bool) -> list[dict[str, object]]:
    """Map build time and HTML size; with Chromium, the time until the page has drawn."""
    from screening.config import Config
    from screening.job import render_map, screen_file

    rows = []
    for n in sizes:
        csv = folder / f"map_{n}.csv"
        synthetic_register(n).to_csv(csv, index=False)
        job = screen_file(csv, config=Config(samples=0))  # the draws add the probability view
        out = folder / f"map_{n}"
        out.mkdir(exist_ok=True)
        t = _best(lambda job=job, out=out: render_map(job, out), repeat=1)
        row: dict[str, object] = {
            "walls": n,
            "build s": t,
            "HTML MB": (out / "map.html").stat().st_size / 1e6,
        }
        if browser:
            row["Chromium draw s"] = _chromium_draw(out / "map.html")
        rows.append(row)
    return rows


def _chromium_draw(page_path: Path) -> float:
    from tests.browser import browser_page

    with browser_page() as page:
        start = time.perf_counter()
        page.goto(page_path.as_uri(), timeout=300_000)
        page.wait_for_function("window.wallscreenMap !== undefined", timeout=300_000)
        return time.perf_counter() - start


TARGETS = [
    ("10^6 walls x 3 cases through the engine", "< 3 s"),
    ("engine against the numpy floor", "within 10x"),
    ("10^5 masonry walls, 10 bed-joint planes, 3 cases", "< 2 s"),
    ("10^5-row .xlsx read against openpyxl", ">= 10x faster"),
    ("10^4 walls end to end, all outputs", "< 15 s"),
    ("10^5-wall map", "< 10 s and < 40 MB"),
    ("screen() on 2*10^5 walls against pandas reading the CSV", "<= 3x"),
    ("wallscreen run, 10^5 walls, default outputs", "<= 20 s"),
    ("peak memory of that run, every process summed", "<= 600 MB"),
    ("wallscreen demo", "<= 15 s"),
    ("results.csv at 10^5 walls", "<= 50 MB"),
]


def machine() -> str:
    return (
        f"{dt.date.today().isoformat()}, {platform.machine()}, {os.cpu_count()} cores, "
        f"Python {platform.python_version()}, numpy {np.__version__}, pandas {pd.__version__}"
    )


def _table(title: str, rows: list[dict[str, object]]) -> None:
    print(f"\n{title}")
    print(pd.DataFrame(rows).to_string(index=False, na_rep="", float_format=lambda v: f"{v:,.3g}"))


def user_only() -> None:
    """The five figures where the user waits, alone (a few minutes)."""
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        print(user.load())
        screens = user.screen_rows(200_000, folder)
        _table("screen() against pandas reading the same CSV (side by side)", screens)
        _table("wallscreen run in a subprocess (history on, no --sheets)", user.run_rows(100_000, folder))
        _table("wallscreen demo in a subprocess", user.demo_rows(folder))
        print(f"\n{user.load()}")


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks")
    parser.add_argument("--quick", action="store_true", help="10^3 walls, engine only (the test smoke run)")
    parser.add_argument("--no-browser", action="store_true", help="skip the Chromium timing of the map")
    parser.add_argument("--user", action="store_true", help="only the rows of issue #18 (screen, run, demo)")
    args = parser.parse_args(argv)
    print(f"wallscreen benchmarks: {machine()}")
    if args.quick:
        _table("Engine (walls x 3 cases)", engine_rows([1_000], scalar_n=200))
        _table("Every bed joint (method.md §8) and the §9 search", joint_rows(1_000))
        return
    if args.user:
        user_only()
        return
    browser = not args.no_browser and shutil.which("chromium") is not None
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        engine = engine_rows([1_000, 10_000, 100_000, 1_000_000], scalar_n=2_000)
        _table("Engine (walls x 3 cases; per-wall Python timed on 2,000 walls, scaled)", engine)
        joints = joint_rows(100_000)
        _table("Every bed joint (method.md §8) and the §9 search", joints)
        reads = read_rows(100_000, folder)
        _table("Reading a register", reads)
        e2e = end_to_end_rows([10_000, 100_000], folder)
        _table("wallscreen run end to end (each in its own process)", e2e)
        maps = map_rows([1_000, 10_000, 100_000], folder, browser)
        _table("The map", maps)
        try:
            from benchmarks.cluster import cluster_rows

            _table(
                "The Monte Carlo (method.md §13) on a 2-worker Dask LocalCluster", cluster_rows(10_000, 1_000)
            )
        except ImportError:
            print("\n(no Dask cluster rows: the extra wallscreen[dask] is not installed)")
        print(f"\n{user.load()}")
        screens = user.screen_rows(200_000, folder)
        _table("screen() against pandas reading the same CSV (side by side)", screens)
        runs = user.run_rows(100_000, folder)
        _table("wallscreen run in a subprocess (history on, no --sheets)", runs)
        demo = user.demo_rows(folder)
        _table("wallscreen demo in a subprocess", demo)
        print(f"\n{user.load()}")
    big = engine[-1]
    results = [
        f"{big['engine s']:.2f} s",
        f"{big['engine / floor']:.1f}x at 10^6",
        f"{joints[-1]['engine s (3 cases)']:.2f} s",
        f"{reads[0]['vs openpyxl']:.1f}x",
        f"{e2e[0]['total s']:.1f} s",
        f"{maps[-1]['build s']:.1f} s, {maps[-1]['HTML MB']:.0f} MB",
        f"{screens[0]['ratio']:.1f}x",
        f"{runs[0]['run s']:.1f} s",
        f"{runs[0]['peak MB (all processes)']:.0f} MB",
        f"{demo[0]['demo s']:.1f} s",
        f"{runs[0]['results.csv MB']:.0f} MB",
    ]
    met = [
        big["engine s"] < 3,
        big["engine / floor"] <= 10,
        float(joints[-1]["engine s (3 cases)"]) < 2,  # type: ignore[arg-type]
        reads[0]["vs openpyxl"] >= 10,
        e2e[0]["total s"] < 15,
        maps[-1]["build s"] < 10 and maps[-1]["HTML MB"] < 40,
        float(screens[0]["ratio"]) <= 3,  # type: ignore[arg-type]
        float(runs[0]["run s"]) <= 20,  # type: ignore[arg-type]
        float(runs[0]["peak MB (all processes)"]) <= 600,  # type: ignore[arg-type]
        float(demo[0]["demo s"]) <= 15,  # type: ignore[arg-type]
        float(runs[0]["results.csv MB"]) <= 50,  # type: ignore[arg-type]
    ]
    _table(
        "Targets",
        [
            {"target": t, "goal": g, "measured": m, "met": "yes" if ok else "NO"}
            for (t, g), m, ok in zip(TARGETS, results, met, strict=True)
        ],
    )


if __name__ == "__main__":
    main()
