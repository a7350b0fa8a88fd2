"""The corpus of malformed registers (tests/corpus/, made by make_corpus.py): each gives the
expected message and exit code, and the good rows in it are still screened."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest
from numpy.testing import assert_allclose
from typer.testing import CliRunner

from screening.cli import EXIT_NOTHING_SCREENED as NONE
from screening.cli import EXIT_OK as OK
from screening.cli import EXIT_SOME_REJECTED as SOME
from screening.cli import app
from screening.pipeline import UNCERTAINTY_COLUMNS

CORPUS = Path(__file__).resolve().parent / "corpus"
GOOD = {"GOOD-1", "GOOD-2", "GOOD-3"}
runner = CliRunner()

# file, exit code, words expected in the output, (row, column) of the error where one row is bad
CASES = [
    ("missing_required_column.csv", NONE, "required column(s) missing: height_m", None),
    ("misspelt_required_header.csv", NONE, "did you mean 'hieght_m'?", None),
    ("empty.csv", NONE, "the file is empty", None),
    ("header_only.csv", NONE, "no wall rows below the header", None),
    ("not_a_spreadsheet.xlsx", NONE, "not a readable spreadsheet", None),
    ("binary_garbage.csv", NONE, "not a text file", None),
    ("notes_sheet_first.xlsx", NONE, "no header row found", None),
    ("duplicate_headers.csv", NONE, "appears twice", None),
    ("password_protected.xlsx", NONE, "password-protected", None),
    ("text_in_numeric.csv", SOME, "expected a number", (5, "height_m")),
    ("blank_required.csv", SOME, "a value is required", (5, "base_width_m")),
    ("negative_height.csv", SOME, "expected a height above 0 m", (5, "height_m")),
    ("top_wider_than_base.csv", SOME, "overhang the heel", (5, "base_width_m")),
    ("slope_steeper_than_friction.csv", SOME, "less than the soil friction", (5, "backfill_slope_deg")),
    ("crack_above_top.csv", SOME, "below the wall height", (5, "crack_height_m")),
    ("water_above_retained.csv", SOME, "above the retained height", (5, "water_height_m")),
    ("unknown_code.csv", SOME, "expected one of working, partial, blocked, unknown", (5, "drainage")),
    ("lat_lon_swapped.csv", SOME, "swapped", (5, "lat")),
    ("lat_out_of_range.csv", SOME, "expected a latitude between -90 and 90", (5, "lat")),
    ("duplicate_wall_id.csv", SOME, "unique within one survey date", (5, "wall_id")),
    ("lean_impossible.csv", SOME, "expected a lean between", (5, "lean_deg")),
    ("condition_as_text.csv", SOME, "expected a number", (5, "condition_rating")),
    ("bad_date.csv", SOME, "expected a date", (5, "survey_date")),
    ("zero_top_width.csv", SOME, "top width above 0", (5, "top_width_m")),
    ("extra_header_rows.xlsx", SOME, "expected a number", (8, "height_m")),  # header on row 4
    ("semicolon_decimal_comma.csv", OK, "3 rows read, 3 walls screened", None),
    ("latin1.csv", OK, "3 rows read, 3 walls screened", None),
    ("utf8_bom.csv", OK, "3 rows read, 3 walls screened", None),
    ("thousands_separator.csv", OK, "3 rows read, 3 walls screened", None),
    ("tab_separated.txt", OK, "3 rows read, 3 walls screened", None),
    ("blank_lines_and_spaces.csv", OK, "3 rows read, 3 walls screened", None),
    ("formulas.xlsx", OK, "3 rows read, 3 walls screened", None),
    ("register.ods", OK, "3 rows read, 3 walls screened", None),
    ("height_in_millimetres.csv", OK, "millimetres entered as metres?", None),
    ("misspelt_optional_header.csv", OK, "did you mean 'surcharge_kpa'?", None),
]


def test_corpus_is_large_enough() -> None:
    assert len([c for c in CASES if c[1] != OK]) >= 25


@pytest.mark.parametrize(("name", "code", "words", "where"), CASES, ids=[c[0] for c in CASES])
def test_each_register_gives_its_message_and_exit_code(name, code, words, where, tmp_path: Path) -> None:
    path = CORPUS / name
    before = path.read_bytes()
    result = runner.invoke(app, ["run", str(path), "--out", str(tmp_path), "--no-history"])
    assert result.exit_code == code, result.output
    assert words in result.output.replace("\n", " ") or words in _problems(tmp_path), result.output
    assert "Traceback" not in result.output
    assert path.read_bytes() == before  # the input is never modified
    if code == NONE:
        return
    walls = pd.read_csv(tmp_path / "walls.csv")
    assert GOOD <= set(walls.wall_id)  # the good rows are still screened
    if where is not None:
        problems = pd.read_csv(tmp_path / "problems.csv")
        errors = problems[problems.severity == "error"]
        assert (errors["row"].iloc[0], errors["column"].iloc[0]) == where
        assert errors["row"].nunique() == 1


def _problems(folder: Path) -> str:
    path = folder / "problems.csv"
    return " ".join(pd.read_csv(path)["message"].astype(str)) if path.exists() else ""


@pytest.mark.parametrize(
    "name",
    [
        "semicolon_decimal_comma.csv",
        "latin1.csv",
        "utf8_bom.csv",
        "thousands_separator.csv",
        "tab_separated.txt",
        "formulas.xlsx",
        "register.ods",
        "blank_lines_and_spaces.csv",
    ],
)
def test_readable_variants_give_the_same_results_as_the_plain_csv(name: str, tmp_path: Path) -> None:
    runner.invoke(app, ["run", str(CORPUS / "good.csv"), "-o", str(tmp_path / "a"), "--no-history"])
    runner.invoke(app, ["run", str(CORPUS / name), "-o", str(tmp_path / "b"), "--no-history"])
    a = pd.read_csv(tmp_path / "a" / "results.csv")
    b = pd.read_csv(tmp_path / "b" / "results.csv")
    if name == "thousands_separator.csv":  # the allowable bearing differs on purpose
        differ = ["bearing_utilisation", "utilisation", "margin", "governing_check", *UNCERTAINTY_COLUMNS]
        a, b = a.drop(columns=differ), b.drop(columns=differ)
    pd.testing.assert_frame_equal(a, b)


def test_latin1_names_are_decoded(tmp_path: Path) -> None:
    runner.invoke(app, ["run", str(CORPUS / "latin1.csv"), "-o", str(tmp_path), "--no-history"])
    assert "Rue de l'Église" in set(pd.read_csv(tmp_path / "walls.csv").name)


def test_imperial_units_through_a_mapping_file(tmp_path: Path) -> None:
    # ft, in, psf, percent slope and pcf converted on load: the same walls in SI must give the
    # same results (conversion factors: 0.3048 m/ft, 0.0254 m/in exactly; 1 psf = 0.0478803 kPa,
    # 1 pcf = 0.157087 kN/m³, NIST SP 811)
    result = runner.invoke(
        app,
        [
            "run",
            str(CORPUS / "imperial_units.csv"),
            "-m",
            str(CORPUS / "imperial_units.toml"),
            "-o",
            str(tmp_path / "ft"),
            "--no-history",
        ],
    )
    assert result.exit_code == OK, result.output
    si = (
        pd.read_csv(CORPUS / "good.csv")
        .drop(columns=["front_batter_m"])
        .assign(surcharge_kpa=10.0, backfill_slope_deg=5.710593137499643, soil_unit_weight_kn_m3=19.0)
    )
    si.to_csv(tmp_path / "si.csv", index=False)
    runner.invoke(app, ["run", str(tmp_path / "si.csv"), "-o", str(tmp_path / "si"), "--no-history"])
    a = pd.read_csv(tmp_path / "si" / "results.csv")
    b = pd.read_csv(tmp_path / "ft" / "results.csv")
    assert_allclose(a.select_dtypes("number"), b.select_dtypes("number"), rtol=1e-9)


def test_mapping_file_errors_are_clear(tmp_path: Path) -> None:
    bad = tmp_path / "m.toml"
    bad.write_text('[columns]\n"Height" = { column = "hieght_m", unit = "mm" }\n')
    result = runner.invoke(app, ["check", str(CORPUS / "good.csv"), "-m", str(bad)])
    assert result.exit_code == NONE and "did you mean 'height_m'?" in result.output
    bad.write_text('[columns]\n"Height" = { column = "height_m", unit = "furlong" }\n')
    result = runner.invoke(app, ["check", str(CORPUS / "good.csv"), "-m", str(bad)])
    assert result.exit_code == NONE and "unit 'furlong' is not known" in result.output


def test_check_writes_an_errors_file(tmp_path: Path) -> None:
    result = runner.invoke(
        app, ["check", str(CORPUS / "text_in_numeric.csv"), "--errors", str(tmp_path / "e.csv")]
    )
    assert result.exit_code == SOME
    errors = pd.read_csv(tmp_path / "e.csv")
    assert errors.loc[0, "value"] == "three metres" and errors.loc[0, "row"] == 5
