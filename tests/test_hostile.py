"""Hostile and careless input (issue 17): each case is a file under tests/corpus/hostile/ (or one
made here, where it must be made fresh), the command, the words expected, the exit code and the
files; the input's SHA-256 is the same after every test."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from screening.cli import EXIT_NOTHING_SCREENED as NONE
from screening.cli import EXIT_SOME_REJECTED as SOME
from screening.cli import app

HOSTILE = Path(__file__).resolve().parent / "corpus" / "hostile"
CORPUS = HOSTILE.parent
runner = CliRunner()


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def invoke(args: list[str], *inputs: Path):
    """Run the CLI; no traceback, and every input file byte for byte as it was."""
    before = {p: digest(p) for p in inputs}
    result = runner.invoke(app, [str(a) for a in args])
    assert "Traceback" not in result.output, result.output
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    assert {p: digest(p) for p in inputs} == before  # the input is never modified
    return result


def flat(result) -> str:
    return " ".join(result.output.split())


# --- 1. settings: classes named, numbers in range and finite ------------------------------------

CONFIGS = [
    ("consequence_raod.toml", "consequence_default = 'raod'", "did you mean 'road'?"),
    ("foundation_firm_clay.toml", "foundation_default = 'firm clay'", "did you mean 'firm_clay'?"),
    ("gamma_w_zero.toml", "gamma_w_kn_m3 = 0.0", "unit weight of water"),
    ("drainage_fraction_5.toml", "drainage_water_fraction.partial = 5.0", "from 0 to 1"),
    ("drainage_misspelt_state.toml", "unknown key 'blokced'", "did you mean 'blocked'?"),
    ("fos_negative.toml", "fos_sliding_required = -1.5", "above 0"),
    ("fos_nan.toml", "fos_overturning_required = nan", "finite"),
    ("surcharge_inf.toml", "surcharge_kpa = inf", "finite"),
    ("fos_as_text.toml", "fos_sliding_required = 'high'", "expected a number"),
    ("unknown_setting.toml", "unknown setting 'allowable_bearing'", "known settings are"),
    ("config_cp1252.toml", "not UTF-8", "byte 0xe9"),
]


@pytest.mark.parametrize(("name", "words", "hint"), CONFIGS, ids=[c[0] for c in CONFIGS])
def test_a_bad_setting_is_named_with_file_key_value_and_expectation(name: str, words: str, hint: str) -> None:
    config = HOSTILE / name
    register = CORPUS / "good.csv"
    result = invoke(["check", register, "-c", config], register, config)
    assert result.exit_code == NONE, result.output
    text = flat(result)
    assert name in text  # the file
    assert words in text and hint in text


def test_a_class_name_in_a_default_no_longer_gives_nan_scores() -> None:
    # before: consequence_default = "raod" was accepted and every wall with a blank consequence
    # scored NaN, which fell to the lowest band
    import dataclasses

    from screening.config import Config
    from screening.errors import ConfigError

    with pytest.raises(ConfigError, match="consequence_default"):
        dataclasses.replace(Config(), consequence_default="raod")
    with pytest.raises(ConfigError, match="wall_unit_weight_kn_m3"):
        dataclasses.replace(
            Config(), wall_unit_weight_kn_m3={"drystone": Config().wall_unit_weight_kn_m3["drystone"]}
        )


def test_every_numeric_setting_has_a_rule() -> None:
    # a new numeric setting without a range would slip through: the table must cover them all
    import dataclasses

    from screening.config import NUMBER_RULES, Config, Default
    from screening.priority import PrioritySettings

    numeric = {
        f.name
        for f in dataclasses.fields(Config)
        if isinstance(getattr(Config(), f.name), (int, float, Default))
        and not isinstance(getattr(Config(), f.name), bool)
    }
    numeric |= {
        f"priority.{f.name}" for f in dataclasses.fields(PrioritySettings) if f.name != "band_thresholds"
    }
    assert numeric - set(NUMBER_RULES) == set()


# --- 1. mapping files: unknown keys and sections refused ---------------------------------------

MAPPINGS = [
    ("mapping_misspelt_unit.toml", "unknown key 'unti'", "did you mean 'unit'?"),
    ("mapping_unknown_section.toml", "unknown section [colums]", "did you mean 'columns'?"),
    ("mapping_unknown_register_key.toml", "unknown key 'shet'", "did you mean 'sheet'?"),
]


@pytest.mark.parametrize(("name", "words", "hint"), MAPPINGS, ids=[m[0] for m in MAPPINGS])
def test_a_misspelt_mapping_key_is_refused_not_ignored(name: str, words: str, hint: str) -> None:
    # before: { column = "height_m", unti = "ft" } was read as 10 m, not 10 ft
    mapping = HOSTILE / name
    register = HOSTILE / "ten_feet.csv"
    result = invoke(["check", register, "-m", mapping], register, mapping)
    assert result.exit_code == NONE, result.output
    text = flat(result)
    assert name in text and words in text and hint in text


def test_a_nan_utilisation_or_score_stops_the_run_naming_the_wall() -> None:
    import dataclasses

    from screening.errors import ScreeningError
    from screening.job import refuse_unreported_nan, screen_file

    run = screen_file(CORPUS / "good.csv").screening
    refuse_unreported_nan(run)  # the good register passes
    walls = run.walls.copy()
    walls.loc[walls["wall_id"] == "GOOD-2", "priority_score"] = float("nan")
    with pytest.raises(ScreeningError, match="priority_score: GOOD-2"):
        refuse_unreported_nan(dataclasses.replace(run, walls=walls))


# --- 2. non-finite numbers, spreadsheet cells as shown, ids that look like missing values --------


def test_non_finite_numbers_are_row_errors_naming_row_column_and_value(tmp_path: Path) -> None:
    # before: inf, Infinity and 1e309 were accepted and such walls ranked first as "floating"
    register = HOSTILE / "non_finite.csv"
    errors = tmp_path / "errors.csv"
    result = invoke(["check", register, "--errors", errors], register)
    assert result.exit_code == SOME, result.output
    assert "3 of 7 rows can be screened" in flat(result)
    p = pd.read_csv(errors, keep_default_na=False)
    p = p[p.severity == "error"]
    got = {(r.row, r.column, str(r.value)) for r in p.itertuples()}
    assert got == {
        (5, "height_m", "inf"),
        (6, "base_width_m", "Infinity"),
        (7, "top_width_m", "1e309"),
        (8, "height_m", "nan"),
    }
    assert set(p.loc[p.row < 8, "message"]) == {"expected a finite number (infinity is not a measurement)"}


def test_spreadsheet_cells_are_read_as_the_user_sees_them(tmp_path: Path) -> None:
    # before: 17 became "17.0", a date cell 1970-01-01, #DIV/0! a blank filled by a default, TRUE 1
    import datetime

    import xlsxwriter

    register = tmp_path / "typed.xlsx"
    book = xlsxwriter.Workbook(register)
    sheet = book.add_worksheet("Walls")
    date = book.add_format({"num_format": "dd/mm/yyyy"})
    sheet.write_row(
        0, 0, ["wall_id", "height_m", "base_width_m", "top_width_m", "survey_date", "notes", "surcharge_kpa"]
    )
    sheet.write_row(1, 0, [17, 3.0, 2.0, 0.8])
    sheet.write_datetime(1, 4, datetime.datetime(2026, 5, 1), date)
    sheet.write_boolean(1, 5, True)
    sheet.write_row(2, 0, ["W-DIV", 3.0, 2.0, 0.8])
    sheet.write_formula(2, 6, "=1/0", None, "#DIV/0!")
    sheet.write_row(3, 0, ["W-BOOL", 3.0, 2.0, 0.8])
    sheet.write_boolean(3, 6, True)
    book.close()
    errors = tmp_path / "errors.csv"
    result = invoke(["check", register, "--errors", errors], register)
    assert result.exit_code == SOME, result.output
    p = pd.read_csv(errors, keep_default_na=False)
    assert {(r.row, r.column, r.value) for r in p.itertuples() if r.severity == "error"} == {
        (3, "surcharge_kpa", "#DIV/0!"),  # an error cell, never a blank the 10 kPa default fills
        (4, "surcharge_kpa", "TRUE"),  # a boolean is not the number 1
    }
    from screening.job import screen_file

    walls = screen_file(register).screening.prepared.walls
    assert list(walls["wall_id"]) == ["17"]
    assert str(walls["survey_date"].iloc[0].date()) == "2026-05-01"
    assert walls["notes"].iloc[0] == "TRUE"


def test_ids_that_look_like_missing_values_stay_ids_in_compare_and_map(tmp_path: Path) -> None:
    # before: NA, None, null, N/A and nan collapsed into one blank id; the map could not be redrawn
    register = HOSTILE / "ids_that_look_missing.csv"
    out = tmp_path / "out"
    result = invoke(["run", register, "-o", out, "--no-history"], register)
    assert result.exit_code == 0, result.output
    changes = tmp_path / "changes.csv"
    result = invoke(["compare", out, out, "-o", changes])
    assert result.exit_code == 0, result.output
    assert "unchanged 8" in flat(result)
    ids = set(pd.read_csv(changes, dtype=str, keep_default_na=False)["wall_id"])
    assert {"NA", "None", "null", "N/A", "nan"} <= ids
    result = invoke(["map", out])
    assert result.exit_code == 0, result.output
    page = (out / "map.html").read_text(encoding="utf-8")
    assert '"N/A"' in page and '"null"' in page


# --- 6. spreadsheet bombs: refused from the zip directory and the declared extent ---------------


def _xlsx_with_sheet_xml(path: Path, sheet_xml: str) -> None:
    """A minimal valid .xlsx whose one sheet holds the XML given (made with xlsxwriter, then the
    sheet replaced)."""
    import zipfile

    import xlsxwriter

    plain = path.with_suffix(".plain.xlsx")
    book = xlsxwriter.Workbook(plain)
    book.add_worksheet("Walls").write_row(0, 0, ["wall_id", "height_m", "base_width_m", "top_width_m"])
    book.close()
    with zipfile.ZipFile(plain) as src, zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as dst:
        for item in src.infolist():
            data = sheet_xml.encode() if item.filename == "xl/worksheets/sheet1.xml" else src.read(item)
            dst.writestr(item.filename, data)
    plain.unlink()


SHEET = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>'
    '<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
    '<dimension ref="{dim}"/><sheetData>{rows}</sheetData></worksheet>'
)


def test_a_cell_at_the_last_row_and_column_is_refused_before_reading(tmp_path: Path) -> None:
    # before: a 1.7 KB workbook with one far cell made the reader allocate the whole grid
    register = tmp_path / "far_cell.xlsx"
    rows = '<row r="1"><c r="A1" t="inlineStr"><is><t>wall_id</t></is></c></row>'
    rows += '<row r="1048576"><c r="XFD1048576"><v>1</v></c></row>'
    _xlsx_with_sheet_xml(register, SHEET.format(dim="A1:XFD1048576", rows=rows))
    assert register.stat().st_size < 8000  # a few kB
    result = invoke(["check", register], register)
    assert result.exit_code == NONE, result.output
    text = flat(result)
    assert "1,048,576 rows x 16,384 columns" in text and "max_cells" in text


def test_a_sheet_that_inflates_past_the_limit_is_refused(tmp_path: Path) -> None:
    # before: a 7.7 MB workbook that expands to 2 GB ran past 9.8 GB of memory; here the limit is
    # set to 1 MB and the sheet expands to about 4 MB (compressed to a few kB)
    register = tmp_path / "inflates.xlsx"
    rows = "".join(f'<row r="{i}"><c r="A{i}"><v>1</v></c></row>' for i in range(1, 80_000))
    _xlsx_with_sheet_xml(register, SHEET.format(dim="A1:A79999", rows=rows))
    config = tmp_path / "limits.toml"
    config.write_text("max_sheet_mb = 1\n", encoding="utf-8")
    result = invoke(["check", register, "-c", config], register, config)
    assert result.exit_code == NONE, result.output
    assert "expands to 4 MB, over the limit of 1 MB (setting max_sheet_mb)" in flat(result)


# --- 4. the input is never an output; run ids are unique; the hash is that of the bytes read ----


def _register_in(folder: Path, name: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_bytes((CORPUS / "good.csv").read_bytes())
    return path


@pytest.mark.parametrize("name", ["walls.csv", "results.csv", "problems.csv"])
def test_run_refuses_an_output_folder_that_would_replace_the_register(tmp_path: Path, name: str) -> None:
    # before: run results/walls.csv --out results/ replaced the register with the tool's walls.csv
    register = _register_in(tmp_path / "results", name)
    result = invoke(["run", register, "-o", tmp_path / "results", "--no-history"], register)
    assert result.exit_code == NONE, result.output
    assert "would replace the input" in flat(result)
    assert sorted(p.name for p in (tmp_path / "results").iterdir()) == [name]  # no work was done


def test_run_refuses_a_link_to_the_register_and_a_file_as_out(tmp_path: Path) -> None:
    register = _register_in(tmp_path / "data", "register.csv")
    out = tmp_path / "out"
    out.mkdir()
    (out / "walls.csv").symlink_to(register)
    result = invoke(["run", register, "-o", out, "--no-history"], register)
    assert result.exit_code == NONE and "would replace the input" in flat(result), result.output
    result = invoke(["run", register, "-o", register, "--no-history"], register)
    assert result.exit_code == NONE and "a file, not a folder" in flat(result), result.output


def test_check_refuses_errors_written_over_the_register(tmp_path: Path) -> None:
    register = _register_in(tmp_path, "register.csv")
    (tmp_path / "hard.csv").hardlink_to(register)
    for target in (register, tmp_path / "hard.csv"):
        result = invoke(["check", register, "--errors", target], register)
        assert result.exit_code == NONE and "would replace the input" in flat(result), result.output


def test_two_runs_in_one_second_get_different_ids_and_the_history_refuses_a_duplicate(tmp_path: Path) -> None:
    from screening.errors import ScreeningError
    from screening.history import list_runs
    from screening.job import record_history, screen_file

    history = tmp_path / "history.gpkg"
    first = screen_file(CORPUS / "good.csv", history=history)
    second = screen_file(CORPUS / "good.csv", history=history)
    second.info.run_time = first.info.run_time  # the same second
    assert first.run_id != second.run_id
    record_history(first)
    twin = screen_file(HOSTILE / "non_finite.csv", history=history)
    twin.info.run_time, twin.info.run_uid = first.info.run_time, first.info.run_uid
    twin.info.input_sha256 = first.info.input_sha256[:8] + "0" * 56  # same id, another input
    with pytest.raises(ScreeningError, match="already recorded; run ids must be unique"):
        record_history(twin)
    assert list(list_runs(history)["run_id"]) == [first.run_id]


def test_a_register_saved_anew_while_it_is_read_is_refused(tmp_path: Path, monkeypatch) -> None:
    # before: the hash was taken after screening, so the new file's hash was recorded with the old walls
    import screening.job as job

    register = _register_in(tmp_path, "register.csv")
    real = job.load_register

    def load_then_save(path, **kwargs):
        loaded = real(path, **kwargs)
        Path(path).write_bytes(Path(path).read_bytes() + b"GOOD-4,3.0,2.0,0.8\n")  # the owner saves
        return loaded

    monkeypatch.setattr(job, "load_register", load_then_save)
    from screening.errors import RegisterError

    with pytest.raises(RegisterError, match="changed while it was being read"):
        job.screen_file(register)


# --- 7. lesser points --------------------------------------------------------------------------


def test_csv_outputs_prefix_text_that_starts_like_a_formula(tmp_path: Path) -> None:
    # OWASP, CSV injection: text starting with = + - @ is prefixed with ' in the CSVs for people
    import csv

    register = HOSTILE / "formula_text.csv"
    out = tmp_path / "out"
    result = invoke(["run", register, "-o", out, "--no-history"], register)
    assert result.exit_code == 0, result.output
    with open(out / "walls.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert {r["wall_id"] for r in rows} == {"'=1+2", "GOOD-1"}
    assert {r["name"] for r in rows} == {"'@SUM(1+1)", "'+cmd|calc"}
    assert all(not r["margin"].startswith("'") for r in rows)  # numbers stay numbers
    from screening.io.readers import read_result_csv

    assert set(read_result_csv(out / "walls.csv")["wall_id"]) == {"=1+2", "GOOD-1"}  # read back as written
    result = invoke(["map", out])  # the map, redrawn from the CSV, still finds the wall
    assert result.exit_code == 0, result.output
    assert '"=1+2"' in (out / "map.html").read_text(encoding="utf-8")


# --- 5. crashes become one-line errors with a documented exit code ------------------------------

BROKEN = [
    ("ragged_rows.csv", "line 3 has 6 cells where the lines above have 4"),
    ("unclosed_quote.csv", "a quote opened on line 3 is never closed"),
]


@pytest.mark.parametrize(("name", "words"), BROKEN, ids=[b[0] for b in BROKEN])
def test_a_broken_csv_is_one_line_naming_the_line(name: str, words: str) -> None:
    # before: a pandas traceback and exit 1 ("screened, some rows rejected")
    register = HOSTILE / name
    result = invoke(["check", register], register)
    assert result.exit_code == NONE, result.output
    assert words in flat(result) and name in flat(result)
    assert len(result.output.strip().splitlines()) <= 2


def test_a_history_that_is_not_a_history_is_named(tmp_path: Path) -> None:
    register = CORPUS / "good.csv"
    history = tmp_path / "history.gpkg"
    history.write_text("garbage", encoding="utf-8")
    result = invoke(["run", register, "-o", tmp_path / "out", "--history", history], register, history)
    assert result.exit_code == NONE, result.output
    assert "not a wallscreen history" in flat(result)


def test_a_full_disk_is_exit_3_and_leaves_the_earlier_good_file(tmp_path: Path, monkeypatch) -> None:
    import errno
    import os

    import screening.outputs.geopackage as geopackage
    from screening.cli import EXIT_WRITE_FAILED
    from screening.io.writers import atomic_path

    register = CORPUS / "good.csv"
    out = tmp_path / "out"
    assert invoke(["run", register, "-o", out, "--no-history"], register).exit_code == 0
    before = digest(out / "walls.gpkg")

    def disk_full(walls, geometry, target):
        with atomic_path(target) as tmp:
            tmp.write_bytes(b"half a GeoPackage")
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(tmp))

    monkeypatch.setattr(geopackage, "write_geopackage", disk_full)
    result = invoke(["run", register, "-o", out, "--no-history"], register)
    assert result.exit_code == EXIT_WRITE_FAILED, result.output
    assert "could not write the outputs" in flat(result) and "No space left on device" in flat(result)
    assert digest(out / "walls.gpkg") == before  # the earlier good file stands
    assert not list(out.glob(".*.part*"))  # no temporary file left behind


# --- 3. coordinates range-checked on every path; a CRS is never guessed -------------------------


def test_locations_are_checked_on_every_path_and_only_the_rows_needing_a_crs_wait_for_it(
    tmp_path: Path,
) -> None:
    # before: an easting with two extra zeros reprojected to infinity and no wall was drawn
    # (exit 0); POINT (nan nan) crashed the map; easting/northing without a CRS stopped the run
    register = HOSTILE / "coordinates.csv"
    for crs, unmapped in (
        (None, {"GOOD-2", "GOOD-3", "GOOD-4", "GOOD-5"}),
        ("EPSG:27700", {"GOOD-3", "GOOD-4", "GOOD-5"}),
    ):
        out = tmp_path / str(crs).replace(":", "")
        args = ["run", register, "-o", out, "--no-history", *(["--crs", crs] if crs else [])]
        result = invoke(args, register)
        assert result.exit_code == 0, result.output  # every wall screened, some not mapped
        walls = pd.read_csv(out / "walls.csv")
        assert len(walls) == 5
        assert set(walls.loc[~walls["located"], "wall_id"]) == unmapped
        p = pd.read_csv(out / "problems.csv", keep_default_na=False)
        messages = dict(zip(p["wall_id"], p["message"], strict=True))
        assert "outside the area of use of EPSG:27700" in messages.get("GOOD-3", "") or crs is None
        assert "pass --crs EPSG:xxxx" in messages.get("GOOD-2", "") or crs is not None
        assert "latitude -90 to 90" in messages["GOOD-4"] and "latitude -90 to 90" in messages["GOOD-5"]
    # the British National Grid point (412000, 425000) lies near 53.7° N, 1.8° W (EPSG:27700's area)
    from screening.outputs.geopackage import read_geopackage

    walls, geometry = read_geopackage(tmp_path / "EPSG27700" / "walls.gpkg")
    point = geometry[list(walls["wall_id"]).index("GOOD-2")]
    assert abs(point.y - 53.7) < 0.1 and abs(point.x + 1.8) < 0.2


def test_a_gis_layer_without_a_crs_is_refused_unless_one_is_given(tmp_path: Path) -> None:
    import geopandas as gpd
    import shapely

    register = tmp_path / "no_crs.gpkg"
    frame = pd.read_csv(CORPUS / "good.csv").drop(columns=["lat", "lon"])
    points = shapely.points([412000, 412100, 412200], [425000, 425100, 425200])
    gpd.GeoDataFrame(frame, geometry=points, crs=None).to_file(register, engine="pyogrio")
    result = invoke(["check", register], register)
    assert result.exit_code == NONE, result.output
    assert "the layer has no CRS" in flat(result) and "--crs" in flat(result)
    result = invoke(["check", register, "--crs", "EPSG:27700"], register)
    assert result.exit_code == 0, result.output
    assert "3 of 3 rows can be screened" in flat(result)


def test_escape_sequences_never_reach_the_terminal_and_the_row_is_rejected() -> None:
    # before: ESC[2J in an id cleared the screen
    register = HOSTILE / "escape_sequences.csv"
    result = invoke(["check", register], register)
    assert result.exit_code == SOME, result.output
    assert "\x1b" not in result.output
    assert "W[2J-1" in flat(result) and "control character" in flat(result)
    assert "2 of 3 rows can be screened" in flat(result)


def test_a_nul_byte_after_the_first_4_kb_is_a_row_error(tmp_path: Path) -> None:
    # before: NUL bytes past the first 4 KB were taken into ids
    register = HOSTILE / "nul_after_4k.csv"
    assert register.read_bytes().index(b"\x00") > 4096
    errors = tmp_path / "errors.csv"
    result = invoke(["check", register, "--errors", errors], register)
    assert result.exit_code == SOME, result.output
    p = pd.read_csv(errors, keep_default_na=False)
    assert list(p["row"]) == [122] and list(p["column"]) == ["wall_id"]
    assert "NUL byte" in p["message"].iloc[0]


def test_outputs_are_flushed_before_the_rename_and_the_folder_after(tmp_path: Path, monkeypatch) -> None:
    # before: renamed into place but not flushed, so a power cut could leave an empty file
    import os

    import screening.io.writers as writers

    calls: list[str] = []
    real_fsync, real_replace = os.fsync, os.replace

    def fsync(fd: int) -> None:
        calls.append("fsync folder" if os.path.isdir(f"/proc/self/fd/{fd}") else "fsync file")
        real_fsync(fd)

    def replace(a, b) -> None:
        calls.append("rename")
        real_replace(a, b)

    monkeypatch.setattr(writers.os, "fsync", fsync)
    monkeypatch.setattr(writers.os, "replace", replace)
    writers.write_csv(pd.DataFrame({"wall_id": ["W1"]}), tmp_path / "walls.csv")
    assert calls == ["fsync file", "rename", "fsync folder"]
    assert pd.read_csv(tmp_path / "walls.csv", dtype=str)["wall_id"].tolist() == ["W1"]


@pytest.mark.parametrize(
    ("name", "note"),
    [
        ("utf8_with_a_cp1252_byte.csv", "utf-8 with 1 stray byte(s) read as cp1252"),
        ("utf16_unicode_text.txt", "encoding utf-16"),
    ],
)
def test_a_stray_cp1252_byte_and_utf16_text_are_read_and_named(name: str, note: str) -> None:
    # before: one cp1252 byte turned every UTF-8 name into mojibake; UTF-16 was "not a text file"
    from screening.job import screen_file

    register = HOSTILE / name
    before = digest(register)
    job = screen_file(register)
    names = list(job.screening.prepared.walls["name"])
    assert names[0] == "Rue de l'Église"  # the UTF-8 is kept
    assert names[1] in ("Café Bank", "Mill Bank")
    assert any(note in n for n in job.info.notes)
    assert digest(register) == before


# --- GIS files: several layers, a shapefile without its .dbf, field names cut to 10 characters
def _gis_walls(n: int = 2):
    import geopandas as gpd
    from shapely.geometry import Point

    from tests.conftest import worked_wall

    rows = [worked_wall(f"G{k}", 2.0) for k in range(n)]
    frame = pd.DataFrame(rows).drop(columns=["lat", "lon"], errors="ignore")
    return gpd.GeoDataFrame(frame, geometry=[Point(-1.9, 53.7 + k / 1000) for k in range(n)], crs="EPSG:4326")


def test_a_geopackage_of_several_layers_needs_the_layer_named(tmp_path: Path) -> None:
    path = tmp_path / "two.gpkg"
    other = _gis_walls(1).assign(wall_id="NOT-A-WALL")
    other.to_file(path, layer="drains", engine="pyogrio")
    _gis_walls(3).to_file(path, layer="walls_2026", engine="pyogrio")
    before = hashlib.sha256(path.read_bytes()).hexdigest()
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2, result.output
    assert "2 layers (drains, walls_2026)" in result.output and "--layer" in result.output
    result = runner.invoke(app, ["check", str(path), "--layer", "walls_2026"])
    assert result.exit_code == 0, result.output
    assert "3 of 3 rows can be screened" in result.output
    result = runner.invoke(app, ["check", str(path), "--layer", "wals"])
    assert result.exit_code == 2 and "no layer 'wals'" in result.output
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before


@pytest.mark.filterwarnings("ignore::pytest.PytestUnraisableExceptionWarning")  # GDAL cuts the names
def test_a_shapefile_without_its_dbf_says_so(tmp_path: Path) -> None:
    path = tmp_path / "walls.shp"
    _gis_walls(2).to_file(path, engine="pyogrio")
    (tmp_path / "walls.dbf").unlink()
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2, result.output
    assert "walls.dbf is missing" in result.output


def test_field_names_cut_to_ten_characters_get_the_full_name_suggested() -> None:
    # a shapefile (dBase) keeps 10 characters of a field name: retained_height_m becomes retained_h
    from screening.io.mapping import _suggest

    assert "retained_height_m" in _suggest("retained_h", ["retained_height_m", "height_m", "base_width_m"])
    assert "retained_h" in _suggest("retained_height_m", ["retained_h", "height_m"])
