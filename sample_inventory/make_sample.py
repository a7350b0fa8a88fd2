"""Make the invented demo register of Harrowby Vale (two survey epochs).

Invented data for the demo only: the district, streets and walls do not exist;
they are placed at real-world coordinates in the South Pennines so the map has
a sensible background. Run ``python sample_inventory/make_sample.py`` to write
``register_2025.xlsx`` and ``register_2026.xlsx`` beside this file; the output
is the same on every run (seeded).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from pyproj import Transformer

HERE = Path(__file__).resolve().parent
N_WALLS = 120
STREETS = [
    "Kestrel Row",
    "Millrace Lane",
    "Tanner's Brow",
    "Cobble Hill",
    "Weaver Street",
    "Slackside Road",
    "Chapel Fold",
    "Heron Bank",
    "Lowgate",
    "Fellside Terrace",
    "Ridings Way",
    "Old Quarry Road",
    "Station Approach",
    "Beckfoot Lane",
    "Lanthorn Walk",
]
SIDES = ["north side", "south side", "east side", "west side", "below the footway", "above the beck"]
# owner's codes, as their asset system exports them
MATERIAL = {"mass_concrete": "MC", "stone_masonry": "SM", "brick_masonry": "BM", "drystone": "DS"}
DRAINAGE = {"working": "W", "partial": "P", "blocked": "B", "unknown": "U"}
BELOW = {"railway": "Rail", "road": "Road", "building": "Bldg", "footpath": "Path", "open_land": "Open"}
FOUNDATION = {
    "rock": "Rock",
    "gravel": "Gravel",
    "sand": "Sand",
    "stiff_clay": "Stiff clay",
    "firm_clay": "Firm clay",
    "soft_clay": "Soft clay",
}

# centre of the invented district (a hillside in the South Pennines), WGS84
LAT0, LON0 = 53.7205, -1.9410


def _walls(rng: np.random.Generator) -> pd.DataFrame:
    n = N_WALLS
    material = rng.choice(list(MATERIAL), n, p=[0.25, 0.4, 0.2, 0.15])
    height = np.round(rng.uniform(1.0, 6.0, n), 1)
    # old gravity walls: base 0.45-0.8 H, slenderer for drystone and brick
    ratio = rng.uniform(0.45, 0.8, n) - np.where(material == "drystone", 0.05, 0.0)
    base = np.round(np.maximum(height * ratio, 0.5), 2)
    top = np.round(np.clip(rng.uniform(0.35, 0.7, n), 0.3, base * 0.9), 2)
    front = np.round(np.where(rng.random(n) < 0.5, (base - top) * rng.uniform(0.2, 0.8, n), 0.0), 2)
    retained = np.round(height - rng.choice([0.0, 0.0, 0.2, 0.4, 0.6], n), 1)
    lean = np.where(rng.random(n) < 0.15, np.round(rng.uniform(0.5, 4.0, n), 1), 0.0)
    crack = np.where(rng.random(n) < 0.1, np.round(height * rng.uniform(0.35, 0.7, n), 1), np.nan)
    drainage = rng.choice(list(DRAINAGE), n, p=[0.35, 0.25, 0.2, 0.2])
    foundation = rng.choice([*FOUNDATION, ""], n, p=[0.25, 0.2, 0.05, 0.3, 0.1, 0.02, 0.08])
    below = rng.choice(list(BELOW), n, p=[0.1, 0.4, 0.15, 0.2, 0.15])
    condition = rng.choice([1, 2, 3, 4, 5], n, p=[0.1, 0.3, 0.3, 0.2, 0.1])
    street = rng.choice(STREETS, n)
    side = rng.choice(SIDES, n)
    # positions: a wall line of 15-70 m at a random bearing, some kept as points only
    lat = LAT0 + rng.uniform(-0.008, 0.008, n)
    lon = LON0 + rng.uniform(-0.014, 0.014, n)
    length = rng.uniform(15, 70, n)
    bearing = rng.uniform(0, np.pi, n)
    dlat = length * np.cos(bearing) / 111_320.0
    dlon = length * np.sin(bearing) / (111_320.0 * np.cos(np.radians(LAT0)))
    bend = rng.uniform(-0.15, 0.15, n)
    wkt = [
        f"LINESTRING ({a:.6f} {b:.6f}, {a + 0.5 * dl + bd * dt:.6f} {b + 0.5 * dt - bd * dl:.6f}, "
        f"{a + dl:.6f} {b + dt:.6f})"
        for a, b, dl, dt, bd in zip(lon, lat, dlon, dlat, bend, strict=True)
    ]
    as_point = rng.random(n) < 0.15
    to_bng = Transformer.from_crs("EPSG:4326", "EPSG:27700", always_xy=True)
    east, north = to_bng.transform(lon, lat)
    return pd.DataFrame(
        {
            "Asset Ref": [f"HV-{i:03d}" for i in range(1, n + 1)],
            "Location": [f"{s}, {d}" for s, d in zip(street, side, strict=True)],
            "Easting": np.where(as_point, np.round(east, 1), np.nan),
            "Northing": np.where(as_point, np.round(north, 1), np.nan),
            "Alignment (WKT)": np.where(as_point, "", wkt),
            "Height (mm)": (height * 1000).astype(int),
            "Base width (mm)": (base * 1000).astype(int),
            "Top width (mm)": (top * 1000).astype(int),
            "Front batter (mm)": (front * 1000).astype(int),
            "Retained height (mm)": (retained * 1000).astype(int),
            "Lean at top (mm)": np.round(np.tan(np.radians(lean)) * height * 1000).astype(int),
            "Crack height (mm)": np.round(crack * 1000),
            "Construction": [MATERIAL[m] for m in material],
            "Founded on": [FOUNDATION.get(f, "") for f in foundation],
            "Drainage": [DRAINAGE[d] for d in drainage],
            "Condition": condition,
            "Below wall": [BELOW[b] for b in below],
            "Survey date": "2025-06-12",
            "Remarks": "",
        }
    )


def _second_survey(first: pd.DataFrame, rng: np.random.Generator) -> pd.DataFrame:
    """A year later: re-measured lean, drains cleared or found blocked, a new crack."""
    df = first.copy()
    df["Survey date"] = "2026-06-18"
    ids = df["Asset Ref"]
    # lean grown on two walls (mm at the top)
    for ref, extra in (("HV-012", 35), ("HV-057", 22)):
        df.loc[ids == ref, "Lean at top (mm)"] += extra
        df.loc[ids == ref, "Remarks"] = "lean re-measured; bulge noted at mid-height"
    # drains cleared on some, found blocked on others
    df.loc[ids.isin(["HV-003", "HV-021", "HV-048"]), "Drainage"] = "W"
    df.loc[ids.isin(["HV-003", "HV-021", "HV-048"]), "Remarks"] = "weepholes rodded through"
    df.loc[ids.isin(["HV-030", "HV-066", "HV-090"]), "Drainage"] = "weepholes blocked"
    # a new crack
    df.loc[ids == "HV-075", "Crack height (mm)"] = float(df.loc[ids == "HV-075", "Height (mm)"].iloc[0] // 2)
    df.loc[ids == "HV-075", "Remarks"] = "new horizontal crack along a bed joint"
    # one wall demolished, one new wall added
    df = df[ids != "HV-099"].copy()
    new = df[df["Asset Ref"] == "HV-010"].copy()
    new["Asset Ref"] = "HV-121"
    new["Location"] = "Beckfoot Lane, new flood wall"
    new["Construction"] = "MC"
    new["Condition"] = 1
    new["Drainage"] = "W"
    new["Remarks"] = "added to the register in 2026"
    df = pd.concat([df, new], ignore_index=True)
    # the owner's data-entry mistakes the validator should catch
    df.loc[df["Asset Ref"] == "HV-017", "Height (mm)"] = 4  # metres typed into a mm column
    df["Base width (mm)"] = df["Base width (mm)"].astype(object)
    df.loc[df["Asset Ref"] == "HV-044", "Base width (mm)"] = "approx 1800"
    dup = df[df["Asset Ref"] == "HV-063"].copy()
    dup["Remarks"] = "entered twice"
    df = pd.concat([df, dup], ignore_index=True)
    row = df["Asset Ref"] == "HV-081"
    df.loc[row, "Top width (mm)"] = int(df.loc[row, "Base width (mm)"].iloc[0]) + 300
    row = df["Asset Ref"] == "HV-095"
    df.loc[row, "Crack height (mm)"] = float(df.loc[row, "Height (mm)"].iloc[0] + 500)
    row = df["Asset Ref"] == "HV-102"
    df.loc[row, "Lean at top (mm)"] = int(np.tan(np.radians(14)) * df.loc[row, "Height (mm)"].iloc[0])
    row = df["Asset Ref"] == "HV-110"
    df.loc[row, ["Alignment (WKT)", "Easting", "Northing"]] = ["", np.nan, np.nan]
    df.loc[row, "Remarks"] = "location to be confirmed"
    # a remark that would be a formula if pasted carelessly
    df.loc[df["Asset Ref"] == "HV-033", "Remarks"] = '=HYPERLINK("http://example.invalid") ask surveyor'
    return df


def _write(df: pd.DataFrame, path: Path) -> None:
    import xlsxwriter

    book = xlsxwriter.Workbook(str(path), {"nan_inf_to_errors": False})
    sheet = book.add_worksheet("Walls")
    bold = book.add_format({"bold": True, "bg_color": "#DDDDDD"})
    sheet.write_row(0, 0, ["Harrowby Vale District Council: retaining wall register (INVENTED DEMO DATA)"])
    sheet.write_row(1, 0, list(df.columns), bold)
    for r, values in enumerate(df.itertuples(index=False), start=2):
        for c, v in enumerate(values):
            if (isinstance(v, float) and np.isnan(v)) or v == "":
                continue
            sheet.write(r, c, v.item() if hasattr(v, "item") else v)
    sheet.freeze_panes(2, 1)
    book.close()


def main() -> None:
    rng = np.random.default_rng(20250612)
    first = _walls(rng)
    second = _second_survey(first, rng)
    _write(first, HERE / "register_2025.xlsx")
    _write(second, HERE / "register_2026.xlsx")
    print(f"wrote {len(first)} and {len(second)} rows")


if __name__ == "__main__":
    main()
