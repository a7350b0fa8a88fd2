"""The whole job of ``wallscreen run``: load, screen, rank and write every output."""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import secrets
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from screening import __version__
from screening.config import Config
from screening.io import LoadedRegister, load_register, load_table
from screening.io.locate import locate
from screening.io.writers import result_decimals, write_csv, write_text_atomic
from screening.io.xlsxcheck import SheetLimits
from screening.outputs import sheet_filename
from screening.pipeline import RESULT_COLUMNS, Screening, evaluate
from screening.progress import Progress


@dataclass
class RunInfo:
    """Provenance of a run, written with every output."""

    input_file: str
    input_sha256: str
    tool_version: str
    run_time: str
    config: Config
    mapping_file: str | None = None
    sheet: str | None = None
    notes: list[str] = field(default_factory=list)
    run_uid: str = field(default_factory=lambda: secrets.token_hex(4))
    """A random part of the run id: two runs started in the same second never share one."""


@dataclass(frozen=True)
class MapOptions:
    """Where the map gets Leaflet and its tiles (for networks that block public CDNs)."""

    assets_url: str | None = None
    assets_dir: Path | None = None
    tiles: str | None = None

    def check(self) -> None:
        """Refuse options that would fail only once the map is written, before any work starts."""
        from screening.errors import ScreeningError

        if self.assets_url is not None and self.assets_dir is not None:
            raise ScreeningError("give --map-assets-url or --map-assets-dir, not both")
        if self.assets_dir is not None:
            folder = Path(self.assets_dir)
            if not folder.is_dir():
                raise ScreeningError(f"--map-assets-dir {folder}: no such folder")
            missing = [n for n in ("leaflet.js", "leaflet.css") if not (folder / n).is_file()]
            if missing:
                raise ScreeningError(
                    f"--map-assets-dir {folder}: no {' or '.join(missing)} there "
                    "(the folder must hold Leaflet's dist files, e.g. from the npm package 'leaflet')"
                )
        if self.tiles is not None and not all(k in self.tiles for k in ("{z}", "{x}", "{y}")):
            raise ScreeningError(
                f"--map-tiles {self.tiles}: a tile URL template needs {{z}}, {{x}} and {{y}}"
            )


@dataclass
class JobResult:
    """What a run produced and where it went."""

    screening: Screening
    register: LoadedRegister
    info: RunInfo
    walls: pd.DataFrame
    geometry: np.ndarray
    outputs: dict[str, Path] = field(default_factory=dict)
    sheets: dict[str, str] = field(default_factory=dict)
    """Wall id -> calculation sheet path relative to the output folder."""
    map_layers: dict[str, dict[str, str]] = field(default_factory=dict)
    """Extra map overlays: layer name -> {wall id: note}."""
    history: Path | None = None
    changes: pd.DataFrame | None = None
    """Per-wall comparison with the previous run in the history."""
    previous_run: dict[str, Any] | None = None
    recorded: Any = None

    @property
    def run_id(self) -> str:
        stamp = self.info.run_time.replace("-", "").replace(":", "").replace("+0000", "")
        return f"{stamp}-{self.info.input_sha256[:8]}-{self.info.run_uid}"

    @property
    def n_rejected(self) -> int:
        return self.screening.n_rejected


def sha256(path: str | Path) -> str:
    """SHA-256 of a file, read in blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def input_digest(path: str | Path) -> str:
    """SHA-256 of the register, as a clear error if it cannot be read (deleted, no permission)."""
    from screening.errors import RegisterError

    try:
        return sha256(path)
    except FileNotFoundError as exc:
        raise RegisterError(f"{path}: no such file") from exc
    except OSError as exc:
        raise RegisterError(f"{path}: cannot be read ({exc.strerror or exc})") from exc


def refuse_changed_input(path: str | Path, digest: str) -> None:
    """The hash recorded must be that of the bytes read: refuse a register saved anew mid-read."""
    from screening.errors import RegisterError

    try:
        after = sha256(path)
    except OSError as exc:
        raise RegisterError(f"{path}: removed or unreadable while it was being read ({exc})") from exc
    if after != digest:
        raise RegisterError(f"{path}: the file changed while it was being read; run again once it is saved")


def screen_file(
    register_path: str | Path,
    *,
    mapping: str | Path | None = None,
    sheet: str | int | None = None,
    config: Config | None = None,
    history: str | Path | None = None,
    progress: Progress | None = None,
    crs: str | None = None,
    client: Any = None,
    table: str | None = None,
) -> JobResult:
    """Load, screen and locate a register file, without writing anything.

    With a ``history`` file, earlier surveys recorded there count towards each wall's lean rate;
    with a ``distributed.Client``, the chunks are screened on its cluster. With ``table``,
    ``register_path`` is a PostgreSQL DSN and the register that table or view.
    """
    from screening.history import lean_points

    config = config or Config()
    if table is not None:
        loaded, input_name, digest = load_table(str(register_path), table, mapping=mapping)
    else:
        limits = SheetLimits(config.max_cells, config.max_sheet_mb)
        digest = input_digest(register_path)
        loaded = load_register(register_path, mapping=mapping, sheet=sheet, limits=limits, crs=crs)
        refuse_changed_input(register_path, digest)
        input_name = Path(register_path).name
    run = evaluate(
        loaded.frame,
        config,
        labels=loaded.labels,
        shown=loaded.shown,
        history_points=lean_points(history),
        progress=progress,
        client=client,
    )
    info = RunInfo(
        input_file=input_name,
        input_sha256=digest,
        tool_version=__version__,
        run_time=dt.datetime.now(dt.UTC).replace(microsecond=0).isoformat(),
        config=config,
        mapping_file=str(mapping) if mapping else None,
        sheet=loaded.raw.sheet,
        notes=list(loaded.raw.notes),
    )
    refuse_unreported_nan(run)
    accepted = run.prepared.walls
    geometry, geo_problems = locate(accepted, loaded.mapping.crs or loaded.raw.crs)
    header_problems = pd.DataFrame(
        {
            "row": loaded.raw.header_row,
            "wall_id": "",
            "column": [h for h, _ in loaded.raw.header_warnings],
            "value": "",
            "severity": "warning",
            "message": [m for _, m in loaded.raw.header_warnings],
        }
    )
    geo_problems = pd.concat([header_problems, geo_problems], ignore_index=True)
    if len(geo_problems):
        run = Screening(
            run.prepared,
            run.results,
            run.walls,
            pd.concat([run.problems, geo_problems], ignore_index=True),
            run.config,
        )
    walls = run.walls
    if len(walls):
        position = pd.Series(np.arange(len(accepted)), index=accepted["wall_id"].to_numpy())
        order = position.loc[walls["wall_id"].to_numpy()].to_numpy()
        walls = walls.copy()
        geometry = geometry[order]
        walls["located"] = np.array([g is not None for g in geometry], dtype=bool)
    release_freed_memory()  # the screening's working arrays, before the outputs take theirs
    return JobResult(run, loaded, info, walls, geometry, history=Path(history) if history else None)


NEVER_NAN = (
    "middle_third_utilisation",
    "sliding_utilisation",
    "overturning_utilisation",
    "bearing_utilisation",
    "utilisation",
)
"""Result columns that every screened wall has in every case (crack and joint columns may be blank)."""


def refuse_unreported_nan(run: Screening) -> None:
    """No NaN may reach a utilisation or a score unnoticed: name the walls and stop the run."""
    from screening.errors import ScreeningError

    results, walls = run.results, run.walls
    bad: dict[str, list[str]] = {}
    for col in NEVER_NAN:
        if col in results:
            hit = results.loc[results[col].isna(), "wall_id"].astype(str)
            if len(hit):
                bad[col] = list(dict.fromkeys(hit))
    for col in ("utilisation", "priority_score"):
        if col in walls and walls[col].isna().any():
            bad[f"walls {col}"] = list(walls.loc[walls[col].isna(), "wall_id"].astype(str))
    if bad:
        where = "; ".join(f"{col}: {', '.join(ids[:5])}" for col, ids in bad.items())
        raise ScreeningError(f"a result came out as NaN (not a number), which should not happen: {where}")


def provenance(job: JobResult) -> list[tuple[str, object]]:
    """Where a run came from, for the settings sheet, the map and the history."""
    info = job.info
    return [
        ("tool", f"wallscreen {info.tool_version}"),
        ("run time (UTC)", info.run_time),
        ("input file", info.input_file),
        ("input SHA-256", info.input_sha256),
        ("sheet", info.sheet or ""),
        ("mapping file", info.mapping_file or "(none: canonical headers)"),
        ("rows read", job.screening.prepared.n_read),
        ("walls screened", len(job.walls)),
        ("rows rejected", job.n_rejected),
        ("walls without a location", int((~job.walls["located"]).sum()) if len(job.walls) else 0),
        ("reader notes", "; ".join(info.notes)),
    ]


def _settings_digest(job: JobResult) -> str:
    from screening.history import settings_digest

    return settings_digest(job.info.config.to_dict())


def compare_with_history(job: JobResult) -> None:
    """Compare this run with the latest different run in the history (sets ``job.changes``)."""
    from screening.history import carry_rejected, compare, describe_change, list_runs, run_walls

    assert job.history is not None
    runs = list_runs(job.history)
    digest = _settings_digest(job)
    other = runs[~((runs["input_sha256"] == job.info.input_sha256) & (runs["settings_sha256"] == digest))]
    if other.empty:
        return
    previous = other.iloc[-1].to_dict()
    before = run_walls(job.history, previous["run_id"])
    job.changes = carry_rejected(
        compare(before, job.walls, rejected=_rejected_ids(job)), job.screening.problems
    )
    job.previous_run = previous
    moved = job.changes[job.changes["status"].isin(["changed", "added"])]
    job.map_layers["Changed since the last run"] = {
        str(r.wall_id): describe_change(pd.Series(r._asdict())) for r in moved.itertuples(index=False)
    }


def _rejected_ids(job: JobResult) -> list[str]:
    problems = job.screening.problems
    errors = problems[problems["severity"] == "error"]
    return list(dict.fromkeys(errors["wall_id"].dropna().astype(str)))


def record_history(job: JobResult) -> Any:
    """Add this run to the history (not again if the same input and settings are there)."""
    from screening.history import record_run

    assert job.history is not None
    return record_run(job.history, run=run_record(job), walls=job.walls, geometry=job.geometry)


def run_record(job: JobResult) -> dict[str, Any]:
    """The row of the history's ``runs`` table for this run."""
    return {
        "run_id": job.run_id,
        "run_time": job.info.run_time,
        "input_file": job.info.input_file,
        "input_sha256": job.info.input_sha256,
        "settings_sha256": _settings_digest(job),
        "tool_version": job.info.tool_version,
        "settings": json.dumps(job.info.config.to_dict(), default=str),
        "n_walls": len(job.walls),
        "n_rejected": job.n_rejected,
        "rejected_walls": json.dumps(sorted(_rejected_ids(job))),
    }


def write_database(job: JobResult, dsn: str, schema: str) -> bool:
    """Write walls, results per case and the run history to PostgreSQL, in one transaction.

    Returns False when the same input with the same settings was already in the database's
    history (the latest walls and results are replaced all the same).
    """
    from screening.history import INPUT_COLUMNS, KEPT_RESULTS, RUN_COLUMNS
    from screening.io.postgis import write_run
    from screening.outputs.geopackage import gis_columns

    history = job.walls.reindex(columns=["wall_id", *INPUT_COLUMNS, *KEPT_RESULTS])
    history.insert(0, "run_id", job.run_id)
    walls = gis_columns(job.walls)
    walls.insert(0, "run_id", job.run_id)
    results = job.screening.results.reindex(columns=list(RESULT_COLUMNS))
    results.insert(0, "run_id", job.run_id)
    return write_run(
        dsn,
        schema,
        run=run_record(job),
        run_columns={c: "bigint" if t == "INTEGER" else "text" for c, t in RUN_COLUMNS.items()},
        walls=walls,
        results=results,
        geometry=job.geometry,
        history=history,
    )


def write_explanations(
    job: JobResult, wall_ids: list[str], out_dir: str | Path, progress: Progress | None = None
) -> dict[str, str]:
    """Calculation sheets for the given walls (see :mod:`screening.outputs.sheets`)."""
    from screening.outputs.sheets import figure_case_and_driver, write_sheets

    prepared = job.screening.prepared
    return write_sheets(
        prepared.walls,
        prepared.assumptions,
        wall_ids,
        out_dir,
        job.info.config,
        provenance(job),
        progress=progress,
        figures=figure_case_and_driver(job.screening.results),
    )


def render_map(job: JobResult, out_dir: Path, options: MapOptions | None = None) -> Path:
    """Write ``map.html`` for a run."""
    return _write_map(
        out_dir,
        job.walls,
        job.geometry,
        job.screening.results,
        dict(provenance(job)),
        job.sheets,
        job.map_layers,
        options,
        job.info.config.resultant_near_toe_m,
        _carried_lines(job.changes),
    )


def _carried_lines(changes: pd.DataFrame | None) -> list[str]:
    """``HV-017: not re-screened: …; was Inspect first, rank 5 in the last run`` per carried wall."""
    from screening.history import carried_walls

    carried = carried_walls(changes)
    return [f"{w}: {t}" for w, t in zip(carried["wall_id"].astype(str), carried["carried"], strict=True)]


def _write_map(
    folder: Path,
    walls: pd.DataFrame,
    geometry: np.ndarray,
    results: pd.DataFrame,
    info: dict[str, Any],
    sheets: dict[str, str],
    layers: dict[str, dict[str, str]],
    options: MapOptions | None,
    near_toe_m: float = Config().resultant_near_toe_m,
    carried: list[str] | None = None,
) -> Path:
    """The map of a run, titled from its provenance (the keys of :func:`provenance`)."""
    from screening.outputs.webmap import build_map, write_map

    options = options or MapOptions()
    page = build_map(
        walls,
        geometry,
        results,
        title=f"Retaining wall screening: {info.get('input file', '')}",
        subtitle=f"Run {info.get('run time (UTC)', '')} UTC, {info.get('tool', '')}; "
        f"{info.get('walls screened', len(walls))} walls screened, "
        f"{info.get('rows rejected', 0)} rows rejected",
        sheets=sheets,
        assets_url=options.assets_url,
        assets_dir=options.assets_dir,
        tiles=options.tiles,
        extra_layers=layers,
        near_toe_m=near_toe_m,
        carried=carried,
    )
    return write_map(page, folder / "map.html")


def write_outputs(
    job: JobResult,
    out_dir: str | Path,
    *,
    progress: Progress | None = None,
    map_options: MapOptions | None = None,
    sheet_ids: list[str] | None = None,
) -> dict[str, Path]:
    """Every output under an exclusive lock of the folder, the manifest last (see io.outfolder)."""
    from screening.io.outfolder import begin_writing, folder_lock, write_manifest

    out = Path(out_dir)
    with folder_lock(out):
        begin_writing(out)
        outputs = _write_all(job, out, progress=progress, map_options=map_options, sheet_ids=sheet_ids)
        head = {
            "run_id": job.run_id,
            "input_file": job.info.input_file,
            "input_sha256": job.info.input_sha256,
            "tool_version": job.info.tool_version,
        }
        outputs["manifest"] = write_manifest(out, head)
    return outputs


BESIDE_WORKBOOK = " (and the workbook)"
"""Added to the name of each step written while the workbook's worker process runs."""

WORKBOOK_PROCESS_FROM = 20_000
"""Walls from which the workbook is written in a worker process of its own while this process
writes the other outputs (below, starting the worker costs more than it saves)."""


def _write_all(
    job: JobResult,
    out_dir: str | Path,
    *,
    progress: Progress | None = None,
    map_options: MapOptions | None = None,
    sheet_ids: list[str] | None = None,
) -> dict[str, Path]:
    """Write every output of a run into ``out_dir``, each file atomically; the workbook, the
    slowest, beside the others in a worker process for large registers."""
    step = progress or (lambda _name: None)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    outputs: dict[str, Path] = {}
    if job.history is not None:
        step("comparison with the previous run")
        compare_with_history(job)
    if sheet_ids:
        step(f"{len(sheet_ids)} calculation sheets")
        job.sheets.update(write_explanations(job, sheet_ids, out, progress=step))
        from screening.io.outfolder import remove_stale_sheets

        remove_stale_sheets(Path(out), job.sheets.values())
        outputs["sheets"] = out / "sheets"
    if len(job.walls) < WORKBOOK_PROCESS_FROM:
        step("workbook")
        outputs["workbook"] = write_workbook_of(job, out / "report.xlsx")
        outputs.update(_write_the_rest(job, out, step, map_options))
    else:
        import concurrent.futures as cf
        import multiprocessing as mp

        # spawn, not fork: a forked child would carry (and count again) the whole run's memory
        with cf.ProcessPoolExecutor(1, mp_context=mp.get_context("spawn")) as pool:
            workbook = pool.submit(_write_workbook_call, workbook_arguments(job, out / "report.xlsx"))
            outputs.update(_write_the_rest(job, out, lambda name: step(name + BESIDE_WORKBOOK), map_options))
            step("workbook")
            outputs["workbook"] = workbook.result()
    outputs["run"] = write_text_atomic(
        out / "run.json", json.dumps(dict(provenance(job)), indent=2, default=str)
    )
    job.outputs.update(outputs)
    return outputs


def release_freed_memory() -> None:
    """Hand back to the operating system the memory that this process has freed but still holds.

    Arrow's pool (the register's text columns) and glibc's malloc keep freed blocks for reuse, so
    the process's resident size, what the user's machine sees, stays near its highest point for
    the rest of the run; called between outputs, each output's working memory is returned before
    the next one takes its own. Costs a garbage collection and a few milliseconds."""
    import ctypes
    import gc

    gc.collect()
    try:
        import pyarrow as pa

        pa.default_memory_pool().release_unused()
    except ImportError:  # pragma: no cover - pyarrow is a dependency
        pass
    if sys.platform.startswith("linux"):
        try:
            ctypes.CDLL("libc.so.6").malloc_trim(0)
        except (OSError, AttributeError):  # another C library than glibc: nothing to do
            pass


def _write_the_rest(
    job: JobResult, out: Path, step: Progress, map_options: MapOptions | None
) -> dict[str, Path]:
    """The CSV files, GeoPackage, Parquet, map and history (every output but the workbook)."""
    from screening.assumed import write_assumptions
    from screening.outputs.geopackage import write_geopackage

    run = job.screening
    release_freed_memory()
    step("CSV files")
    outputs = {
        "results": write_csv(
            run.results.reindex(columns=list(RESULT_COLUMNS)),
            out / "results.csv",
            decimals=result_decimals(RESULT_COLUMNS),
        ),
        "walls": write_csv(job.walls, out / "walls.csv"),
        "problems": write_csv(run.problems, out / "problems.csv"),
        **write_assumptions(run.prepared.assumptions, out),
    }
    if job.changes is not None:
        outputs["changes"] = write_csv(job.changes, out / "changes.csv")
    release_freed_memory()
    step("GeoPackage")
    outputs["geopackage"] = write_geopackage(job.walls, job.geometry, out / "walls.gpkg")
    release_freed_memory()
    step("Parquet")
    outputs.update(write_parquet(job, out))
    release_freed_memory()
    step("map")
    outputs["map"] = render_map(job, out, map_options)
    release_freed_memory()
    if job.history is not None:
        step("history")
        job.recorded = record_history(job)
        outputs["history"] = job.history
    return outputs


def workbook_arguments(job: JobResult, target: Path) -> dict[str, Any]:
    """The arguments of :func:`screening.outputs.workbook.write_workbook` for this run; of the
    results, only the walls the sheet 'Results by case' shows (it keeps the first walls of the
    ranking), so that little is sent to a worker process."""
    from screening.outputs.workbook import wall_columns_shown

    run = job.screening
    config = job.info.config
    walls = job.walls[[c for c in wall_columns_shown() if c in job.walls.columns]]
    results = run.results.reindex(columns=list(RESULT_COLUMNS))
    limit = config.workbook_full_results_limit
    if len(job.walls) > limit:
        results = results[results["wall_id"].isin(set(job.walls["wall_id"].head(limit)))]
    return {
        "target": target,
        "walls": walls.assign(sheet=walls["wall_id"].astype(str).map(job.sheets)),
        "results": results,
        "problems": run.problems,
        "assumptions": run.prepared.assumptions,
        "settings": config.to_dict(),
        "provenance": provenance(job),
        "changes": job.changes,
        "full_results_limit": limit,
        "near_toe_m": config.resultant_near_toe_m,
        "paper": config.paper,
    }


def _write_workbook_call(arguments: dict[str, Any]) -> Path:
    from screening.outputs.workbook import write_workbook

    return write_workbook(**arguments)


def write_workbook_of(job: JobResult, target: Path) -> Path:
    """``report.xlsx`` of this run, written in this process."""
    return _write_workbook_call(workbook_arguments(job, target))


def write_parquet(job: JobResult, out: Path) -> dict[str, Path]:
    """``walls.parquet`` (GeoParquet) and ``results.parquet`` beside the CSVs."""
    from screening.outputs.parquet import write_results_parquet, write_walls_parquet

    results = job.screening.results.reindex(columns=list(RESULT_COLUMNS))
    return {
        "geoparquet": write_walls_parquet(job.walls, job.geometry, out / "walls.parquet"),
        "parquet": write_results_parquet(results, out / "results.parquet"),
    }


def rerender_map(results_dir: str | Path, options: MapOptions | None = None) -> Path:
    """Re-render ``map.html`` from the outputs of an earlier run (walls.gpkg, results.csv, run.json)."""
    from screening.errors import RegisterError
    from screening.io.outfolder import refuse_incomplete
    from screening.io.readers import read_result_csv
    from screening.outputs.geopackage import read_geopackage

    folder = Path(results_dir)
    manifest = refuse_incomplete(folder)
    needed = [folder / "walls.gpkg", folder / "results.csv", folder / "run.json"]
    missing = [p.name for p in needed if not p.exists()]
    if missing:
        raise RegisterError(f"{folder}: not a wallscreen output folder (missing {', '.join(missing)})")
    walls, geometry = read_geopackage(folder / "walls.gpkg")
    results = read_result_csv(folder / "results.csv")
    info = json.loads((folder / "run.json").read_text(encoding="utf-8"))
    walls["located"] = walls["located"].astype(bool)
    geometry = np.array([g if g is not None and not g.is_empty else None for g in geometry], dtype=object)
    sheets = {
        str(w): f"sheets/{sheet_filename(str(w))}"
        for w in walls["wall_id"]
        if (folder / "sheets" / sheet_filename(str(w))).exists()
    }
    layers = {}
    if (folder / "changes.csv").exists():
        from screening.history import describe_change

        changes = pd.read_csv(
            folder / "changes.csv", dtype={"wall_id": str}, keep_default_na=False, na_values=[""]
        )
        changes["inputs_changed"] = changes["inputs_changed"].fillna("")
        moved = changes[changes["status"].isin(["changed", "added"])]
        layers["Changed since the last run"] = {
            str(r["wall_id"]): describe_change(r) for _, r in moved.iterrows()
        }
    carried = _carried_lines(changes) if (folder / "changes.csv").exists() else []
    path = _write_map(folder, walls, geometry, results, info, sheets, layers, options, carried=carried)
    if manifest:  # the new map.html is part of the finished folder
        from screening.io.outfolder import write_manifest

        write_manifest(folder, {k: v for k, v in manifest.items() if k != "files"})
    return path
