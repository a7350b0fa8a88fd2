"""``wallscreen demo``: the whole job on the bundled, invented sample register."""

from __future__ import annotations

from pathlib import Path

from screening.job import JobResult, screen_file, write_outputs

SAMPLE = Path(__file__).resolve().parents[1] / "sample_inventory"


def sample_paths() -> tuple[Path, Path]:
    """The 2026 survey of the sample register and its mapping file."""
    register = SAMPLE / "register_2026.xlsx"
    mapping = SAMPLE / "mapping.toml"
    return register, mapping


def run_demo(out_dir: str | Path) -> JobResult:
    """Screen the sample register and write every output into ``out_dir``."""
    register, mapping = sample_paths()
    job = screen_file(register, mapping=mapping)
    write_outputs(job, out_dir)
    return job
