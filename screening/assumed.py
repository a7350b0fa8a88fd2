"""Every default that filled a blank, per wall, in a compact form (method.md §7).

A register of 10^5 walls takes some 10^6 defaults, most of them the same few values with the
same few sources. :class:`Assumptions` keeps them as one row per wall (the value used per
input, missing where the wall's own value was recorded) and the sources in a small table of
their own, numbered per input. :meth:`Assumptions.long` gives back the one-fact-per-row form
(``wall_id``, ``row``, ``column``, ``value``, ``source``); nothing is lost between the two.

On disk (``wallscreen run``): ``assumptions.csv`` holds the table, ``assumption_sources.csv``
the sources (``column``, ``source_id``, ``source``, ``walls``). An input whose defaults come
from more than one source in the run (the unit weight by material, the bearing by foundation
class, the surveyed water by drainage) has a column ``<input> source`` holding the source's
number; an input with one source has none (its source is number 1 of that input).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

LONG_COLUMNS = ("wall_id", "row", "column", "value", "source")
SOURCE_COLUMNS = ("column", "source_id", "source", "walls")
SOURCE_SUFFIX = " source"
FILES = ("assumptions.csv", "assumption_sources.csv")


@dataclass(frozen=True)
class Assumptions:
    """Defaults per wall: ``table`` (``wall_id``, ``row``, one column per input assumed on some
    wall, the value used or missing) and ``codes`` (the same shape: the number of the source in
    ``sources`` per input, 0 where recorded); ``sources`` lists them (``column``, ``source_id``
    from 1, ``source``, ``walls``)."""

    table: pd.DataFrame
    codes: pd.DataFrame
    sources: pd.DataFrame

    @property
    def columns(self) -> list[str]:
        """The inputs assumed on some wall, in the order the defaults are filled."""
        return [c for c in self.table.columns if c not in ("wall_id", "row")]

    def __len__(self) -> int:
        """The number of defaults used (one per wall and input)."""
        return int((self.codes.to_numpy() > 0).sum()) if len(self.codes.columns) else 0

    @property
    def empty(self) -> bool:
        return len(self) == 0

    def rows(self, keep: np.ndarray | pd.Series | Sequence[int]) -> Assumptions:
        """Only the walls on the given register rows, in row order."""
        mask = self.table["row"].isin(set(np.asarray(keep).tolist())).to_numpy()
        order = np.argsort(self.table["row"].to_numpy()[mask], kind="stable")
        table = self.table[mask].iloc[order].reset_index(drop=True)
        codes = self.codes[mask].iloc[order].reset_index(drop=True)
        used = codes.to_numpy() > 0
        walls = used.any(axis=1)
        return _counted(
            table[walls].reset_index(drop=True), codes[walls].reset_index(drop=True), self.sources
        )

    def for_wall(self, wall_id: object) -> pd.DataFrame:
        """The long form of one wall's defaults."""
        mask = (self.table["wall_id"].astype(str) == str(wall_id)).to_numpy()
        sub = Assumptions(self.table[mask], self.codes[mask], self.sources)
        return sub.long()

    def long(self) -> pd.DataFrame:
        """One fact per row: wall, register row, input, value used, source; by register row."""
        pieces = []
        n = len(self.table)
        for k, col in enumerate(self.columns):
            code = self.codes[col].to_numpy()
            hit = np.flatnonzero(code > 0)
            texts = self.sources[self.sources["column"] == col].set_index("source_id")["source"]
            pieces.append(
                pd.DataFrame(
                    {
                        "wall_id": self.table["wall_id"].to_numpy(dtype=object)[hit],
                        "row": self.table["row"].to_numpy()[hit],
                        "column": col,
                        "value": self.table[col].to_numpy(dtype=object)[hit],
                        "source": texts.reindex(code[hit]).to_numpy(dtype=object),
                        "_at": hit * max(len(self.columns), 1) + k,
                    }
                )
            )
        if not pieces or not n:
            return pd.DataFrame({c: pd.Series(dtype=object) for c in LONG_COLUMNS})
        out = pd.concat(pieces, ignore_index=True).sort_values("_at", kind="stable")
        return out.drop(columns="_at").reset_index(drop=True)

    def files(self) -> tuple[pd.DataFrame, pd.DataFrame]:
        """``assumptions.csv`` and ``assumption_sources.csv`` as frames: the table, with a
        ``<input> source`` column where an input has more than one source, or a default whose
        value is missing (so that the table alone says where a default was taken)."""
        table = self.table.copy()
        for col in self.columns:
            code = self.codes[col].to_numpy()
            missing = (code > 0) & pd.isna(table[col]).to_numpy()
            if code.max(initial=0) > 1 or missing.any():
                at = table.columns.get_loc(col) + 1
                # whole numbers, blank where recorded (floats: the CSV writer leaves NaN blank)
                table.insert(int(at), col + SOURCE_SUFFIX, np.where(code > 0, code, np.nan))
        return table, self.sources.copy()

    @classmethod
    def from_files(cls, table: pd.DataFrame, sources: pd.DataFrame) -> Assumptions:
        """Read back what :meth:`files` gave (e.g. from the two CSV files of a result folder)."""
        inputs = [c for c in table.columns if c not in ("wall_id", "row") and not c.endswith(SOURCE_SUFFIX)]
        codes = pd.DataFrame(index=table.index)
        for col in inputs:
            if col + SOURCE_SUFFIX in table:
                codes[col] = pd.to_numeric(table[col + SOURCE_SUFFIX]).fillna(0).astype(np.int64)
            else:
                codes[col] = np.where(table[col].notna(), 1, 0)
        return cls(table[["wall_id", "row", *inputs]], codes, sources)

    @classmethod
    def none(cls) -> Assumptions:
        table = pd.DataFrame({"wall_id": pd.Series(dtype=object), "row": pd.Series(dtype=np.int64)})
        sources = pd.DataFrame({c: pd.Series(dtype=object) for c in SOURCE_COLUMNS})
        return cls(table, pd.DataFrame(index=table.index), sources)


class Recorder:
    """Collects the defaults of :func:`screening.prepare.prepare` column by column (a mask, the
    value and the source per call; at most one default per wall and input)."""

    def __init__(self, n: int) -> None:
        self.n = n
        self.values: dict[str, np.ndarray] = {}
        self.codes: dict[str, np.ndarray] = {}
        self.texts: dict[str, list[str]] = {}

    def add(self, column: str, mask: np.ndarray, value: object, source: object) -> None:
        hit = np.flatnonzero(mask)
        if column not in self.values:
            numeric = _is_number(value)
            self.values[column] = np.full(self.n, np.nan) if numeric else np.full(self.n, None, dtype=object)
            self.codes[column] = np.zeros(self.n, dtype=np.int64)
            self.texts[column] = []
        values, codes = self.values[column], self.codes[column]
        if (codes[hit] > 0).any():
            raise ValueError(f"internal: two defaults for {column} on one wall")
        if isinstance(value, pd.Series):
            values[hit] = value.to_numpy(dtype=values.dtype)[hit]
        else:
            values[hit] = value
        if isinstance(source, pd.Series):
            found, uniques = pd.factorize(source.to_numpy(dtype=object)[hit])
            texts = [str(t) for t in uniques]
        else:
            found, texts = np.zeros(len(hit), dtype=np.int64), [str(source)]
        known = self.texts[column]
        for text in texts:
            if text not in known:
                known.append(text)
        number = np.asarray([known.index(t) + 1 for t in texts], dtype=np.int64)
        codes[hit] = number[found]

    def build(self, wall_id: pd.Series, row: pd.Series) -> Assumptions:
        """Every wall of the register (rows in its order); :meth:`Assumptions.rows` picks the
        screened ones."""
        table = pd.DataFrame({"wall_id": wall_id.astype(object).to_numpy(), "row": row.to_numpy()})
        columns = {col: pd.Series(values, dtype=values.dtype) for col, values in self.values.items()}
        table = pd.concat([table, pd.DataFrame(columns, index=table.index)], axis=1)
        codes = pd.DataFrame(self.codes, index=table.index)
        sources = pd.DataFrame(
            [(col, i + 1, text) for col, texts in self.texts.items() for i, text in enumerate(texts)],
            columns=list(SOURCE_COLUMNS[:3]),
        )
        return _counted(table, codes, sources)


def _is_number(value: object) -> bool:
    """A default's value is a number (a float column) or text (an object column)."""
    if isinstance(value, pd.Series):
        return pd.api.types.is_numeric_dtype(value) and not pd.api.types.is_bool_dtype(value)
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)


def _counted(table: pd.DataFrame, codes: pd.DataFrame, sources: pd.DataFrame) -> Assumptions:
    """The sources with the number of walls taking each, unused ones dropped (numbers kept)."""
    counts = []
    for col, number in zip(sources["column"], sources["source_id"], strict=True):
        counts.append(int((codes[col].to_numpy() == number).sum()) if col in codes else 0)
    sources = sources.assign(walls=np.asarray(counts, dtype=np.int64))
    used = [c for c in codes.columns if (codes[c].to_numpy() > 0).any()]
    table = table[["wall_id", "row", *used]]
    sources = sources[(sources["walls"] > 0) & sources["column"].isin(used)].reset_index(drop=True)
    return Assumptions(table, codes[used], sources[list(SOURCE_COLUMNS)])


def write_assumptions(assumptions: Assumptions, folder: str | Path) -> dict[str, Path]:
    """``assumptions.csv`` and ``assumption_sources.csv`` in ``folder`` (each atomically)."""
    from screening.io.writers import write_csv

    table, sources = assumptions.files()
    folder = Path(folder)
    return {
        "assumptions": write_csv(table, folder / FILES[0]),
        "assumption_sources": write_csv(sources, folder / FILES[1]),
    }


def read_assumptions(folder: str | Path) -> Assumptions:
    """The two files of a result folder back as :class:`Assumptions`."""
    folder = Path(folder)
    table = pd.read_csv(folder / FILES[0], keep_default_na=False, na_values=[""])
    sources = pd.read_csv(folder / FILES[1], keep_default_na=False, na_values=[""])
    return Assumptions.from_files(table, sources)
