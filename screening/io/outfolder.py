"""The output folder of a run: what it holds, and never the input.

The register is only ever read. Before any work starts, every path the run will write is checked
against the inputs: the same file by name, through a symbolic link or a hard link.
"""

from __future__ import annotations

import fcntl
import hashlib
import json
import os
import time
from collections.abc import Iterable, Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path

from screening.errors import ScreeningError

OUTPUT_FILES = (
    "results.csv",
    "walls.csv",
    "problems.csv",
    "assumptions.csv",
    "assumption_sources.csv",
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


LOCK_NAME = ".wallscreen.lock"
MANIFEST_NAME = "manifest.json"


@contextmanager
def folder_lock(out: Path, wait_s: float = 10.0) -> Iterator[None]:
    """Hold an exclusive lock on the output folder for a run; a second run fails, never mixes."""
    out.mkdir(parents=True, exist_ok=True)
    handle = open(out / LOCK_NAME, "a+b")
    try:
        deadline = time.monotonic() + wait_s
        while True:
            try:
                fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise ScreeningError(
                        f"{out}: another wallscreen run is writing into this folder; wait for it "
                        "to finish or choose another --out"
                    ) from None
                time.sleep(0.2)
        yield
    finally:
        handle.close()


def begin_writing(out: Path) -> None:
    """With the lock held: drop the manifest (the folder is now incomplete) and stale ``.part`` files."""
    (out / MANIFEST_NAME).unlink(missing_ok=True)
    for folder in (out, out / "sheets"):
        if folder.is_dir():
            for part in folder.glob(".*.part*"):
                part.unlink(missing_ok=True)


def _file_sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _listed_files(out: Path) -> list[Path]:
    skip = {LOCK_NAME, MANIFEST_NAME, "history.gpkg"}
    found = [p for p in out.iterdir() if p.is_file() and p.name not in skip and not p.name.startswith(".")]
    if (out / "sheets").is_dir():
        found += [p for p in (out / "sheets").iterdir() if p.is_file() and not p.name.startswith(".")]
    return sorted(found)


def write_manifest(out: Path, head: Mapping[str, object]) -> Path:
    """The manifest, written last: run id, input and its hash, tool version, every file's size and hash."""
    from screening.io.writers import write_text_atomic

    files = [
        {"file": p.relative_to(out).as_posix(), "bytes": p.stat().st_size, "sha256": _file_sha256(p)}
        for p in _listed_files(out)
    ]
    return write_text_atomic(out / MANIFEST_NAME, json.dumps({**head, "files": files}, indent=2))


def refuse_incomplete(folder: Path) -> dict[str, object]:
    """A folder with outputs must carry a manifest its files match; else the run did not finish."""
    path = folder / MANIFEST_NAME
    unfinished = f"{folder}: the run that wrote this folder did not finish"
    if not path.exists():
        if folder.is_dir() and any(p.name in OUTPUT_FILES for p in folder.iterdir()):
            raise ScreeningError(f"{unfinished} (no {MANIFEST_NAME}); run 'wallscreen run' into it again")
        return {}
    try:
        manifest = json.loads(path.read_text(encoding="utf-8"))
        entries = list(manifest["files"])
    except (ValueError, KeyError, TypeError) as exc:
        raise ScreeningError(f"{unfinished} ({MANIFEST_NAME} unreadable: {exc})") from None
    for entry in entries:
        p = folder / str(entry["file"])
        if not p.is_file() or p.stat().st_size != entry["bytes"] or _file_sha256(p) != entry["sha256"]:
            raise ScreeningError(
                f"{unfinished} or was changed since ({entry['file']} does not match {MANIFEST_NAME})"
            )
    return dict(manifest)


def remove_stale_sheets(out: Path, kept: Iterable[str]) -> list[str]:
    """Drop calculation sheets (``sheets/*.html``) of walls no longer written, e.g. gone from the register."""
    folder = out / "sheets"
    keep = {Path(k).name for k in kept}
    stale = [p for p in folder.glob("*.html") if p.name not in keep] if folder.is_dir() else []
    for p in stale:
        p.unlink(missing_ok=True)
    return [p.name for p in stale]
