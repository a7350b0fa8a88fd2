"""One end-to-end run in its own process, so its peak memory is its own.

``python -m benchmarks.e2e REGISTER OUT_DIR`` prints one JSON line: seconds per step
and the process's peak resident memory. The register is screened with ``samples = 0``: the
figures of the pipeline (the Monte Carlo of method.md §13 has its own benchmark); a step the
workbook's worker process runs beside is named without its ``BESIDE_WORKBOOK``.
"""

from __future__ import annotations

import json
import resource
import sys
import time
from pathlib import Path

from screening.config import Config
from screening.job import BESIDE_WORKBOOK, screen_file, write_outputs


def _peak_mb() -> float:
    """This process's peak resident memory: VmHWM (ru_maxrss survives exec and would report
    the parent's peak)."""
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def main() -> None:
    register, out = Path(sys.argv[1]), Path(sys.argv[2])
    times: dict[str, float] = {}
    start = time.perf_counter()
    job = screen_file(register, config=Config(samples=0))
    times["read + screen + rank"] = time.perf_counter() - start
    marks: list[tuple[str, float]] = []
    write_outputs(job, out, progress=lambda name: marks.append((name, time.perf_counter())))
    end = time.perf_counter()
    for (name, t0), (_, t1) in zip(marks, [*marks[1:], ("end", end)], strict=True):
        times[name.removesuffix(BESIDE_WORKBOOK)] = t1 - t0
    times["total"] = end - start
    peak_mb = _peak_mb()
    sizes = {p.name: p.stat().st_size for p in out.iterdir() if p.is_file()}
    print(json.dumps({"times": times, "peak_mb": peak_mb, "sizes": sizes}))


if __name__ == "__main__":
    main()
