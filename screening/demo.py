"""``wallscreen demo``: the whole job on the bundled, invented sample register.

Two surveys of the invented Harrowby Vale register: the 2025 survey is recorded
in the run history, then the 2026 survey is validated, screened, ranked and
written out in full (workbook, GeoPackage, map, calculation sheets for the
flagged walls) with the comparison against 2025.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

from screening.job import JobResult, MapOptions, record_history, screen_file, write_outputs
from screening.outputs.sheets import flagged_walls
from screening.progress import Progress


def _sample(name: str) -> Path:
    """A file of the bundled sample (``sample_inventory/``, shipped as ``screening.sample_inventory``)."""
    return Path(str(resources.files("screening.sample_inventory") / name))


def sample_paths(year: int = 2026) -> tuple[Path, Path]:
    """A survey of the sample register and its mapping file."""
    return _sample(f"register_{year}.xlsx"), _sample("mapping.toml")


def run_demo(
    out_dir: str | Path, *, progress: Progress | None = None, map_options: MapOptions | None = None
) -> JobResult:
    """Screen both sample surveys and write every output of the second into ``out_dir``."""
    step = progress or (lambda _name: None)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    history = out / "history.gpkg"
    step("screening the 2025 survey")
    first_register, mapping = sample_paths(2025)
    first = screen_file(first_register, mapping=mapping, history=history)
    record_history(first)
    step("screening the 2026 survey")
    register, mapping = sample_paths(2026)
    job = screen_file(register, mapping=mapping, history=history)
    write_outputs(
        job,
        out,
        progress=step,
        map_options=map_options,
        sheet_ids=flagged_walls(job.screening.results),
    )
    return job
