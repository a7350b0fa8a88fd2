"""Atomic output: write beside the target, then rename over it.

An interrupted run never leaves a half-written file where a good one was.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.csv as pa_csv


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
        fsync_file(tmp_path)  # the bytes on disk before the name: a power cut leaves no empty file
        os.replace(tmp_path, target)
        fsync_folder(target.parent)  # and the rename itself
    finally:
        if tmp_path.exists():
            tmp_path.unlink()


def fsync_file(path: Path) -> None:
    """Flush a written file to the disk (not only to the system's cache)."""
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def fsync_folder(folder: Path) -> None:
    """Flush a folder's entries (a rename into it) to the disk, where the system allows it."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return  # e.g. Windows: folders cannot be opened; the rename is still atomic
    try:
        os.fsync(fd)
    except OSError:
        pass  # some file systems refuse fsync on a folder
    finally:
        os.close(fd)


def write_atomic(target: str | Path, writer: Callable[[Path], object]) -> Path:
    """Call ``writer(tmp_path)`` and move the result into place."""
    with atomic_path(target) as tmp:
        writer(tmp)
    return Path(target)


CSV_DIGITS = 6
"""Significant figures of the numbers in the CSV outputs (README, "Outputs")."""


def significant(values: np.ndarray, digits: int = CSV_DIGITS) -> np.ndarray:
    """Floats rounded to ``digits`` significant figures, so that their shortest text has at most
    that many; 0, ``inf`` and NaN unchanged. Divides or multiplies by an exact power of ten, so
    the result is the double nearest the rounded decimal."""
    v = np.asarray(values, dtype=float)
    out = v.copy()
    ok = np.isfinite(v) & (np.abs(v) > 1e-290)  # below, the power of ten would overflow
    if not ok.any():
        return out
    x = v[ok]
    shift = (digits - 1 - np.floor(np.log10(np.abs(x)))).astype(int)
    up = shift >= 0
    up_scale = 10.0 ** np.where(up, shift, 0)
    down_scale = 10.0 ** np.where(up, 0, -shift)
    out[ok] = np.where(up, np.round(x * up_scale) / up_scale, np.round(x / down_scale) * down_scale)
    return out


RESULT_DECIMALS = (
    (("_kn_m", "_knm_m", "_kpa"), 1),
    (("_m",), 3),
    (("utilisation", "margin", "fos_"), 3),
)
"""Decimals of the numbers in ``results.csv`` by the unit their name ends with (README,
"Outputs"): forces [kN/m], moments [kNm/m] and pressures [kPa] to 0.1, lengths [m] to the mm,
utilisations, margins and factors of safety to 0.001. Any other number keeps
:data:`CSV_DIGITS` significant figures."""


def result_decimals(columns: Sequence[str]) -> dict[str, int]:
    """The decimals of each column of ``results.csv`` that has a fixed number of them
    (:data:`RESULT_DECIMALS`)."""
    out: dict[str, int] = {}
    for col in columns:
        for marks, decimals in RESULT_DECIMALS:
            if col.endswith(marks) or (marks[0] == "utilisation" and any(m in col for m in marks)):
                out[col] = decimals
                break
    return out


def rounded(values: np.ndarray, decimals: int) -> np.ndarray:
    """Floats rounded to ``decimals`` places (half to even, as numpy rounds), so that their
    shortest text has at most that many; ``inf`` and NaN unchanged, -0 written as 0."""
    v = np.round(np.asarray(values, dtype=float), decimals)
    return np.where(v == 0, 0.0, v)


def csv_text(values: pd.Series) -> pd.Series:
    """The hook every text column passes through before it is written (identity here)."""
    return values


def _arrow_column(values: pd.Series, decimals: int | None = None) -> pa.Array:
    """One column as pandas' ``to_csv`` would write it: NaN blank, ``inf`` kept, True/False,
    dates as YYYY-MM-DD; floats at :data:`CSV_DIGITS` significant figures, and no more than
    ``decimals`` places if given."""
    if pd.api.types.is_bool_dtype(values) and not values.isna().any():
        return pa.array(np.where(values.to_numpy(dtype=bool), "True", "False"))
    if pd.api.types.is_float_dtype(values):
        v = values.to_numpy(dtype=float)
        return pa.array(significant(v if decimals is None else rounded(v, decimals)), from_pandas=True)
    if pd.api.types.is_integer_dtype(values) and not isinstance(values.dtype, pd.CategoricalDtype):
        return pa.array(values.to_numpy())
    if pd.api.types.is_datetime64_any_dtype(values):
        dates = values.dt.normalize().eq(values) | values.isna()
        text = values.dt.strftime("%Y-%m-%d" if dates.all() else "%Y-%m-%d %H:%M:%S")
        return pa.array(text.astype(object).where(values.notna(), None))
    text = values.astype(object)
    missing = values.isna().to_numpy()
    text = pd.Series(np.where(missing, None, text.astype(str).to_numpy(dtype=object)), index=values.index)
    return pa.array(csv_text(text).to_numpy(dtype=object), type=pa.string(), from_pandas=True)


def _write_arrow_csv(frame: pd.DataFrame, tmp: Path, decimals: dict[str, int]) -> None:
    table = pa.table({str(c): _arrow_column(frame[c], decimals.get(str(c))) for c in frame.columns})
    try:  # text in quotes only where a comma, quote or line break needs them, as pandas writes it
        pa_csv.write_csv(table, tmp, write_options=pa_csv.WriteOptions(quoting_style="none"))
    except pa.ArrowInvalid:  # some text needs quotes: pyarrow then quotes every text cell
        pa_csv.write_csv(table, tmp, write_options=pa_csv.WriteOptions(quoting_style="needed"))


def write_csv(frame: pd.DataFrame, target: str | Path, decimals: dict[str, int] | None = None) -> Path:
    """CSV with ``inf`` written as such, blanks for missing values, numbers to the ``decimals``
    of their column where given, else at :data:`CSV_DIGITS` significant figures (pyarrow's
    writer: some 10 times pandas' speed) and text made safe to open in a spreadsheet
    (:func:`csv_safe_text`)."""
    frame = csv_safe_text(frame)
    if frame.columns.has_duplicates or not len(frame.columns):
        return write_atomic(target, lambda tmp: frame.to_csv(tmp, index=False, encoding="utf-8"))
    return write_atomic(target, lambda tmp: _write_arrow_csv(frame, tmp, decimals or {}))


FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
"""What a spreadsheet takes for the start of a formula (OWASP, CSV injection)."""
FORMULA_PATTERN = r"'*[=+\-@\t\r]"


def csv_safe_text(frame: pd.DataFrame) -> pd.DataFrame:
    """Text cells that start like a formula (= + - @, tab, CR) prefixed with ``'``.

    After the OWASP guidance on CSV injection: a spreadsheet opening the CSV then shows the
    text and runs nothing. Number columns are left alone (a negative margin stays a number).
    """
    out = frame
    for col in frame.columns:
        series = frame[col]
        if series.dtype.kind in "fiubcmM" or isinstance(series.dtype, pd.CategoricalDtype):
            continue
        text = series.astype(object)
        is_text = pd.Series([isinstance(v, str) for v in text.to_numpy()], index=text.index, dtype=bool)
        # text that already starts with ' before a formula character gets one more, so that
        # reading back (screening.io.readers.read_result_csv) takes exactly one off
        risky = is_text & text.where(is_text, "").astype(str).str.match(FORMULA_PATTERN)
        if risky.any():
            out = out.copy() if out is frame else out
            out[col] = text.mask(risky, "'" + text.where(risky, "").astype(str))
    return out


def write_text_atomic(target: str | Path, text: str) -> Path:
    """A UTF-8 text file, written atomically."""
    return write_atomic(target, lambda tmp: tmp.write_text(text, encoding="utf-8"))
