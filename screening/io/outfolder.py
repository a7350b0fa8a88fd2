"""The output folder of a run: what it holds, and never the input.

The register is only ever read. Before any work starts, every path the run will write is checked
against the inputs: the same file by name, through a symbolic link or a hard link.
"""

from __future__ import annotations

import os
from collections.abc import Iterable
from pathlib import Path

from screening.errors import ScreeningError

OUTPUT_FILES = (
    "results.csv",
    "walls.csv",
    "problems.csv",
    "assumptions.csv",
    "changes.csv",
    "report.xlsx",
    "walls.gpkg",
    "map.html",
    "run.json",
)
"""The files ``wallscreen run`` writes into its output folder (and ``sheets/``)."""


def same_file(a: Path, b: Path) -> bool:
    """Whether two paths name one file: the same path resolved, or one file through a link."""
    try:
        if a.resolve() == b.resolve():
            return True
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


def refuse_overwriting_input(inputs: Iterable[Path | None], targets: Iterable[Path | None]) -> None:
    """Stop before any work if an output would replace an input.

    Raises
    ------
    ScreeningError
        Naming the input and the option that points at it.
    """
    ins = [Path(p) for p in inputs if p is not None]
    for target in (Path(t) for t in targets if t is not None):
        for source in ins:
            if same_file(source, target):
                raise ScreeningError(
                    f"{target}: this output would replace the input {source}, which is only ever "
                    "read; choose another output folder or file name"
                )


def run_targets(out: Path, history: Path | None) -> list[Path]:
    """Every file a run writes into ``out`` (and the history file)."""
    return [out / name for name in OUTPUT_FILES] + [out, *([history] if history else [])]


def refuse_file_as_folder(out: Path) -> None:
    """``--out`` must name a folder (or nothing yet), not a file."""
    if out.exists() and not out.is_dir():
        raise ScreeningError(f"--out {out}: a file, not a folder; name a folder for the outputs")
