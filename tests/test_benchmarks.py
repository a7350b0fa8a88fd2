"""Smoke run of the benchmark script so it cannot rot (no timing is asserted)."""

from __future__ import annotations

from benchmarks.run import main


def test_benchmark_quick_run_prints_a_table(capsys) -> None:
    main(["--quick"])
    out = capsys.readouterr().out
    assert "walls×cases/s" in out and "cores" in out
