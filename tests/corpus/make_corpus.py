"""Make the corpus of malformed registers used by tests/test_corpus.py.

Run ``python tests/corpus/make_corpus.py`` to rewrite the files beside this script.
Each register holds the three good walls GOOD-1..GOOD-3 plus its defect, so the tests
can check that the good rows are still screened. Invented data, for tests only.
Needs msoffcrypto-tool (the password-protected workbook) and odfpy (the .ods file),
which the tests themselves do not.
"""

from __future__ import annotations

import io
import shutil
from pathlib import Path

import pandas as pd
import xlsxwriter

HERE = Path(__file__).resolve().parent

GOOD = [
    {
        "wall_id": "GOOD-1",
        "name": "Quarry Lane",
        "height_m": 3.0,
        "base_width_m": 2.0,
        "top_width_m": 0.8,
        "front_batter_m": 0.3,
        "material": "stone_masonry",
        "foundation": "gravel",
        "drainage": "working",
        "condition_rating": 2,
        "consequence": "road",
        "lat": 53.70,
        "lon": -1.90,
        "survey_date": "2026-05-01",
    },
    {
        "wall_id": "GOOD-2",
        "name": "Mill Bank",
        "height_m": 2.0,
        "base_width_m": 1.2,
        "top_width_m": 0.5,
        "material": "brick_masonry",
        "foundation": "stiff_clay",
        "drainage": "partial",
        "condition_rating": 3,
        "consequence": "footpath",
        "lat": 53.71,
        "lon": -1.91,
        "survey_date": "2026-05-01",
    },
    {
        "wall_id": "GOOD-3",
        "name": "Station Brow",
        "height_m": 4.5,
        "base_width_m": 2.6,
        "top_width_m": 0.7,
        "front_batter_m": 0.5,
        "crack_height_m": 2.0,
        "lean_deg": 1.5,
        "material": "mass_concrete",
        "foundation": "rock",
        "drainage": "blocked",
        "condition_rating": 4,
        "consequence": "railway",
        "lat": 53.72,
        "lon": -1.92,
        "survey_date": "2026-05-01",
    },
]


def good(**change: object) -> pd.DataFrame:
    return pd.DataFrame(GOOD)


def with_bad(bad: dict[str, object]) -> pd.DataFrame:
    row = dict(GOOD[0], wall_id="BAD-1", name="the defective row")
    row.update(bad)
    return pd.DataFrame([*GOOD, row])


def csv(name: str, frame: pd.DataFrame, **kwargs: object) -> None:
    frame.to_csv(HERE / name, index=False, **kwargs)


def xlsx(
    name: str,
    frame: pd.DataFrame,
    *,
    title_rows: int = 0,
    formulas: bool = False,
    sheets: tuple[str, ...] = ("Walls",),
) -> None:
    book = xlsxwriter.Workbook(str(HERE / name), {"nan_inf_to_errors": True})
    for sheet_name in sheets:
        sheet = book.add_worksheet(sheet_name)
        if sheet_name != "Walls":
            sheet.write(0, 0, "Notes: the register is on the sheet 'Walls'.")
            continue
        if title_rows:
            merge = book.add_format({"bold": True, "align": "center"})
            sheet.merge_range(0, 0, 0, 5, "Borough of Testham: retaining wall register", merge)
            for r in range(1, title_rows):
                sheet.write(r, 0, f"exported 2026-05-0{r}")
        for c, col in enumerate(frame.columns):
            sheet.write(title_rows, c, col)
        for r, values in enumerate(frame.itertuples(index=False), start=title_rows + 1):
            for c, v in enumerate(values):
                if pd.isna(v):
                    continue
                col = frame.columns[c]
                if formulas and col == "base_width_m":
                    # a formula with its cached value, as Excel saves it
                    sheet.write_formula(r, c, f"={v / 2}*2", None, v)
                else:
                    sheet.write(r, c, v)
    book.close()


def main() -> None:
    for old in HERE.iterdir():
        if old.suffix in (".csv", ".xlsx", ".ods", ".toml", ".txt", ".geojson"):
            old.unlink()
    csv("good.csv", good())
    # whole-file problems: nothing can be screened (exit 2)
    csv("missing_required_column.csv", good().drop(columns="height_m"))
    csv("misspelt_required_header.csv", good().rename(columns={"height_m": "hieght_m"}))
    (HERE / "empty.csv").write_text("")
    (HERE / "header_only.csv").write_text(",".join(good().columns) + "\n")
    (HERE / "not_a_spreadsheet.xlsx").write_text("wall_id,height_m\nA,3\n")
    (HERE / "binary_garbage.csv").write_bytes(bytes(range(256)) * 4)
    xlsx("notes_sheet_first.xlsx", good(), sheets=("Notes", "Walls"))
    csv("duplicate_headers.csv", good().rename(columns={"top_width_m": "height_m"}))
    plain = io.BytesIO()
    xlsx("_plain.xlsx", good())
    import msoffcrypto

    with open(HERE / "_plain.xlsx", "rb") as src:
        office = msoffcrypto.OfficeFile(src)
        office.encrypt("secret", plain)
    (HERE / "password_protected.xlsx").write_bytes(plain.getvalue())
    (HERE / "_plain.xlsx").unlink()
    # row problems: the bad row is rejected, the good rows screened (exit 1)
    csv("text_in_numeric.csv", with_bad({"height_m": "three metres"}))
    csv("blank_required.csv", with_bad({"base_width_m": None}))
    csv("negative_height.csv", with_bad({"height_m": -3.0}))
    csv("top_wider_than_base.csv", with_bad({"top_width_m": 2.5}))
    csv("slope_steeper_than_friction.csv", with_bad({"backfill_slope_deg": 35.0, "soil_friction_deg": 30.0}))
    csv("crack_above_top.csv", with_bad({"crack_height_m": 3.5}))
    csv("water_above_retained.csv", with_bad({"water_height_m": 3.2, "retained_height_m": 2.5}))
    csv("unknown_code.csv", with_bad({"drainage": "clogged"}))
    csv(
        "lat_lon_swapped.csv",
        with_bad({"lat": -1.90, "lon": 53.70}).assign(lat=lambda d: d.lat.where(d.wall_id != "BAD-1", 153.7)),
    )
    csv("lat_out_of_range.csv", with_bad({"lat": 195.0}))
    csv("duplicate_wall_id.csv", with_bad({"wall_id": "GOOD-2"}))
    csv("lean_impossible.csv", with_bad({"lean_deg": 45.0}))
    csv("condition_as_text.csv", with_bad({"condition_rating": "good"}))
    csv("bad_date.csv", with_bad({"survey_date": "spring 2026"}))
    csv("zero_top_width.csv", with_bad({"top_width_m": 0.0}))
    xlsx("extra_header_rows.xlsx", with_bad({"height_m": "n/a"}), title_rows=3)
    # readable with care: everything screened (exit 0), values as in good.csv
    csv("semicolon_decimal_comma.csv", good(), sep=";", decimal=",")
    csv("latin1.csv", good().assign(name=["Rue de l'Église", "Straße", "Ångström Row"]), encoding="latin-1")
    csv("utf8_bom.csv", good(), encoding="utf-8-sig")
    csv("thousands_separator.csv", good().assign(allowable_bearing_kpa=["1,000", "150", "1,200"]))
    csv("tab_separated.txt", good(), sep="\t")
    csv("blank_lines_and_spaces.csv", good().assign(name=lambda d: "  " + d.name + "  "))
    xlsx("formulas.xlsx", good(), formulas=True)
    good().to_excel(HERE / "register.ods", index=False, engine="odf")
    # warnings only: screened, listed (exit 0)
    csv(
        "height_in_millimetres.csv",
        with_bad({"height_m": 3000.0, "base_width_m": 2000.0, "top_width_m": 800.0}),
    )
    csv("misspelt_optional_header.csv", good().assign(surchage_kpa=5.0))
    # the owner's units through a mapping file
    feet = good().rename(
        columns={"height_m": "Height (ft)", "base_width_m": "Base (ft)", "top_width_m": "Top (in)"}
    )
    feet["Height (ft)"] = feet["Height (ft)"] / 0.3048
    feet["Base (ft)"] = feet["Base (ft)"] / 0.3048
    feet["Top (in)"] = feet["Top (in)"] / 0.0254
    feet["Surcharge (psf)"] = 10.0 / 0.0478803
    feet["Slope (%)"] = 10.0
    feet["Fill weight (pcf)"] = 19.0 / 0.157087
    csv("imperial_units.csv", feet.drop(columns=["front_batter_m"]))
    (HERE / "imperial_units.toml").write_text(
        '[columns]\n"Height (ft)" = { column = "height_m", unit = "ft" }\n'
        '"Base (ft)" = { column = "base_width_m", unit = "ft" }\n'
        '"Top (in)" = { column = "top_width_m", unit = "in" }\n'
        '"Surcharge (psf)" = { column = "surcharge_kpa", unit = "psf" }\n'
        '"Slope (%)" = { column = "backfill_slope_deg", unit = "percent" }\n'
        '"Fill weight (pcf)" = { column = "soil_unit_weight_kn_m3", unit = "pcf" }\n'
    )
    print(f"wrote {len([p for p in HERE.iterdir() if p.suffix != '.py'])} files")
    shutil.rmtree(HERE / "__pycache__", ignore_errors=True)


if __name__ == "__main__":
    main()
