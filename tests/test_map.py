"""The risk map: data, escaping, and a real render in headless Chromium."""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from importlib import resources
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from screening.cli import app
from screening.outputs.webmap import (
    OVERTURNS_COLOUR,
    PF_CHECK_DATA,
    PF_CLASSES,
    margin_class,
    margin_colours,
    page_file,
    pf_class,
    pf_colours,
)
from tests.browser import browser_page, leaflet_dir
from tests.conftest import worked_wall

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_inventory"
EVIL = "<script>window.__pwned = 1; alert(1)</script>"


@pytest.fixture(scope="module")
def sample_run(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("sample") / "out"
    result = runner.invoke(
        app, ["run", str(SAMPLE / "register_2026.xlsx"), "-m", str(SAMPLE / "mapping.toml"), "-o", str(out)]
    )
    assert result.exit_code == 1, result.output  # the sample has deliberate mistakes
    return out


@pytest.fixture(scope="module")
def evil_run(tmp_path_factory) -> Path:
    tmp = tmp_path_factory.mktemp("evil")
    rows = [
        worked_wall(EVIL, 2.0, name='<img src=x onerror="window.__pwned=2">', lat=53.72, lon=-1.94),
        worked_wall(
            "W-2",
            2.5,
            name="Safe & sound",
            lat=53.721,
            lon=-1.941,
            drainage="working",
            geometry="LINESTRING (-1.9412 53.7212, -1.9405 53.7215)",
        ),
        worked_wall("NOWHERE", 2.5),
    ]
    pd.DataFrame(rows).to_csv(tmp / "evil.csv", index=False)
    out = tmp / "out"
    result = runner.invoke(app, ["run", str(tmp / "evil.csv"), "-o", str(out)])
    assert result.exit_code == 0, result.output
    return out


def _data(html: str) -> dict:
    # the walls, column-wise, from the config the page sets for webmap.js
    match = re.search(r"window\.wallscreenConfig = (\{.*?\});\n", html, re.S)
    assert match
    return json.loads(match.group(1))["data"]


def test_margin_classes_follow_utilisation() -> None:
    # the colour scale's edges (0.8, 1.0, 1.5) and the overturning state
    u = np.array([0.1, 0.8, 0.81, 1.0, 1.2, 1.5, 7.0, np.inf])
    states = ["within_middle_third"] * 7 + ["resultant_outside_base"]
    assert margin_class(u, states).tolist() == [0, 0, 1, 1, 2, 2, 3, 4]
    assert margin_colours()[4] == OVERTURNS_COLOUR


def test_every_located_wall_is_in_the_map_data(sample_run: Path) -> None:
    walls = pd.read_csv(sample_run / "walls.csv")
    data = _data((sample_run / "map.html").read_text())
    assert set(data["id"]) == set(walls.loc[walls.located, "wall_id"])
    assert (~walls.located).sum() == 1  # HV-110 has no location in the sample
    vertices = np.diff(data["off"]) // 2
    assert set(vertices) >= {1, 3}  # points for some walls, lines for most
    assert (vertices == 1).sum() < (vertices > 1).sum()


def test_register_text_is_escaped_in_the_page(evil_run: Path) -> None:
    html = (evil_run / "map.html").read_text()
    assert "<script>window.__pwned" not in html
    assert "<img src=x" not in html
    data = _data(html)
    assert set(data["id"]) == {EVIL, "W-2"}
    assert "1 without a location" in html


def test_no_external_resources_with_inlined_assets(evil_run: Path, tmp_path: Path) -> None:
    dist = leaflet_dir()
    result = runner.invoke(app, ["map", str(evil_run), "--map-assets-dir", str(dist)])
    assert result.exit_code == 0, result.output
    html = (evil_run / "map.html").read_text()
    assert "cdn.jsdelivr" not in html and "<script src=" not in html
    result = runner.invoke(
        app, ["map", str(evil_run), "--map-assets-url", "https://intranet.example/leaflet"]
    )
    html = (evil_run / "map.html").read_text()
    assert 'src="https://intranet.example/leaflet/leaflet.js"' in html


def test_shipped_script_is_plain_javascript() -> None:
    # webmap.js is a real file, not a template with placeholders: node parses it as it stands
    node = shutil.which("node")
    if node is None:
        pytest.skip("node is needed to check webmap.js")
    with resources.as_file(resources.files("screening.outputs") / "webmap.js") as path:
        out = subprocess.run([node, "--check", str(path)], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr


def test_page_inlines_the_shipped_files_after_its_config(evil_run: Path) -> None:
    html = (evil_run / "map.html").read_text()
    script, style = page_file("webmap.js"), page_file("webmap.css")
    assert "__DATA__" not in script and script in html and style in html
    assert html.index("window.wallscreenConfig = ") < html.index(script)


@pytest.mark.browser
def test_sample_map_renders_in_chromium(sample_run: Path) -> None:
    walls = pd.read_csv(sample_run / "walls.csv").set_index("wall_id")
    results = pd.read_csv(sample_run / "results.csv")
    worst = results.merge(
        walls[["worst_case"]], left_on=["wall_id", "case"], right_on=["wall_id", "worst_case"]
    )
    expected = dict(
        zip(
            worst.wall_id,
            np.array(margin_colours())[margin_class(worst.utilisation, worst.state)],
            strict=True,
        )
    )
    with browser_page() as page:
        errors: list[str] = []
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.goto((sample_run / "map.html").as_uri())
        page.wait_for_function("window.wallscreenMap !== undefined")
        page.get_by_text("Worst case").click()  # the map opens on the priority bands
        page.wait_for_timeout(200)
        # every located wall is drawn: one SVG path each
        drawn = page.evaluate(
            """() => { const out = {}; const w = window.wallscreenMap;
                const b = w.built['Worst case'].byId;
                Object.keys(b).forEach(k => { const id = w.data.id[b[k].wsIndex];
                  out[id] = (b[k]._path && b[k]._path.isConnected) ? b[k].options.color : null; });
                return out; }"""
        )
        assert set(drawn) == set(walls.index[walls.located])
        assert page.locator("path.leaflet-interactive").count() == int(walls.located.sum())
        # the colours follow the margins
        assert all(drawn[w] is not None for w in drawn)
        assert {w: c.upper() for w, c in drawn.items()} == {w: expected[w].upper() for w in drawn}
        # the stroke actually painted matches too, for a sample of paths
        strokes = page.eval_on_selector_all(
            "path.leaflet-interactive", "ps => ps.map(p => p.getAttribute('stroke'))"
        )
        assert {s.upper() for s in strokes} <= {c.upper() for c in margin_colours()}
        # search finds a wall by id and opens its popup with the right figures
        first = walls.index[walls.located][0]
        page.fill("#ws-search-input", first.lower())
        page.press("#ws-search-input", "Enter")
        popup = page.locator(".ws-popup")
        popup.wait_for()
        assert first in popup.inner_text()
        row = results[(results.wall_id == first) & (results.case == "drained")].iloc[0]
        cells = popup.locator("tr[data-case='drained'] td").all_inner_texts()
        assert cells[1] == f"{row.utilisation:.2f}" or (np.isinf(row.utilisation) and cells[1] == "∞")
        assert cells[5] == f"{row.fos_sliding:.2f}"
        assert cells[6] == f"{row.fos_overturning:.2f}"
        # the priority view recolours by band
        page.get_by_text("Priority band").click()
        page.wait_for_timeout(200)
        assert "Inspection priority" in page.locator(".ws-legend").inner_text()
        page.get_by_text("Worst case").click()
        page.screenshot(path=str(sample_run / "map.png"))
        assert not errors


@pytest.mark.browser
def test_register_script_never_runs(evil_run: Path) -> None:
    with browser_page() as page:
        dialogs: list[str] = []
        page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
        page.goto((evil_run / "map.html").as_uri())
        page.wait_for_function("window.wallscreenMap !== undefined")
        page.fill("#ws-search-input", EVIL)
        page.press("#ws-search-input", "Enter")
        popup = page.locator(".ws-popup")
        popup.wait_for()
        assert EVIL in popup.inner_text()  # shown as text
        page.wait_for_timeout(300)
        assert page.evaluate("window.__pwned") is None
        assert not dialogs


@pytest.mark.browser
def test_inlined_map_opens_with_every_request_blocked(evil_run: Path) -> None:
    runner.invoke(app, ["map", str(evil_run), "--map-assets-dir", str(leaflet_dir())])
    with browser_page() as page:
        page.unroute("**/*")
        page.route("**/*", lambda r: r.continue_() if r.request.url.startswith("file://") else r.abort())
        page.goto((evil_run / "map.html").as_uri())
        page.wait_for_function("window.wallscreenMap !== undefined")
        assert page.evaluate("window.wallscreenMap.count") == 2


def _contrast(a: str, b: str) -> float:
    # WCAG 2.x contrast ratio (W3C, "Web Content Accessibility Guidelines 2.1", relative luminance)
    def lum(h: str) -> float:
        c = [int(h[i : i + 2], 16) / 255 for i in (1, 3, 5)]
        c = [x / 12.92 if x <= 0.03928 else ((x + 0.055) / 1.055) ** 2.4 for x in c]
        return 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2]

    hi, lo = sorted((lum(a), lum(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


def test_probability_colours_contrast_with_the_land() -> None:
    # WCAG 2.1 SC 1.4.11: non-text contrast of at least 3:1 against the land colour #F2EFE9
    for colour in pf_colours():
        assert _contrast(colour, "#F2EFE9") >= 3.0, colour
    assert len(set(pf_colours())) == len(pf_colours())


def _lab(hex_colour: str) -> np.ndarray:
    # CIE 1976 L*a*b* from sRGB (IEC 61966-2-1 transfer, D65 white), the standard definitions
    c = np.array([int(hex_colour[i : i + 2], 16) / 255 for i in (1, 3, 5)])
    c = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    m = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]])
    xyz = m @ c / np.array([0.95047, 1.0, 1.08883])
    f = np.where(xyz > (6 / 29) ** 3, np.cbrt(xyz), xyz / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def test_check_the_data_stands_apart_from_every_probability_class() -> None:
    # CIE76 colour difference: ΔE*ab above about 10 is plainly visible (common practice, no source)
    other = [c for c in pf_colours() if c != PF_CHECK_DATA[0]]
    for colour in other:
        assert np.linalg.norm(_lab(PF_CHECK_DATA[0]) - _lab(colour)) > 25, colour
    assert np.allclose(_lab("#FFFFFF"), [100, 0, 0], atol=0.05)  # the reference white


def test_probability_classes_follow_p_failure() -> None:
    p = [0.0, 0.0099, 0.01, 0.05, 0.1, 0.49, 0.5, 0.9, float("nan"), 0.2]
    bad = [False] * 9 + [True]
    assert pf_class(p, bad).tolist() == [0, 0, 1, 1, 2, 2, 3, 3, len(PF_CLASSES) + 1, len(PF_CLASSES)]


@pytest.mark.browser
def test_probability_view_colours_each_wall_by_its_class(sample_run: Path) -> None:
    walls = pd.read_csv(sample_run / "walls.csv").set_index("wall_id")
    worst = walls[[f"p_failure_{c}" for c in ("drained", "blocked", "surveyed")]].max(axis=1, skipna=True)
    expected = dict(
        zip(walls.index, np.array(pf_colours())[pf_class(worst, walls.data_inconsistent)], strict=True)
    )
    assert walls.data_inconsistent.astype(str).str.lower().eq("true").any()  # the sample has one by design
    with browser_page() as page:
        errors: list[str] = []
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.goto((sample_run / "map.html").as_uri())
        page.wait_for_function("window.wallscreenMap !== undefined")
        page.get_by_text("Probability of failure").click()
        page.wait_for_timeout(200)
        drawn = page.evaluate(
            """() => { const out = {}; const w = window.wallscreenMap;
                const b = w.built['Probability of failure'].byId;
                Object.keys(b).forEach(k => { out[w.data.id[b[k].wsIndex]] = b[k].options.color; });
                return out; }"""
        )
        assert set(drawn) == set(walls.index[walls.located])
        assert {w: c.upper() for w, c in drawn.items()} == {w: expected[w].upper() for w in drawn}
        legend = page.locator(".ws-legend").inner_text()
        assert "under 1 in 100" in legend and "check the data first" in legend
        first = walls.index[walls.located][0]
        page.fill("#ws-search-input", first)
        page.press("#ws-search-input", "Enter")
        line = page.locator(".ws-popup .ws-pf")
        line.wait_for()
        assert "P(failure | stands today)" in line.inner_text()
        page.screenshot(path=str(sample_run / "map_pf.png"))
        assert not errors


def test_repeated_texts_are_written_once_as_codes() -> None:
    from screening.outputs.webmap import coded_lines

    lines = [["", "Drainage not recorded", "", "Drainage not recorded"], ["a", "", "b", "a"]]
    codes, texts = coded_lines(lines)
    assert texts[0] == ""  # code 0 is the empty text, which the page skips
    assert [[texts[c] for c in row] for row in codes] == lines
    assert len(texts) == 4  # "", "Drainage not recorded", "a", "b": each once
    assert coded_lines([[]]) == ([[]], [""])


def test_reason_lines_come_back_whole_from_their_clause_codes() -> None:
    from screening.outputs.webmap import _coded_reasons

    reasons = pd.Series(["a; condition 4", "condition 4", "", None, "x;y; a"])
    got = _coded_reasons(reasons)
    back = ["; ".join(got["reasonText"][c] for c in codes) for codes in got["reason"]]
    assert back == ["a; condition 4", "condition 4", "", "", "x;y; a"]
    assert got["reasonText"].count("condition 4") == 1
