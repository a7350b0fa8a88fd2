"""Where the user waits (issue #18): ``screen()`` against reading the CSV, ``wallscreen run`` and
``wallscreen demo`` end to end in a subprocess, with the peak memory summed over every process
of the run (sampled with psutil every 20 ms) and the size of ``results.csv``.

``screen()`` and ``wallscreen run`` are timed with ``samples = 0``: the pipeline around the engine,
the figures of issue #18 (the Monte Carlo of method.md §13 has its own benchmark,
``benchmarks/uncertainty.py``). The demo runs as a user runs it, with the default draws."""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd


def screen_rows(n: int, folder: Path) -> list[dict[str, object]]:
    """``screen()`` on n walls read from CSV, against ``pd.read_csv`` of the same file (side by side)."""
    from benchmarks.run import _best, synthetic_register
    from screening import screen
    from screening.config import Config

    csv = folder / f"screen_{n}.csv"
    synthetic_register(n).to_csv(csv, index=False)
    t_read = _best(lambda: pd.read_csv(csv), repeat=3)
    register = pd.read_csv(csv)
    t_screen = _best(lambda: screen(register, Config(samples=0)), repeat=1)
    return [{"walls": n, "pandas read_csv s": t_read, "screen() s": t_screen, "ratio": t_screen / t_read}]


def _tree_rss(proc: object) -> int:
    import psutil

    assert isinstance(proc, psutil.Process)
    total = 0
    for p in [proc, *proc.children(recursive=True)]:
        try:
            total += p.memory_info().rss
        except psutil.Error:
            pass
    return total


def timed_subprocess(args: list[str]) -> tuple[float, float]:
    """Wall time and peak resident memory (MB) summed over the process and its children."""
    import psutil

    start = time.perf_counter()
    child = subprocess.Popen(args, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=_env())
    proc = psutil.Process(child.pid)
    peak = 0
    while child.poll() is None:
        try:
            peak = max(peak, _tree_rss(proc))
        except psutil.Error:
            pass
        time.sleep(0.02)
    elapsed = time.perf_counter() - start
    if child.returncode != 0:
        raise RuntimeError(f"{' '.join(args)} failed: {child.stderr.read().decode() if child.stderr else ''}")
    return elapsed, peak / 1e6


def _env() -> dict[str, str]:
    env = dict(os.environ)
    root = str(Path(__file__).resolve().parent.parent)
    env["PYTHONPATH"] = root + os.pathsep + env.get("PYTHONPATH", "")
    return env


def run_rows(n: int, folder: Path) -> list[dict[str, object]]:
    """``wallscreen run`` on n walls, default outputs (history on, no --sheets)."""
    from benchmarks.run import synthetic_register

    csv = folder / f"run_{n}.csv"
    synthetic_register(n).to_csv(csv, index=False)
    out = folder / f"run_{n}_out"
    args = [sys.executable, "-m", "screening", "run", str(csv), "-o", str(out), "--samples", "0"]
    seconds, peak = timed_subprocess(args)
    results = out / "results.csv"
    sizes = {p.name: p.stat().st_size / 1e6 for p in out.iterdir() if p.is_file()}
    return [
        {
            "walls": n,
            "run s": seconds,
            "peak MB (all processes)": peak,
            "results.csv MB": results.stat().st_size / 1e6,
            "assumptions.csv MB": sizes.get("assumptions.csv", float("nan")),
            "walls.csv MB": sizes.get("walls.csv", float("nan")),
        }
    ]


def demo_rows(folder: Path) -> list[dict[str, object]]:
    out = folder / "demo_out"
    seconds, peak = timed_subprocess([sys.executable, "-m", "screening", "demo", "-o", str(out)])
    return [{"demo s": seconds, "peak MB (all processes)": peak}]


def load() -> str:
    one, five, _ = os.getloadavg()
    return f"load average {one:.1f} (1 min), {five:.1f} (5 min) on {os.cpu_count()} cores"
