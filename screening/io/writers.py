"""Atomic output: write beside the target, then rename over it.

An interrupted run never leaves a half-written file where a good one was.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Callable, Iterator
from pathlib import Path

import pandas as pd


@contextlib.contextmanager
def atomic_path(target: str | Path) -> Iterator[Path]:
    """Yield a temporary path in the target's folder; rename it over the target on success."""
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=f".part{target.suffix}", dir=target.parent)
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        yield tmp_path
        # mkstemp makes the file private; give it the permissions of a normal new file
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp_path, 0o666 & ~umask)
        os.replace(tmp_path, target)
    finally:
        if tmp_path.exists():
            tmp_path.unlink()


def write_atomic(target: str | Path, writer: Callable[[Path], object]) -> Path:
    """Call ``writer(tmp_path)`` and move the result into place."""
    with atomic_path(target) as tmp:
        writer(tmp)
    return Path(target)


def write_csv(frame: pd.DataFrame, target: str | Path) -> Path:
    """CSV with ``inf`` written as such and blanks for missing values."""
    return write_atomic(target, lambda tmp: frame.to_csv(tmp, index=False, encoding="utf-8"))


def write_text_atomic(target: str | Path, text: str) -> Path:
    """A UTF-8 text file, written atomically."""
    return write_atomic(target, lambda tmp: tmp.write_text(text, encoding="utf-8"))
