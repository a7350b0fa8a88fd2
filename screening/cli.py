"""The ``wallscreen`` command line: parses, calls one function, prints.

Exit codes: 0 every row screened; 1 screened, but some rows rejected;
2 nothing could be screened (unreadable file, no usable rows, required
columns missing) or the command line was wrong; 3 screened, but the outputs
could not be written (read-only folder, full disk): the files written before
stay as they were or complete, none is half-written.
"""

from __future__ import annotations

import dataclasses
import json
import re
from pathlib import Path
from typing import Annotated

import pandas as pd
import typer
import typer.core
from rich.console import Console
from rich.markup import escape as _rich_escape
from rich.table import Table

from screening import __version__
from screening.config import Config, load_config
from screening.errors import ScreeningError
from screening.job import JobResult, MapOptions, rerender_map, screen_file, write_outputs
from screening.outputs.sheets import flagged_walls

EXIT_OK = 0
EXIT_SOME_REJECTED = 1
EXIT_NOTHING_SCREENED = 2
EXIT_WRITE_FAILED = 3

CAUTION = (
    "Screening aid only: results must be reviewed by a qualified engineer; "
    "local codes and the asset owner's standards govern."
)

# typer's rich help prints a type such as <bool> beside every flag, --help included; a flag takes
# no value, so show none
_display_type = typer.core.TyperOption.display_type_rich


def _no_type_for_flags(self: typer.core.TyperOption, ctx: typer.Context) -> str | None:
    return None if self.is_flag else _display_type(self, ctx)


typer.core.TyperOption.display_type_rich = _no_type_for_flags  # type: ignore[method-assign,assignment]


_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f-\x9f]")


def escape(text: str) -> str:
    """Register text for the terminal: rich markup escaped, control characters (ESC[2J clears
    the screen) removed."""
    return _rich_escape(_CONTROL.sub("", text))


def plural(n: int, word: str, words: str | None = None) -> str:
    """``1 warning``, ``2 warnings``: the count with the word in the right number."""
    return f"{n} {word if n == 1 else (words or word + 's')}"


app = typer.Typer(
    name="wallscreen",
    help="Screen a register of existing gravity retaining walls for stability risk.",
    no_args_is_help=True,
    add_completion=False,
)
console = Console(soft_wrap=True)
err = Console(stderr=True, soft_wrap=True)

RegisterArg = Annotated[Path, typer.Argument(help="The register: .csv, .xlsx/.xls/.ods, .gpkg/.geojson/.shp")]
MappingOpt = Annotated[
    Path | None, typer.Option("--mapping", "-m", help="TOML file mapping your headers, units and codes")
]
SheetOpt = Annotated[
    str | None,
    typer.Option(
        "--sheet", "--layer", help="Sheet name or 0-based index (spreadsheets), or layer name (GeoPackage)"
    ),
]
CrsOpt = Annotated[
    str | None,
    typer.Option("--crs", help="CRS of easting/northing and of a GIS layer without one, e.g. EPSG:27700"),
]
ConfigOpt = Annotated[Path | None, typer.Option("--config", "-c", help="TOML file of settings")]
AssetsUrlOpt = Annotated[
    str | None,
    typer.Option("--map-assets-url", help="Base URL of leaflet.js and leaflet.css (an intranet mirror)"),
]
AssetsDirOpt = Annotated[
    Path | None,
    typer.Option("--map-assets-dir", help="Folder with leaflet.js and leaflet.css to inline into the map"),
]
TilesOpt = Annotated[
    str | None,
    typer.Option("--map-tiles", help="Tile URL template, e.g. https://tiles.example/{z}/{x}/{y}.png"),
]


def _fail(exc: ScreeningError) -> typer.Exit:
    err.print(f"[bold red]error:[/] {escape(str(exc))}", highlight=False, markup=True)
    return typer.Exit(EXIT_NOTHING_SCREENED)


def _write_failed(exc: OSError, out: Path) -> typer.Exit:
    """A failure while writing (no permission, disk full): one line, exit 3, no traceback."""
    where = exc.filename or out
    err.print(
        f"[bold red]error:[/] could not write the outputs to {escape(str(out))}: "
        f"{escape(str(where))}: {escape(exc.strerror or str(exc))}",
        highlight=False,
        markup=True,
    )
    return typer.Exit(EXIT_WRITE_FAILED)


def _version(value: bool) -> None:
    if value:
        console.print(f"wallscreen {__version__}")
        raise typer.Exit()


@app.callback()
def main(
    version: Annotated[
        bool, typer.Option("--version", callback=_version, is_eager=True, help="Show the version")
    ] = False,
) -> None:
    """Screen a register of existing gravity retaining walls for stability risk."""


def _print_problems(job: JobResult, limit: int = 15) -> None:
    problems = job.screening.problems
    if not len(problems):
        return
    table = Table(title=f"Problems in the register ({len(problems)})", title_justify="left")
    for col in ("row", "wall_id", "column", "value", "severity", "message"):
        table.add_column(col, overflow="fold")
    for p in problems.head(limit).itertuples():
        style = "red" if p.severity == "error" else "yellow"
        table.add_row(
            str(p.row),
            escape(str(p.wall_id)),
            escape(str(p.column)),
            escape(str(p.value)),
            p.severity,
            escape(str(p.message)),
            style=style,
        )
    console.print(table)
    if len(problems) > limit:
        console.print(f"… {len(problems) - limit} more in problems.csv")


def _print_summary(job: JobResult, top: int = 10) -> None:
    from screening.priority import BAND_LABELS, BANDS

    run = job.screening
    walls = job.walls
    console.print(
        f"[bold]{job.info.input_file}[/]: {plural(run.prepared.n_read, 'row')} read, "
        f"{plural(len(walls), 'wall')} screened "
        f"in 3 cases, {plural(run.n_rejected, 'row')} rejected, "
        f"{plural(int((run.problems['severity'] == 'warning').sum()), 'warning')}"
    )
    if len(walls):
        bands = walls["priority_band"].value_counts()
        console.print(
            "Priority bands: " + ", ".join(f"{BAND_LABELS[b]} {int(bands.get(b, 0))}" for b in BANDS)
        )
        _print_data_gaps(walls)
        checks = walls["governing_check"].value_counts()
        console.print(
            "Governing check (worst case): "
            + ", ".join(f"{k.replace('_', ' ')} {v}" for k, v in checks.items())
        )
        unlocated = int((~walls["located"]).sum())
        if unlocated:
            has = "has" if unlocated == 1 else "have"
            console.print(f"{plural(unlocated, 'wall')} {has} no location: screened, listed, not mapped.")
        shown = min(top, len(walls))
        table = Table(
            title=f"Top of the ranking ({shown} of {plural(len(walls), 'wall')}, every band)",
            title_justify="left",
        )
        for col in ("rank", "wall", "band", "score", "utilisation", "reason"):
            table.add_column(col, overflow="fold")
        for w in walls.head(top).itertuples():
            table.add_row(
                str(w.rank),
                escape(str(w.wall_id)),
                BAND_LABELS[str(w.priority_band)],
                f"{w.priority_score:.1f}",
                "∞" if w.utilisation == float("inf") else f"{w.utilisation:.2f}",
                escape(str(w.reason)),
            )
        console.print(table)
    _print_carried(job)
    _print_changes(job)
    for name, path in job.outputs.items():
        console.print(f"  {name:<12} {path}")
    console.print(f"[dim]{CAUTION}[/]")


def _print_carried(job: JobResult, limit: int = 10) -> None:
    """Walls of the last run whose row was rejected this time: on no other list of this run."""
    from screening.history import carried_walls

    carried = carried_walls(job.changes)
    if not len(carried):
        return
    console.print(
        f"[bold]Not re-screened this run[/] ({plural(len(carried), 'wall')} of the last run, rows rejected):"
    )
    for r in carried.head(limit).itertuples(index=False):
        console.print(f"  {escape(str(r.wall_id)):<10} {escape(str(r.carried))}")
    if len(carried) > limit:
        console.print(f"  … {len(carried) - limit} more in changes.csv")


def _print_data_gaps(walls: pd.DataFrame) -> None:
    """Walls resting on suspect data, and drains not recorded counted apart from drains recorded
    as blocked (both are screened as blocked; only one is an observation)."""
    if "suspect_data" in walls:
        n = int(walls["suspect_data"].fillna(False).astype(bool).sum())
        if n:
            rests = "rests" if n == 1 else "rest"
            console.print(
                f"{plural(n, 'wall')} {rests} on suspect data (a warning on an input of the mechanics: "
                "see the reason and problems.csv)"
            )
    if "drainage_not_recorded" in walls:
        gap = walls["drainage_not_recorded"].fillna(False).astype(bool)
        blocked = int(((walls["drainage"].astype(str) == "blocked") & ~gap).sum())
        console.print(
            f"Drains: {blocked} recorded blocked, {int(gap.sum())} not recorded (screened as blocked)"
        )


def _print_changes(job: JobResult) -> None:
    recorded = job.recorded
    if recorded is not None and not recorded.stored:
        console.print(
            f"This input was already screened with the same settings (run {recorded.same_as}): "
            "the history is unchanged."
        )
    if job.changes is not None and job.previous_run is not None:
        prev = job.previous_run
        console.print(f"Compared with run {prev['run_id']} ({escape(str(prev['input_file']))}):")
        print_changes(job.changes)


def print_changes(changes: pd.DataFrame, limit: int = 12, where: str = "changes.csv") -> None:
    """Counts by status and the first changed walls, saying how many more are in ``where``."""
    from screening.history import describe_change

    counts = changes["status"].value_counts()
    console.print(
        "  "
        + ", ".join(
            f"{k} {int(counts.get(k, 0))}" for k in ("changed", "added", "removed", "rejected", "unchanged")
        )
    )
    moved = changes[changes["status"] != "unchanged"]
    for r in moved.head(limit).itertuples(index=False):
        console.print(
            f"  {escape(str(r.wall_id)):<10} {r.status:<8} {escape(describe_change(pd.Series(r._asdict())))}"
        )
    if len(moved) > limit:
        console.print(f"  … {len(moved) - limit} more in {where}")


def _screen_with_progress(
    register: Path | str,
    out: Path | None,
    mapping: Path | None,
    sheet: str | None,
    config: Path | None,
    options: MapOptions | None = None,
    sheets: bool = False,
    history: Path | None = None,
    crs: str | None = None,
    draws: tuple[int | None, int | None] = (None, None),
    client: object = None,
    table: str | None = None,
) -> JobResult:
    """Screen and write; a progress bar for registers large enough to wait for (or on a cluster)."""
    from rich.progress import Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

    cfg = _with_draws(load_config(config), *draws)
    big = table is not None or (Path(register).exists() and Path(register).stat().st_size > 2_000_000)
    with Progress(
        SpinnerColumn(),
        TextColumn("{task.description}"),
        TimeElapsedColumn(),
        console=console,
        disable=not (big or client is not None),
        transient=True,
    ) as bar:
        task = bar.add_task("reading and screening", total=None)
        job = screen_file(
            register,
            mapping=mapping,
            sheet=sheet,
            config=cfg,
            history=history,
            progress=lambda name: bar.update(task, description=name),
            crs=crs,
            client=client,
            table=table,
        )
        if len(job.walls) == 0:
            _print_problems(job)
            shown = register if table is None else job.info.input_file  # never a password
            if job.screening.prepared.n_read == 0:
                raise ScreeningError(f"{shown}: no wall rows below the header")
            raise ScreeningError(f"{shown}: no row could be screened")
        if out is not None:
            write_outputs(
                job,
                out,
                progress=lambda name: bar.update(task, description=f"writing {name}"),
                map_options=options,
                sheet_ids=flagged_walls(job.screening.results) if sheets else None,
            )
    return job


def _refuse_unsafe_outputs(
    register: Path | str, out: Path, history: Path | None, mapping: Path | None, config: Path | None
) -> None:
    """Before any work: --out is a folder, and no output (nor the history) replaces an input."""
    from screening.io.outfolder import refuse_file_as_folder, refuse_overwriting_input, run_targets

    refuse_file_as_folder(out)
    files = [register] if isinstance(register, Path) else []  # a DSN is no file
    refuse_overwriting_input([*files, mapping, config], run_targets(out, history))


RegisterOrDbArg = Annotated[
    str,
    typer.Argument(
        help="The register: .csv, .xlsx/.xls/.ods, .gpkg/.geojson/.shp, or postgresql://… with --table"
    ),
]
TableOpt = Annotated[
    str | None, typer.Option("--table", help="Table or view holding the register ([schema.]name)")
]
ToDbOpt = Annotated[
    str | None,
    typer.Option(
        "--to-db", help="Also write walls, results and the run history to PostgreSQL (postgresql://…)"
    ),
]
DbSchemaOpt = Annotated[str, typer.Option("--db-schema", help="Schema for --to-db")]


def _register_source(register: str, table: str | None) -> Path | str:
    """A file path, or a PostgreSQL DSN when the register is a table (credentials stay in it)."""
    from screening.io.postgis import is_dsn

    if is_dsn(register):
        if table is None:
            raise ScreeningError("a postgresql:// register needs --table NAME (the table or view of walls)")
        return register
    if table is not None:
        raise ScreeningError("--table goes with a postgresql://… register, not with a file")
    return Path(register)


def _write_database(job: JobResult, dsn: str, schema: str) -> None:
    from screening.io.postgis import masked
    from screening.job import write_database

    stored = write_database(job, dsn, schema)
    note = "" if stored else " (this input and settings were already in its history: not recorded twice)"
    console.print(f"  {'database':<12} {escape(masked(dsn))}, schema {escape(schema)}{note}")


SamplesOpt = Annotated[
    int | None,
    typer.Option("--samples", help="Draws per wall for the probabilities (0 = off) [default: 2000]"),
]
SeedOpt = Annotated[int | None, typer.Option("--seed", help="Seed of the draws (same seed, same figures)")]
WorkersOpt = Annotated[
    int | None,
    typer.Option("--workers", help="Screen the chunks on a local Dask cluster of N worker processes"),
]
DaskOpt = Annotated[
    str | None,
    typer.Option("--dask", metavar="ADDRESS", help="Screen the chunks on a Dask scheduler, tcp://host:8786"),
]


@app.command()
def run(
    register: RegisterOrDbArg,
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the outputs")] = Path("wallscreen-out"),
    mapping: MappingOpt = None,
    sheet: SheetOpt = None,
    config: ConfigOpt = None,
    map_assets_url: AssetsUrlOpt = None,
    map_assets_dir: AssetsDirOpt = None,
    map_tiles: TilesOpt = None,
    sheets: Annotated[
        bool, typer.Option("--sheets", help="Also write calculation sheets for the flagged walls")
    ] = False,
    history: Annotated[
        Path | None,
        typer.Option("--history", help="Run history GeoPackage [default: OUT/history.gpkg]"),
    ] = None,
    no_history: Annotated[bool, typer.Option("--no-history", help="Keep no run history")] = False,
    crs: CrsOpt = None,
    samples: SamplesOpt = None,
    seed: SeedOpt = None,
    workers: WorkersOpt = None,
    dask_address: DaskOpt = None,
    table: TableOpt = None,
    to_db: ToDbOpt = None,
    db_schema: DbSchemaOpt = "wallscreen",
) -> None:
    """Screen every wall in the drained, blocked and surveyed cases and write the outputs."""
    from screening.distributed import check_options, dask_client

    options = MapOptions(map_assets_url, map_assets_dir, map_tiles)
    hist = None if no_history else (history or out / "history.gpkg")
    try:
        options.check()
        source = _register_source(register, table)
        if to_db is not None:
            from screening.io.postgis import identifier

            identifier(db_schema, "--db-schema")
        _refuse_unsafe_outputs(source, out, hist, mapping, config)
        check_options(workers, dask_address)
        with dask_client(workers, dask_address) as client:
            job = _screen_with_progress(
                source,
                out,
                mapping,
                sheet,
                config,
                options,
                sheets,
                hist,
                crs,
                draws=(samples, seed),
                client=client,
                table=table,
            )
    except ScreeningError as exc:
        raise _fail(exc) from None
    except OSError as exc:
        raise _write_failed(exc, out) from None
    _print_problems(job)
    _print_summary(job)
    if to_db is not None:
        try:
            _write_database(job, to_db, db_schema)
        except ScreeningError as exc:
            raise _fail(exc) from None
    if job.n_rejected:
        raise typer.Exit(EXIT_SOME_REJECTED)


def _with_draws(cfg: Config, samples: int | None, seed: int | None) -> Config:
    """The settings with ``--samples`` and ``--seed`` applied (method.md §13)."""
    if samples is not None:
        cfg = dataclasses.replace(cfg, samples=samples)
    if seed is not None:
        cfg = dataclasses.replace(cfg, seed=seed)
    return cfg


@app.command()
def check(
    register: RegisterArg,
    mapping: MappingOpt = None,
    sheet: SheetOpt = None,
    config: ConfigOpt = None,
    errors_file: Annotated[
        Path | None, typer.Option("--errors", help="Write the problems to this CSV")
    ] = None,
    crs: CrsOpt = None,
) -> None:
    """Validate a register without screening it: every problem, row by row."""
    from screening.io.outfolder import refuse_overwriting_input
    from screening.io.writers import write_csv

    try:
        refuse_overwriting_input([register, mapping, config], [errors_file])
        job = screen_file(register, mapping=mapping, sheet=sheet, config=load_config(config), crs=crs)
    except ScreeningError as exc:
        raise _fail(exc) from None
    _print_problems(job, limit=50)
    problems = job.screening.problems
    if errors_file is not None:
        write_csv(problems, errors_file)
        console.print(f"problems written to {errors_file}")
    n_read = job.screening.prepared.n_read
    if n_read == 0:
        raise _fail(ScreeningError(f"{register}: no wall rows below the header"))
    ok = n_read - job.n_rejected
    console.print(f"{ok} of {n_read} rows can be screened.")
    if ok == 0:
        raise typer.Exit(EXIT_NOTHING_SCREENED)
    if job.n_rejected:
        raise typer.Exit(EXIT_SOME_REJECTED)


def _match_ids(ids: list[str], known: set[str]) -> list[str]:
    """Wall ids as the register spells them, matched case-insensitively as the map's search does.

    An exact match wins; an id that matches several register ids differing only by case is an error.
    """
    folded: dict[str, list[str]] = {}
    for k in sorted(known):
        folded.setdefault(k.casefold(), []).append(k)
    matched = []
    for w in ids:
        if w in known:
            matched.append(w)
            continue
        candidates = folded.get(w.casefold(), [])
        if len(candidates) > 1:
            raise ScreeningError(
                f"{w}: the register holds {', '.join(candidates)}, which differ only by case; "
                "give the id exactly"
            )
        matched.append(candidates[0] if candidates else w)
    return matched


@app.command()
def explain(
    register: RegisterArg,
    wall_ids: Annotated[list[str] | None, typer.Argument(help="Wall ids to explain")] = None,
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the sheets")] = Path("wallscreen-out"),
    flagged: Annotated[
        bool,
        typer.Option("--flagged", help="Every wall outside the middle third or over the allowable bearing"),
    ] = False,
    mapping: MappingOpt = None,
    sheet: SheetOpt = None,
    config: ConfigOpt = None,
) -> None:
    """Write a calculation sheet (HTML, printable) for walls of a register."""
    from screening.job import write_explanations

    try:
        job = screen_file(register, mapping=mapping, sheet=sheet, config=load_config(config))
        ids = list(wall_ids or [])
        if flagged:
            ids += flagged_walls(job.screening.results)
        if not ids:
            raise ScreeningError("name one or more wall ids, or give --flagged")
        known = set(job.walls["wall_id"].astype(str)) if len(job.walls) else set()
        ids = _match_ids(ids, known)
        unknown = [w for w in ids if w not in known]
        if unknown:
            rejected = set(job.screening.problems["wall_id"].astype(str))
            why = [
                f"{w} (rejected: see 'wallscreen check')" if w in rejected else f"{w} (not in the register)"
                for w in unknown
            ]
            raise ScreeningError("no sheet for: " + ", ".join(why))
        written = write_explanations(job, list(dict.fromkeys(ids)), out)
    except ScreeningError as exc:
        raise _fail(exc) from None
    for wid, rel in written.items():
        console.print(f"  {escape(wid):<14} {out / rel}")
    console.print(f"{plural(len(written), 'calculation sheet')} written. [dim]{CAUTION}[/]")


@app.command()
def compare(
    first: Annotated[Path | None, typer.Argument(help="A result folder, or a run id with --history")] = None,
    second: Annotated[Path | None, typer.Argument(help="A result folder, or a run id with --history")] = None,
    history: Annotated[Path | None, typer.Option("--history", help="The run history GeoPackage")] = None,
    out: Annotated[Path, typer.Option("--out", "-o", help="CSV of the changes")] = Path("changes.csv"),
) -> None:
    """What changed between two runs: the last two in a history, two named runs, or two result folders."""

    from screening.history import compare as compare_runs
    from screening.history import list_runs, run_walls
    from screening.io.readers import read_result_csv
    from screening.io.writers import write_csv

    try:
        if history is not None:
            runs = list_runs(history)
            if first is None and second is None:
                if len(runs) < 2:
                    raise ScreeningError(f"{history}: fewer than two runs recorded")
                a_id, b_id = runs["run_id"].iloc[-2], runs["run_id"].iloc[-1]
            elif first is not None and second is not None:
                a_id, b_id = str(first), str(second)
            else:
                raise ScreeningError("name two run ids, or none for the last two runs")
            missing = [r for r in (a_id, b_id) if r not in set(runs["run_id"])]
            if missing:
                raise ScreeningError(
                    f"no run {', '.join(missing)} in {history}; runs: {', '.join(runs['run_id'])}"
                )
            before, after = run_walls(history, a_id), run_walls(history, b_id)
            rejected = json.loads(runs.set_index("run_id").at[b_id, "rejected_walls"] or "[]")
            label = f"run {a_id} → run {b_id}"
        elif first is not None and second is not None:
            from screening.io.outfolder import refuse_incomplete

            for folder in (first, second):
                refuse_incomplete(folder)
                if not (folder / "walls.csv").exists():
                    raise ScreeningError(f"{folder}: no walls.csv (not a wallscreen result folder)")
            before = read_result_csv(first / "walls.csv")
            after = read_result_csv(second / "walls.csv")
            problems = second / "problems.csv"
            rejected = []
            if problems.exists():
                p = read_result_csv(problems)
                rejected = list(p.loc[p["severity"] == "error", "wall_id"].dropna())
            label = f"{first} → {second}"
        else:
            raise ScreeningError("give two result folders, or --history")
        changes = compare_runs(before, after, rejected=rejected)
        write_csv(changes, out)
    except ScreeningError as exc:
        raise _fail(exc) from None
    console.print(f"Changes {escape(label)}:")
    print_changes(changes)
    console.print(f"written to {out}")


@app.command()
def template(
    target: Annotated[Path, typer.Argument(help="The workbook to write, e.g. register.xlsx")],
    force: Annotated[bool, typer.Option("--force", help="Replace the file if it exists")] = False,
) -> None:
    """Write a blank register: canonical headers with notes, drop-down lists, and a guide sheet."""
    from screening.io.template import write_template

    if target.suffix.lower() != ".xlsx":
        raise _fail(ScreeningError(f"{target}: the template is an .xlsx workbook"))
    if target.exists() and not force:
        raise _fail(ScreeningError(f"{target} exists: not replaced (give --force to replace it)"))
    write_template(target)
    console.print(f"template written to {target}")


@app.command("map")
def map_command(
    results_dir: Annotated[Path, typer.Argument(help="A folder written by 'wallscreen run'")],
    map_assets_url: AssetsUrlOpt = None,
    map_assets_dir: AssetsDirOpt = None,
    map_tiles: TilesOpt = None,
) -> None:
    """Re-render map.html from an earlier run's outputs (e.g. with other map assets)."""
    options = MapOptions(map_assets_url, map_assets_dir, map_tiles)
    try:
        options.check()
        path = rerender_map(results_dir, options)
    except ScreeningError as exc:
        raise _fail(exc) from None
    console.print(f"map written to {path}")


@app.command()
def demo(
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the outputs")] = Path("maps"),
    map_assets_url: AssetsUrlOpt = None,
    map_assets_dir: AssetsDirOpt = None,
    map_tiles: TilesOpt = None,
) -> None:
    """Run the whole job on the bundled, invented Harrowby Vale register (two surveys)."""
    from rich.progress import Progress as Bar
    from rich.progress import SpinnerColumn, TextColumn, TimeElapsedColumn

    from screening.demo import run_demo

    options = MapOptions(map_assets_url, map_assets_dir, map_tiles)
    try:
        options.check()
        with Bar(
            SpinnerColumn(),
            TextColumn("{task.description}"),
            TimeElapsedColumn(),
            console=console,
            transient=True,
        ) as bar:
            task = bar.add_task("starting", total=None)
            job = run_demo(
                out,
                progress=lambda name: bar.update(task, description=name),
                map_options=options,
            )
    except ScreeningError as exc:
        raise _fail(exc) from None
    console.print(
        "[bold]Demo: the invented Harrowby Vale register[/] (two surveys, a year apart). It carries a few "
        "deliberate data-entry mistakes: the rows marked 'error' below were rejected, the rest screened."
    )
    _print_problems(job)
    _print_summary(job)
    top = str(job.walls["wall_id"].iloc[0])
    first_sheet = job.sheets.get(top)
    console.print("\n[bold]Open first[/]")
    console.print(f"  the map          {out / 'map.html'}")
    console.print(f"  the workbook     {out / 'report.xlsx'}  (sheet 'Look first')")
    if first_sheet:
        console.print(f"  a calc sheet     {out / first_sheet}  (rank 1, {escape(top)})")
    console.print(f"  what changed     {out / 'changes.csv'}")
