"""The ranking and its words (issue 16) and the old-wall mechanics where an owner reads (issue 13).

Each test here failed before its fix. Outputs are read back as a user meets them: walls.csv,
the workbook through openpyxl, the map's data and the calculation sheet's HTML.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
from typer.testing import CliRunner

from screening import evaluate
from screening.cli import app
from tests.conftest import worked_wall

runner = CliRunner()


def _csv(tmp_path: Path, rows: list[dict], name: str = "register.csv") -> Path:
    """The rows as a register, each wall placed on the map (invented positions, 100 m apart)."""
    path = tmp_path / name
    frame = pd.DataFrame(rows)
    frame["lat"] = 51.5 + 0.001 * np.arange(len(frame))
    frame["lon"] = -1.2
    frame.to_csv(path, index=False)
    return path


def _run(tmp_path: Path, rows: list[dict], *extra: str, out: str = "out") -> tuple[Path, str]:
    reg = _csv(tmp_path, rows)
    folder = tmp_path / out
    result = runner.invoke(app, ["run", str(reg), "--out", str(folder), "--no-history", *extra])
    assert result.exit_code in (0, 1), result.output
    return folder, result.output


def _sheet_rows(path: Path, name: str) -> list[tuple]:
    book = openpyxl.load_workbook(path, read_only=True)
    return [tuple(r) for r in book[name].iter_rows(values_only=True)]


def _table(path: Path, name: str, header_cell: str) -> pd.DataFrame:
    """A workbook table read back: the header row is the one whose first cell is ``header_cell``."""
    rows = _sheet_rows(path, name)
    start = next(i for i, r in enumerate(rows) if r and str(r[0]).lower() == header_cell.lower())
    return pd.DataFrame(rows[start + 1 :], columns=list(rows[start]))


def _header(table: pd.DataFrame, starts: str) -> str:
    """The one header of ``table`` that starts with ``starts`` (units may follow)."""
    found = [c for c in table.columns if str(c).startswith(starts)]
    assert len(found) == 1, (starts, list(table.columns))
    return found[0]


def _map_data(folder: Path) -> dict:
    page = (folder / "map.html").read_text(encoding="utf-8")
    literal = re.search(r"window\.wallscreenConfig = (\{.*?\});\n</script>", page, re.S)
    assert literal is not None
    text = literal.group(1).replace("NaN", "null").replace("-Infinity", "null").replace("Infinity", "null")
    return json.loads(text)["data"]


# ------------------------------------------------------------ a warning on a mechanics input


def test_a_lean_warning_shows_in_the_reason_and_marks_the_wall(tmp_path: Path) -> None:
    rows = [worked_wall("LEAN", 2.0, lean_deg=14.0), worked_wall("OK", 2.0, lean_deg=0.5)]
    folder, output = _run(tmp_path, rows)
    walls = pd.read_csv(folder / "walls.csv").set_index("wall_id")
    # issue 13's warning: a lean above about 5° is implausible for a standing wall
    assert (
        "check the survey: lean 14° is implausible for a standing wall" in walls.at["LEAN", "reason"].lower()
    )
    assert walls.at["LEAN", "reason"].startswith("Check the survey")  # said first
    assert bool(walls.at["LEAN", "suspect_data"]) is True
    assert walls.at["LEAN", "suspect_inputs"] == "lean_deg"
    assert bool(walls.at["OK", "suspect_data"]) is False
    assert "check the survey" not in walls.at["OK", "reason"].lower()
    ranked = _table(folder / "report.xlsx", "Ranked walls", "Rank").set_index("Wall")
    assert ranked.at["LEAN", "Resting on suspect data"] == True  # noqa: E712 (a boolean cell)
    assert ranked.at["LEAN", "Suspect inputs"] == "lean_deg"
    assert "implausible" in ranked.at["LEAN", "Reason"]
    data = _map_data(folder)
    i = data["id"].index("LEAN")
    assert data["suspect"][i] == "lean_deg" and data["suspect"][data["id"].index("OK")] == ""
    assert "implausible" in "; ".join(data["reasonText"][c] for c in data["reason"][i])
    assert "1 wall rests on suspect data" in output


def test_a_warning_under_the_users_own_header_still_marks_the_wall(tmp_path: Path) -> None:
    """With a mapping file the problems name the user's header; the mark must still follow it."""
    walls = pd.DataFrame([worked_wall("W", 2.0, lean_deg=8.0)])
    run = evaluate(walls, labels={"lean_deg": "Lean at top (deg)"})
    assert run.problems["column"].tolist() == ["Lean at top (deg)"]
    assert bool(run.walls["suspect_data"].iloc[0]) and run.walls["suspect_inputs"].iloc[0] == "lean_deg"


def test_a_warning_off_the_mechanics_does_not_mark_the_wall() -> None:
    # a location warning is not an input of the mechanics
    from screening.pipeline import suspect_data

    walls = pd.DataFrame({"row": [2], "wall_id": ["A"], "lean_deg": [0.0]})
    problems = pd.DataFrame(
        {
            "row": [2],
            "wall_id": ["A"],
            "column": ["lat"],
            "value": [""],
            "severity": ["warning"],
            "message": ["x"],
        }
    )
    flags = suspect_data(walls, problems, {})
    assert not flags["suspect_data"].iloc[0] and flags["suspect_words"].iloc[0] == ""


# ------------------------------------------------------------ drainage not recorded


def test_drainage_not_recorded_is_said_and_counted_apart_from_blocked(tmp_path: Path) -> None:
    rows = [
        worked_wall("BLANK", 2.0),
        worked_wall("UNK", 2.0, drainage="unknown"),
        worked_wall("BLK", 2.0, drainage="blocked"),
        worked_wall("MEAS", 2.0, water_height_m=0.5),  # measured water: drainage does not matter
    ]
    folder, output = _run(tmp_path, rows)
    walls = pd.read_csv(folder / "walls.csv").set_index("wall_id")
    for wid in ("BLANK", "UNK"):
        assert "drainage not recorded" in walls.at[wid, "reason"], wid
        assert bool(walls.at[wid, "drainage_not_recorded"])
    for wid in ("BLK", "MEAS"):
        assert "drainage not recorded" not in walls.at[wid, "reason"], wid
        assert not bool(walls.at[wid, "drainage_not_recorded"])
    # screened like blocked drains (the method stays): same surveyed utilisation as BLK
    assert walls.at["UNK", "utilisation_surveyed"] == pytest.approx(walls.at["BLK", "utilisation_surveyed"])
    assert "Drains: 1 recorded blocked, 2 not recorded (screened as blocked)" in output


# ------------------------------------------------------------ a resultant at the toe


def _near_toe_wall() -> dict:
    """A rectangular wall (worked case of method.md §6, B = 1.4 m) with the measured water set so
    that the surveyed resultant lies 5-15 mm from the toe: found by a 1 mm scan, then checked."""
    heights = np.round(np.arange(2.60, 2.90, 0.001), 3)
    run = evaluate(pd.DataFrame([worked_wall(f"S{k}", 1.4, water_height_m=h) for k, h in enumerate(heights)]))
    surveyed = run.results[run.results["case"] == "surveyed"]
    x = surveyed["resultant_from_toe_m"].to_numpy()
    pick = np.flatnonzero((x > 0.005) & (x < 0.015))
    assert pick.size, "no water height puts the resultant 5-15 mm from the toe"
    return worked_wall("TOE", 1.4, water_height_m=float(surveyed["water_height_m"].iloc[pick[0]]))


def test_a_resultant_at_the_toe_is_said_in_words_not_as_a_pressure(tmp_path: Path) -> None:
    # samples off: with the probabilities on, their clause takes the place of the checks' words
    folder, _ = _run(tmp_path, [_near_toe_wall()], "--sheets", "--samples", "0")
    results = pd.read_parquet(folder / "results.parquet")  # full doubles
    row = results[results["case"] == "surveyed"].iloc[0]
    assert 0 < row["resultant_from_toe_m"] < 0.02
    # the number stays in results.csv: q_max = 2V/(3 x_R) (method.md §3), huge but correct
    assert row["toe_pressure_kpa"] == pytest.approx(
        2 * row["vertical_kn_m"] / (3 * row["resultant_from_toe_m"]), rel=1e-9
    )
    assert row["toe_pressure_kpa"] > 1000
    walls = pd.read_csv(folder / "walls.csv")
    reason = walls["reason"].iloc[0]
    assert "the resultant is within 20 mm of the toe" in reason
    assert f"{row['bearing_utilisation']:.2f}" not in reason
    by_case = _table(folder / "report.xlsx", "Results by case", "wall id")
    cell = by_case.loc[by_case["case"] == "surveyed", _header(by_case, "Toe pressure")].iloc[0]
    assert cell == "resultant within 20 mm of the toe"
    drained = by_case.loc[by_case["case"] == "drained", _header(by_case, "Toe pressure")].iloc[0]
    assert isinstance(drained, float)  # other rows keep their number
    data = _map_data(folder)
    k = data["cases"].index("surveyed")
    assert data["nearToe"][k][0] == 1 and data["nearToe"][data["cases"].index("drained")][0] == 0
    assert data["nearToeText"] == "resultant within 20 mm of the toe"
    sheet = next((folder / "sheets").glob("*.html")).read_text(encoding="utf-8")
    toe = re.search(r'data-key="surveyed\.toe_pressure_kpa">([^<]*)<', sheet)
    assert toe is not None and toe.group(1) == "resultant within 20 mm of the toe"


def test_the_toe_threshold_is_a_setting(tmp_path: Path) -> None:
    cfg = tmp_path / "config.toml"
    cfg.write_text("resultant_near_toe_m = 0.005\n", encoding="utf-8")
    folder, _ = _run(tmp_path, [_near_toe_wall()], "--config", str(cfg), "--samples", "0")
    reason = pd.read_csv(folder / "walls.csv")["reason"].iloc[0]
    assert "mm of the toe" not in reason and "toe pressure exceeds the allowable" in reason


# ------------------------------------------------------------ a wall whose row is rejected this time


def test_a_wall_rejected_this_time_is_carried_with_its_previous_band(tmp_path: Path) -> None:
    history = tmp_path / "history.gpkg"
    bad = worked_wall("BAD", 1.0, condition_rating=5, consequence="railway")  # ranks first
    first = [bad, worked_wall("OK", 2.0)]
    reg1 = _csv(tmp_path, first, name="first.csv")
    result = runner.invoke(app, ["run", str(reg1), "--out", str(tmp_path / "o1"), "--history", str(history)])
    assert result.exit_code == 0, result.output
    before = pd.read_csv(tmp_path / "o1" / "walls.csv").set_index("wall_id")
    band = {"inspect_first": "Inspect first", "inspect_soon": "Inspect soon"}[
        before.at["BAD", "priority_band"]
    ]
    # the next survey: a typo puts the height in millimetres' place (4 for 4 m would be 0.004)
    reg2 = _csv(tmp_path, [dict(bad, height_m=0.004), worked_wall("OK", 2.0)], name="second.csv")
    out = tmp_path / "o2"
    result = runner.invoke(app, ["run", str(reg2), "--out", str(out), "--history", str(history)])
    assert result.exit_code == 1, result.output  # rows rejected
    said = re.sub(r"\s+", " ", result.output)
    assert "Not re-screened this run (1 wall" in said
    assert "BAD not re-screened: height_m 0.004" in said and f"was {band}, rank 1 in the last run" in said
    changes = pd.read_csv(out / "changes.csv").set_index("wall_id")
    assert changes.at["BAD", "status"] == "rejected"
    assert changes.at["BAD", "not_rescreened_because"].startswith("not re-screened: height_m 0.004 (")
    rows = _sheet_rows(out / "report.xlsx", "Look first")
    text = [" ".join(str(c) for c in r if c is not None) for r in rows]
    head = next(i for i, t in enumerate(text) if t.startswith("Not re-screened this run (1)"))
    assert "BAD" in text[head + 1] and f"was {band}, rank 1 in the last run" in text[head + 1]
    assert "height_m 0.004" in text[head + 1]
    import openpyxl

    # one line each: a cell without a format of its own takes its column's, which wraps (the
    # names below), and a wrapped cell in a row of one line's height is drawn over the next row
    sheet = openpyxl.load_workbook(out / "report.xlsx")["Look first"]
    line = next(r for r in sheet.iter_rows() if r[1].value == "BAD" and r[2].value)
    assert line[2].has_style and not line[2].alignment.wrap_text
    page = (out / "map.html").read_text(encoding="utf-8")
    assert "Not re-screened this run (1)" in page
    assert "BAD: not re-screened: height_m 0.004" in page


# ------------------------------------------------------------ the mechanics of old walls, where an owner reads


def _old_wall_run(tmp_path: Path, config: str = "") -> Path:
    """A masonry wall (bed joints checked) on soil with a recorded friction angle (Annex D), surveyed
    twice a year apart with a growing lean (a lean rate), screened with calculation sheets."""
    wall = worked_wall("OLD", 2.0, material="stone_masonry", foundation_friction_deg=30.0, embedment_m=0.5)
    rows = [
        dict(wall, survey_date="2024-06-01", lean_deg=0.5),
        dict(wall, survey_date="2025-06-01", lean_deg=1.0),
    ]
    extra = ["--sheets"]
    if config:
        (tmp_path / "config.toml").write_text(config, encoding="utf-8")
        extra += ["--config", str(tmp_path / "config.toml")]
    folder, _ = _run(tmp_path, rows, *extra)
    return folder


def test_the_critical_figures_joint_and_annex_d_reach_the_workbook(tmp_path: Path) -> None:
    folder = _old_wall_run(tmp_path)
    walls = pd.read_csv(folder / "walls.csv").set_index("wall_id")
    assert np.isfinite(walls.at["OLD", "years_to_critical_lean"])  # the lean is growing
    ranked = _table(folder / "report.xlsx", "Ranked walls", "Rank").set_index("Wall")
    for column, header in (
        ("critical_water_height_m", "Critical water height [m]"),
        ("critical_water_fraction", "Critical water height / retained height"),
        ("critical_lean_deg", "Critical lean"),
        ("years_to_critical_lean", "Years to critical lean"),
    ):
        assert ranked.at["OLD", _header(ranked, header)] == pytest.approx(
            walls.at["OLD", column], rel=1e-5
        ), column
    assert "a projection, not a prediction" in _header(ranked, "Years to critical lean")
    method = " ".join(
        str(c) for r in _sheet_rows(folder / "report.xlsx", "Method and cautions") for c in r if c
    )
    assert "a projection, not a prediction" in method
    by_case = _table(folder / "report.xlsx", "Results by case", "wall id")
    results = pd.read_parquet(folder / "results.parquet")  # full doubles, as the workbook
    assert by_case[_header(by_case, "Governing bed joint z")].tolist() == pytest.approx(
        results["joint_height_m"].tolist()
    )
    assert set(by_case[_header(by_case, "Bearing method")]) == {"EN 1997-1 Annex D"}
    assert by_case[_header(by_case, "Bearing resistance R")].tolist() == pytest.approx(
        results["bearing_resistance_kn_m"].tolist()
    )
    settings = dict((r[0], r[1]) for r in _sheet_rows(folder / "report.xlsx", "Settings") if r and r[0])
    assert "no criteria per case set" in settings["criteria"]


def test_the_settings_sheet_names_the_criteria_source(tmp_path: Path) -> None:
    folder = _old_wall_run(tmp_path, 'criteria = "by_load_category"\n')
    settings = dict((r[0], r[1]) for r in _sheet_rows(folder / "report.xlsx", "Settings") if r and r[0])
    assert "EM 1110-2-2100" in settings["criteria source"]  # method.md §12 names it so
    assert "fos sliding required 1.33" in settings["criteria, blocked"]
    sheet = next((folder / "sheets").glob("*.html")).read_text(encoding="utf-8")
    blocked = sheet[sheet.index("Drains blocked") :]
    assert "sliding 1.33/FoS" in blocked and "resultant |e|/(0.5 · B/2)" in blocked


def test_the_map_popup_carries_the_old_wall_figures(tmp_path: Path) -> None:
    folder = _old_wall_run(tmp_path)
    walls = pd.read_csv(folder / "walls.csv").set_index("wall_id")
    data = _map_data(folder)
    i = data["id"].index("OLD")
    notes = [data["notesText"][lines[i]] for lines in data["notes"] if lines[i]]
    hc = walls.at["OLD", "critical_water_height_m"]
    assert any(n.startswith(f"Critical water height {hc:.2f} m of 3.00 m") for n in notes), notes
    assert any(n.startswith(f"Critical lean {walls.at['OLD', 'critical_lean_deg']:.1f}°") for n in notes)
    assert any("a projection, not a prediction" in n for n in notes)
    results = pd.read_csv(folder / "results.csv").set_index("case")
    for k, case in enumerate(data["cases"]):
        assert data["jz"][k][i] == pytest.approx(results.at[case, "joint_height_m"], abs=0.005)
        assert data["R"][k][i] == pytest.approx(results.at[case, "bearing_resistance_kn_m"], abs=0.5)
    assert data["annexD"][i] == 1


def _tagged(sheet: str, key: str) -> str:
    found = re.search(rf'data-key="{re.escape(key)}">([^<]*)<', sheet)
    assert found is not None, key
    return found.group(1)


def test_the_sheet_sets_out_the_joint_annex_d_and_critical_water(tmp_path: Path) -> None:
    folder = _old_wall_run(tmp_path)
    sheet = next((folder / "sheets").glob("*.html")).read_text(encoding="utf-8")
    results = pd.read_csv(folder / "results.csv").set_index("case")
    walls = pd.read_csv(folder / "walls.csv").set_index("wall_id")
    # the inputs table lists register columns only, not the derived inputs
    inputs = sheet[sheet.index("1. Inputs") : sheet.index("2. Section")]
    assert "joint_check" not in inputs and "<td>surveyed_water_height_m</td>" not in inputs
    # Annex D factors at φ'_f = 30°: N_q 18.40, N_c 30.14, N_γ 20.09 (EN 1997-1 Annex D tables,
    # as quoted in method.md §10)
    assert _tagged(sheet, "drained.bearing_n_q") == "18.40"
    assert _tagged(sheet, "drained.bearing_n_c") == "30.14"
    assert _tagged(sheet, "drained.bearing_n_gamma") == "20.09"
    assert float(_tagged(sheet, "blocked.bearing_resistance_kn_m")) == pytest.approx(
        results.at["blocked", "bearing_resistance_kn_m"], abs=0.05
    )
    assert "EN 1997-1 Annex D" in sheet
    for case in ("drained", "blocked", "surveyed"):
        assert float(_tagged(sheet, f"{case}.joint_height_m")) == pytest.approx(
            results.at[case, "joint_height_m"], abs=0.005
        )
    alt = re.search(r'<img class="fig" alt="([^"]*)"', sheet)
    assert alt is not None and "governing bed joint at" in alt.group(1)
    hc = walls.at["OLD", "critical_water_height_m"]
    assert f"critical water level at {hc:.2f} m" in alt.group(1)
    assert float(_tagged(sheet, "critical.critical_water_height_m")) == pytest.approx(hc, abs=5e-4)
    assert float(_tagged(sheet, "critical.years_to_critical_lean")) == pytest.approx(
        walls.at["OLD", "years_to_critical_lean"], abs=0.05
    )
    assert "a projection, not a prediction" in sheet


@pytest.mark.browser
def test_the_popup_shows_the_new_lines_in_chromium(tmp_path: Path) -> None:
    from tests.browser import browser_page

    wall = worked_wall("OLD", 2.0, material="stone_masonry", foundation_friction_deg=30.0, embedment_m=0.5)
    rows = [_near_toe_wall(), dict(wall, lean_deg=7.0)]
    folder, _ = _run(tmp_path, rows)
    with browser_page() as page:
        errors: list[str] = []
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.goto((folder / "map.html").as_uri())
        page.wait_for_function("window.wallscreenMap !== undefined")
        page.fill("#ws-search-input", "toe")
        page.press("#ws-search-input", "Enter")
        popup = page.locator(".ws-popup")
        popup.wait_for()
        cells = popup.locator("tr[data-case='surveyed'] td").all_inner_texts()
        assert cells[4] == "resultant within 20 mm of the toe"
        page.keyboard.press("Escape")
        page.fill("#ws-search-input", "OLD")
        page.press("#ws-search-input", "Enter")
        page.wait_for_function(
            "document.querySelector('.ws-popup') && "
            "document.querySelector('.ws-popup').innerText.includes('OLD')"
        )
        text = page.locator(".ws-popup").inner_text()
        assert "Resting on suspect data: lean_deg" in text
        assert "Critical water height" in text and "Critical lean" in text
        assert "(Annex D)" in text
        assert not errors
