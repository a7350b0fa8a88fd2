"""Benchmark of the probabilities of method.md §13: Monte Carlo throughput against the
deterministic engine in the same run, the big register's time and peak memory (a subprocess's
maxrss), and the demo with samples = 0 against the default.

``python -m benchmarks.uncertainty [--walls N] [--samples N]`` prints the table (nothing asserted).
Targets: 10^4 walls × 2000 draws × 3 cases in under 60 s with a peak under 1.5 GB; the demo no
more than 3 s slower than with samples = 0.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time

from benchmarks.run import _table, machine, synthetic_register

_CHILD = """
import json, resource, sys, time
import numpy as np
from benchmarks.run import synthetic_register
from benchmarks.uncertainty import inputs_of
from screening.config import Config
from screening.core import uncertainty
walls, samples = int(sys.argv[1]), int(sys.argv[2])
config = Config(samples=samples)
inputs = inputs_of(walls, config)
draws = uncertainty.make_draws(samples, config.seed)
start = time.perf_counter()
uncertainty.evaluate(inputs, draws, config)
seconds = time.perf_counter() - start
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
print(json.dumps({"seconds": seconds, "peak_mb": peak}))
"""


def inputs_of(walls: int, config):  # type: ignore[no-untyped-def]
    """The uncertainty inputs of a synthetic register, as the pipeline builds them."""
    from screening.pipeline import screen_prepared
    from screening.prepare import prepare
    from screening.probability import uncertainty_inputs

    prepared = prepare(synthetic_register(walls), config)
    results = screen_prepared(prepared, config)
    return uncertainty_inputs(prepared, results)


def _child(walls: int, samples: int) -> dict[str, float]:
    out = subprocess.run(
        [sys.executable, "-c", _CHILD, str(walls), str(samples)], capture_output=True, text=True, check=True
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def _demo(samples: int) -> float:
    from screening import Config
    from screening.demo import sample_paths
    from screening.job import screen_file

    register, mapping = sample_paths()
    start = time.perf_counter()
    screen_file(register, mapping=mapping, config=Config(samples=samples))
    return time.perf_counter() - start


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--walls", type=int, default=10_000)
    parser.add_argument("--samples", type=int, default=2000)
    args = parser.parse_args(argv)
    from screening.config import Config
    from screening.core.engine import run_cases
    from screening.prepare import prepare

    print(machine())
    small = 200
    det_inputs = prepare(synthetic_register(20_000)).inputs
    start = time.perf_counter()
    run_cases(det_inputs, Config())
    det = 20_000 * 3 / (time.perf_counter() - start)
    mc_small = _child(small, args.samples)
    rows = [
        {"what": "deterministic engine (20,000 walls, bed joints)", "wall-cases/s": f"{det:,.0f}"},
        {
            "what": f"Monte Carlo ({small} walls x {args.samples} draws)",
            "wall-draw-cases/s": f"{small * args.samples * 3 / mc_small['seconds']:,.0f}",
        },
    ]
    big = _child(args.walls, args.samples)
    rows.append(
        {
            "what": f"Monte Carlo {args.walls:,} walls x {args.samples} draws x 3 cases (< 60 s, < 1.5 GB)",
            "seconds": f"{big['seconds']:.1f}",
            "peak MB": f"{big['peak_mb']:.0f}",
            "wall-draw-cases/s": f"{args.walls * args.samples * 3 / big['seconds']:,.0f}",
        }
    )
    off, on = _demo(0), _demo(2000)
    rows.append(
        {
            "what": "demo register screened, samples 0 vs 2000 (target <= +3 s)",
            "seconds": f"{off:.2f} vs {on:.2f}",
        }
    )
    _table("Uncertainty (method.md §13)", rows)


if __name__ == "__main__":
    main()
