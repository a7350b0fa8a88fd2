"""The register I/O layer: readers, column mapping, locations and atomic writers."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from screening.io.mapping import ColumnMapping, load_mapping, to_canonical
from screening.io.readers import RawRegister, read_register
from screening.io.xlsxcheck import SheetLimits


@dataclass(frozen=True)
class LoadedRegister:
    """A register in canonical columns, with where it came from."""

    frame: pd.DataFrame
    labels: dict[str, str]
    shown: pd.DataFrame
    raw: RawRegister
    mapping: ColumnMapping


def load_register(
    path: str | Path,
    *,
    mapping: str | Path | None = None,
    sheet: str | int | None = None,
    limits: SheetLimits | None = None,
    crs: str | None = None,
) -> LoadedRegister:
    """Read a register file and map it onto the canonical columns (read-only).

    ``crs`` (``--crs``) is the CRS of easting/northing and of a GIS layer that declares none; it
    takes the place of the mapping file's ``[register] crs``.
    """
    colmap = load_mapping(mapping)
    if crs:
        colmap = dataclasses.replace(colmap, crs=crs)
    raw = read_register(
        path,
        sheet=sheet if sheet is not None else colmap.sheet,
        known_headers=colmap.headers,
        limits=limits,
        crs=colmap.crs,
    )
    frame, labels, shown = to_canonical(raw, colmap)
    return LoadedRegister(frame, labels, shown, raw, colmap)


def load_table(dsn: str, table: str, *, mapping: str | Path | None = None) -> tuple[LoadedRegister, str, str]:
    """Read a register table or view from PostgreSQL and map it (see :mod:`screening.io.postgis`).

    Returns the register, a name for the source (no credentials) and the SHA-256 of its content.
    """
    from screening.io.postgis import read_table

    colmap = load_mapping(mapping)
    raw, name, digest = read_table(dsn, table)
    frame, labels, shown = to_canonical(raw, colmap)
    return LoadedRegister(frame, labels, shown, raw, colmap), name, digest


__all__ = ["LoadedRegister", "load_register", "load_table", "read_register"]
