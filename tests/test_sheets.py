"""Calculation sheets: every number equals the engine's, crack and lean shown, self-contained."""

from __future__ import annotations

import html
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from screening.cli import app
from screening.outputs import sheet_filename
from screening.outputs.sheets import draws_alt, figure_case_and_driver
from screening.pipeline import RESULT_COLUMNS
from tests.conftest import worked_wall

runner = CliRunner()
SPAN = re.compile(r'<span class="v" data-key="([^"]+)">([^<]+)</span>')


@pytest.fixture(scope="module")
def sheet_run(tmp_path_factory) -> Path:
    tmp = tmp_path_factory.mktemp("sheets")
    rows = [
        worked_wall(
            "CRACKED",
            1.8,
            front_batter_m=0.3,
            top_width_m=0.9,
            crack_height_m=1.2,
            lean_deg=2.5,
            drainage="partial",
            surcharge_kpa=10.0,
            wall_friction_deg=15.0,
            material="stone_masonry",
            lat=53.7,
            lon=-1.9,
        ),
        worked_wall("PLAIN", 2.5, drainage="working", lat=53.701, lon=-1.9),
        worked_wall(
            "B15", 1.5, drainage="blocked", lat=53.702, lon=-1.9
        ),  # resultant outside the base when blocked
    ]
    pd.DataFrame(rows).to_csv(tmp / "reg.csv", index=False)
    out = tmp / "out"
    result = runner.invoke(app, ["run", str(tmp / "reg.csv"), "-o", str(out), "--sheets"])
    assert result.exit_code == 0, result.output
    return out


def _values(path: Path) -> dict[str, str]:
    return dict(SPAN.findall(path.read_text()))


def _shown(value: float, digits: int) -> str:
    if np.isinf(value):
        return "∞"
    if np.isnan(value):
        return "–"
    return f"{value:.{digits}f}"


def test_every_number_equals_the_engine_result(sheet_run: Path) -> None:
    # the full doubles (results.csv rounds to the decimals of each unit)
    results = pd.read_parquet(sheet_run / "results.parquet")
    sheets = sorted((sheet_run / "sheets").glob("*.html"))
    assert sheets
    checked = 0
    for path in sheets:
        values = _values(path)
        wall = next(w for w in results.wall_id.unique() if sheet_filename(w) == path.name)
        for key, text in values.items():
            case, _, col = key.partition(".")
            if case not in ("drained", "blocked", "surveyed") or col not in RESULT_COLUMNS:
                continue
            value = float(results.loc[(results.wall_id == wall) & (results.case == case), col].iloc[0])
            digits = len(text.split(".")[1]) if "." in text else 0
            assert text == _shown(value, digits), (wall, key)
            checked += 1
    assert checked > 100


def test_flagged_walls_have_sheets_and_links(sheet_run: Path) -> None:
    results = pd.read_csv(sheet_run / "results.csv")
    flagged = set(results.loc[~results.in_middle_third | (results.bearing_utilisation > 1), "wall_id"])
    names = {p.name for p in (sheet_run / "sheets").glob("*.html")}
    assert names == {sheet_filename(w) for w in flagged}
    html = (sheet_run / "map.html").read_text()
    for w in flagged:
        assert f"sheets/{sheet_filename(w)}" in html
    import openpyxl

    ranked = openpyxl.load_workbook(sheet_run / "report.xlsx")["Ranked walls"]
    headers = [c.value for c in ranked[1]]
    col = headers.index("Calculation sheet")
    # xlsxwriter writes relative file links with backslashes, which Excel resolves on every platform
    links = {
        row[1].value: row[col].hyperlink.target.replace("\\", "/")
        for row in ranked.iter_rows(min_row=2)
        if row[col].hyperlink
    }
    assert links == {w: f"sheets/{sheet_filename(w)}" for w in flagged}


def test_crack_and_lean_are_shown(sheet_run: Path) -> None:
    page = (sheet_run / "sheets" / sheet_filename("CRACKED")).read_text()
    values = _values(sheet_run / "sheets" / sheet_filename("CRACKED"))
    assert values["input.lean_deg"] == "2.500"
    assert "Part above the crack" in page and "z<sub>c</sub> = 1.20 m" in page
    assert "blocked.crack_fos_sliding" in values
    assert "x cos ω − z sin ω" in page
    assert "qualified engineer" in page
    assert '<p class="name"></p>' in page  # no name recorded: nothing shown (not "nan")


def test_overturning_wall_is_explained_as_such(sheet_run: Path) -> None:
    page = (sheet_run / "sheets" / sheet_filename("B15")).read_text()
    assert "the resultant falls outside the base" in page
    assert _values(sheet_run / "sheets" / sheet_filename("B15"))["blocked.toe_pressure_kpa"] == "∞"


def test_sheet_has_no_external_resources(sheet_run: Path) -> None:
    for path in (sheet_run / "sheets").glob("*.html"):
        page = path.read_text()
        assert not re.search(r'(src|href)\s*=\s*["\'](https?:)?//', page)
        assert "url(http" not in page and "@import" not in page
        assert 'src="data:image/svg+xml;base64,' in page or "src='data:image/svg+xml;base64," in page


def test_explain_command_names_unknown_and_rejected_walls(tmp_path: Path) -> None:
    pd.DataFrame([worked_wall("A", 2.0), worked_wall("BAD", 2.0, top_width_m=3.0)]).to_csv(
        tmp_path / "r.csv", index=False
    )
    result = runner.invoke(app, ["explain", str(tmp_path / "r.csv"), "A", "-o", str(tmp_path / "o")])
    assert result.exit_code == 0, result.output
    assert (tmp_path / "o" / "sheets" / sheet_filename("A")).exists()
    result = runner.invoke(app, ["explain", str(tmp_path / "r.csv"), "BAD", "ZZZ", "-o", str(tmp_path / "o")])
    assert result.exit_code == 2
    assert "BAD (rejected" in result.output and "ZZZ (not in the register)" in result.output


def test_register_text_appears_only_escaped(tmp_path: Path) -> None:
    wid, name = "<script>alert(1)</script>", "<script>alert(2)</script> & <b>co</b>"
    pd.DataFrame([worked_wall(wid, 2.0, name=name, drainage="partial")]).to_csv(
        tmp_path / "r.csv", index=False
    )
    result = runner.invoke(app, ["explain", str(tmp_path / "r.csv"), wid, "-o", str(tmp_path / "o")])
    assert result.exit_code == 0, result.output
    page = (tmp_path / "o" / "sheets" / sheet_filename(wid)).read_text()
    assert "<script" not in page and "<b>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page  # title and heading
    assert "&lt;script&gt;alert(2)&lt;/script&gt; &amp; &lt;b&gt;co&lt;/b&gt;" in page
    assert "qualified engineer" in page


def test_the_page_content_is_plain_data(tmp_path: Path) -> None:
    """The context handed to the template holds no markup: every tag is in sheet.html.j2."""
    from screening.config import CASES, Config
    from screening.core.engine import ENGINE_INPUTS, decode, run_cases
    from screening.job import screen_file
    from screening.outputs.sheets import sheet_context

    pd.DataFrame([worked_wall("W1", 1.8, crack_height_m=1.2, drainage="partial")]).to_csv(
        tmp_path / "r.csv", index=False
    )
    prepared = screen_file(tmp_path / "r.csv").screening.prepared
    wall = prepared.walls.iloc[0]
    d = decode(
        run_cases({k: prepared.walls[k].to_numpy(float) for k in ENGINE_INPUTS}, Config(), details=True)
    )
    for k in ("_p_base", "_w_base", "_g", "_gs", "_q"):
        d[k] = np.zeros(len(CASES))  # the figure's extras (write_sheets fills them)
    j = {case: c for c, case in enumerate(CASES)}
    context = sheet_context(wall, d, j, prepared.assumptions, Config(), [("run", "r")], with_figure=True)

    def strings(node: object) -> list[str]:
        if isinstance(node, dict):
            return [s for v in node.values() for s in strings(v)]
        if isinstance(node, list | tuple):
            return [s for v in node for s in strings(v)]
        return [node] if isinstance(node, str) else []

    found = strings(context)
    assert len(found) > 150 and context["figure"].startswith("data:image/svg+xml;base64,")
    assert context["cases"][1]["crack"] is not None  # the crack plane is checked when blocked
    assert not [s for s in found if "<" in s or ">" in s]


def test_sheets_report_a_count_as_they_are_written(tmp_path: Path) -> None:
    # the progress display said nothing for the whole of the sheets step: it must count them
    from screening import evaluate
    from screening.config import Config
    from screening.outputs.sheets import write_sheets

    rows = [worked_wall(f"W{k}", 1.5 + 0.1 * k, drainage="blocked") for k in range(9)]
    run = evaluate(pd.DataFrame(rows), Config(samples=0))
    heard: list[str] = []
    ids = [r["wall_id"] for r in rows]
    written = write_sheets(
        run.prepared.walls, run.prepared.assumptions, ids, tmp_path, run.config, [], False, heard.append
    )
    assert sorted(written) == sorted(ids)
    assert heard == [f"calculation sheet {k} of 9" for k in range(1, 10)]


def test_sheet_shows_the_draws_with_samples_on(sheet_run: Path) -> None:
    # the default run draws samples (method.md §13): the figure and the plain-words caption are there
    page = (sheet_run / "sheets" / sheet_filename("PLAIN")).read_text(encoding="utf-8")
    block = page.split('<figure class="draws">', 1)[1].split("</figure>", 1)[0]
    assert 'src="data:image/svg+xml;base64,' in block
    assert "conditional on the model" in block and "not a substitute for inspection" in block


def test_the_draws_figure_shows_the_results_worst_case_and_its_driver(sheet_run: Path) -> None:
    # the figure follows results.csv (the case of highest p_failure and that case's driver), so the
    # sheet never tells a different story from the reason line; its alternative text says both
    results = pd.read_parquet(sheet_run / "results.parquet")
    checked = 0
    for wall, rows in results.groupby("wall_id", observed=True):
        path = sheet_run / "sheets" / sheet_filename(str(wall))
        if not path.exists():
            continue
        rows = rows.assign(u=rows["utilisation"].replace(np.inf, 1e300))
        top = rows.sort_values(["p_failure", "u"], ascending=False, kind="stable").iloc[0]
        page = path.read_text(encoding="utf-8")
        alt = page.split('<figure class="draws"><img class="fig" alt="', 1)[1].split('"', 1)[0]
        assert alt == html.escape(draws_alt(str(top["case"]), str(top["driver"] or ""))), wall
        checked += 1
    assert checked >= 3


def test_figure_case_and_driver_picks_the_highest_probability() -> None:
    results = pd.DataFrame(
        {
            "wall_id": ["A"] * 3 + ["B"] * 3,
            "case": ["drained", "blocked", "surveyed"] * 2,
            "p_failure": [0.1, 0.4, 0.4, 0.0, 0.0, 0.0],
            "utilisation": [0.5, 0.9, 1.2, 0.3, np.inf, 0.4],
            "driver": ["soil_friction_deg", "base_friction_deg", "water_height_m", "", "", ""],
        }
    )
    got = figure_case_and_driver(results)
    # a tie in p_failure goes to the higher utilisation; an infinite one (outside the base) is highest
    assert got == {"A": ("surveyed", "water_height_m"), "B": ("blocked", "")}
    assert "water height" in draws_alt("surveyed", "water_height_m")
    assert draws_alt("blocked", "").endswith("and no driver")


def test_sheet_has_no_draws_with_samples_off(tmp_path: Path) -> None:
    pd.DataFrame([worked_wall("A", 2.0)]).to_csv(tmp_path / "r.csv", index=False)
    out = tmp_path / "o"
    result = runner.invoke(
        app, ["run", str(tmp_path / "r.csv"), "-o", str(out), "--sheets", "--samples", "0"]
    )
    assert result.exit_code == 0, result.output
    page = (out / "sheets" / sheet_filename("A")).read_text(encoding="utf-8")
    assert 'class="fig"' in page  # the sheet's own figure is still drawn
    assert 'class="draws"' not in page and "conditional on the model" not in page
