"""The map's first view, its colours and legend, ids kept as written, and a page that says so
when the map library cannot be loaded (headless Chromium, see tests/browser.py)."""

from __future__ import annotations

import itertools
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from screening.cli import app
from screening.outputs.webmap import OVERLAY_COLOUR
from screening.outputs.workbook import BAND_COLOURS, BASE_MAP_LAND
from screening.priority import BANDS
from tests.browser import browser_page
from tests.conftest import worked_wall

runner = CliRunner()
# Paul Tol's "muted" qualitative scheme (P. Tol, "Colour schemes", SRON/EPS/TN/09-002, 2021),
# published as distinct for the common colour-vision deficiencies
TOL_MUTED = {
    "#CC6677",
    "#332288",
    "#DDCC77",
    "#117733",
    "#88CCEE",
    "#882255",
    "#44AA99",
    "#999933",
    "#AA4499",
}


def _luminance(colour: str) -> float:
    # relative luminance, WCAG 2.1 §1.4.3 (definition of relative luminance, sRGB)
    rgb = [int(colour.lstrip("#")[k : k + 2], 16) / 255 for k in (0, 2, 4)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def contrast(a: str, b: str) -> float:
    # contrast ratio (L1 + 0.05) / (L2 + 0.05), WCAG 2.1 definition of contrast ratio
    hi, lo = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


def test_wcag_contrast_formula_against_known_values() -> None:
    # black on white is 21:1 and a colour against itself 1:1 (WCAG 2.1)
    assert contrast("#000000", "#FFFFFF") == pytest.approx(21.0)
    assert contrast("#777777", "#777777") == pytest.approx(1.0)


def test_band_colours_stand_out_on_the_base_map_and_are_colour_blind_safe() -> None:
    # WCAG 2.1 SC 1.4.11 (non-text contrast): at least 3:1 against the adjacent colour
    for band in BANDS:
        assert contrast(BAND_COLOURS[band], BASE_MAP_LAND) >= 3.0, band
    # the four priority bands from Tol's muted scheme; "check the data first" (method.md §13) is a
    # neutral dark grey on purpose, outside the sequence of the bands
    assert {c.upper() for b, c in BAND_COLOURS.items() if b != "check_data"} <= TOL_MUTED
    assert BAND_COLOURS["check_data"].upper() == "#4D4D4D"
    # the workbook writes white on each band colour: readable as large text (3:1, WCAG 2.1)
    assert all(contrast(c, "#FFFFFF") >= 3.0 for c in BAND_COLOURS.values())
    assert len(set(BAND_COLOURS.values())) == len(BANDS)
    for a, b in itertools.combinations(BAND_COLOURS.values(), 2):
        assert a != b


@pytest.fixture(scope="module")
def case_run(tmp_path_factory) -> Path:
    """W1 and w1: two walls whose ids differ only by case; W1 changes between two surveys."""
    tmp = tmp_path_factory.mktemp("ids")
    out, history = tmp / "out", tmp / "history.gpkg"
    for k, lean in enumerate((0.0, 1.5)):
        rows = [
            worked_wall(
                "W1",
                2.0,
                drainage="working",
                lat=53.70,
                lon=-1.90,
                lean_deg=lean,
                survey_date=f"202{k + 4}-05-01",
            ),
            worked_wall("w1", 2.0, drainage="blocked", lat=53.71, lon=-1.95, survey_date=f"202{k + 4}-05-01"),
            worked_wall(
                "X-9", 1.5, drainage="blocked", lat=53.705, lon=-1.92, survey_date=f"202{k + 4}-05-01"
            ),
            worked_wall(
                "Ab", 2.5, drainage="working", lat=53.706, lon=-1.93, survey_date=f"202{k + 4}-05-01"
            ),
            worked_wall(
                "aB", 2.5, drainage="working", lat=53.707, lon=-1.94, survey_date=f"202{k + 4}-05-01"
            ),
        ]
        reg = tmp / f"reg{k}.csv"
        pd.DataFrame(rows).to_csv(reg, index=False)
        result = runner.invoke(app, ["run", str(reg), "-o", str(out), "--history", str(history)])
        assert result.exit_code == 0, result.output
    changes = pd.read_csv(out / "changes.csv")
    assert set(changes.loc[changes.status == "changed", "wall_id"]) == {"W1"}
    return out


# where the overlay's halos are drawn (lat, lon)
HALOS = """(colour) => { const out = [];
  window.wallscreenMap.map.eachLayer(l => { if (l.options && l.options.color === colour && l.getLatLng)
    out.push([l.getLatLng().lat, l.getLatLng().lng]); });
  return out; }"""


def _open(page, folder: Path) -> None:
    page.goto((folder / "map.html").as_uri())
    page.wait_for_function("window.wallscreenMap !== undefined")


@pytest.mark.browser
def test_map_opens_on_the_priority_bands_with_the_overlay_in_the_legend(case_run: Path) -> None:
    walls = pd.read_csv(case_run / "walls.csv").set_index("wall_id")
    with browser_page() as page:
        errors: list[str] = []
        page.on("pageerror", lambda e: errors.append(str(e)))
        _open(page, case_run)
        legend = page.locator(".ws-legend").inner_text()
        assert "Inspection priority" in legend
        assert "Changed since the last run" in legend
        checked = page.locator(".leaflet-control-layers-base input:checked + span").inner_text()
        assert checked.strip() == "Priority band"
        drawn = page.evaluate(
            """() => { const w = window.wallscreenMap; const out = {};
                 const b = w.built['Priority band'].byId;
                 Object.keys(b).forEach(k => out[k] = b[k].options.color); return out; }"""
        )
        assert drawn == {w: BAND_COLOURS[walls.loc[w, "priority_band"]] for w in walls.index}
        strokes = page.eval_on_selector_all(
            "path.leaflet-interactive", "ps => ps.map(p => p.getAttribute('stroke'))"
        )
        assert set(strokes) <= set(BAND_COLOURS.values())
        swatch = page.locator(".ws-legend .ws-overlay .sw").evaluate(
            "e => getComputedStyle(e).backgroundColor"
        )
        rgb = tuple(int(OVERLAY_COLOUR[k : k + 2], 16) for k in (1, 3, 5))
        assert swatch == f"rgb({rgb[0]}, {rgb[1]}, {rgb[2]})"
        page.screenshot(path=str(case_run / "map-bands.png"))
        assert not errors


@pytest.mark.browser
def test_scale_bar_is_not_under_the_info_box(case_run: Path) -> None:
    with browser_page() as page:
        _open(page, case_run)
        scale = page.locator(".leaflet-control-scale").bounding_box()
        info = page.locator("#ws-info").bounding_box()
        assert scale and info
        apart = (
            scale["y"] >= info["y"] + info["height"]
            or info["y"] >= scale["y"] + scale["height"]
            or scale["x"] >= info["x"] + info["width"]
            or info["x"] >= scale["x"] + scale["width"]
        )
        assert apart, (scale, info)


@pytest.mark.browser
def test_ids_differing_by_case_are_two_walls(case_run: Path) -> None:
    with browser_page() as page:
        _open(page, case_run)
        ids = page.evaluate("Object.keys(window.wallscreenMap.built['Priority band'].byId).sort()")
        assert ids == ["Ab", "W1", "X-9", "aB", "w1"]
        for wall in ("W1", "w1"):
            page.fill("#ws-search-input", wall)
            page.press("#ws-search-input", "Enter")
            popup = page.locator(".ws-popup")
            popup.wait_for()
            assert popup.locator("b").first.inner_text() == wall
            page.keyboard.press("Escape")
            page.evaluate("window.wallscreenMap.map.closePopup()")
            page.locator(".ws-popup").wait_for(state="detached", timeout=5000)  # its fade-out
        # ignoring case only when one wall matches: x-9 finds X-9; a case-folded W1 is ambiguous
        page.fill("#ws-search-input", "x-9")
        page.press("#ws-search-input", "Enter")
        page.locator(".ws-popup").wait_for()
        assert page.locator(".ws-popup b").first.inner_text() == "X-9"
        page.evaluate("window.wallscreenMap.map.closePopup()")
        page.fill("#ws-search-input", "ab")
        page.press("#ws-search-input", "Enter")
        assert "differ only by case" in page.locator(".ws-search .msg").inner_text()
        # X-9's popup fades out and none opens for the ambiguous id
        page.locator(".ws-popup").wait_for(state="detached", timeout=5000)
        # the overlay of changed walls: W1 is drawn at W1's place, not at w1's
        halo = page.evaluate(HALOS, OVERLAY_COLOUR)
        assert halo == [], "the overlay is off until switched on"
        page.get_by_text("Changed since the last run").first.click()
        page.wait_for_timeout(200)
        halo = page.evaluate(HALOS, OVERLAY_COLOUR)
        assert halo == [[53.70, -1.90]]  # W1's place; w1 is at (53.71, -1.95)


@pytest.mark.browser
def test_page_says_so_when_the_map_library_cannot_be_loaded(case_run: Path) -> None:
    with browser_page() as page:
        # the CDN unreachable: every request but the page itself fails
        page.unroute("**/*")
        page.route("**/*", lambda r: r.continue_() if r.request.url.startswith("file://") else r.abort())
        page.goto((case_run / "map.html").as_uri())
        note = page.locator("#ws-no-library")
        note.wait_for(timeout=10_000)
        text = note.inner_text()
        assert "could not be loaded" in text and "cdn.jsdelivr.net" in text
        assert "--map-assets-dir" in text and "leaflet.js" in text
        assert note.is_visible()
        page.screenshot(path=str(case_run / "map-no-library.png"))


@pytest.mark.browser
def test_an_open_popup_is_not_under_the_info_box(tmp_path: Path) -> None:
    # the info box is a control above the map's panes: with walls carried from the last run it is
    # tall, and would cover a popup; while a popup is open it keeps its title and caution only
    out, history = tmp_path / "out", tmp_path / "history.gpkg"
    walls = [worked_wall(f"W{k}", 2.0, lat=53.70 + k * 1e-3, lon=-1.90) for k in range(8)]
    for k, rows in enumerate((walls, [dict(w, height_m=0.004) if i < 6 else w for i, w in enumerate(walls)])):
        pd.DataFrame(rows).to_csv(tmp_path / f"r{k}.csv", index=False)
        result = runner.invoke(
            app, ["run", str(tmp_path / f"r{k}.csv"), "-o", str(out), "--history", str(history)]
        )
        assert result.exit_code in (0, 1), result.output
    with browser_page() as page:
        _open(page, out)
        tall = page.locator("#ws-info").bounding_box()
        page.fill("#ws-search-input", "W7")
        page.press("#ws-search-input", "Enter")
        popup = page.locator(".leaflet-popup-content-wrapper")
        popup.wait_for()
        page.wait_for_timeout(500)  # the pan to the popup
        info, box = page.locator("#ws-info").bounding_box(), popup.bounding_box()
        assert tall and info and box

        def overlap(a: dict, b: dict) -> bool:
            return not (
                a["y"] + a["height"] <= b["y"]
                or b["y"] + b["height"] <= a["y"]
                or a["x"] + a["width"] <= b["x"]
                or b["x"] + b["width"] <= a["x"]
            )

        assert box["y"] >= 0  # the popup whole in the window (it pans from where the map arrived)
        assert overlap(tall, box)  # the whole box would have covered the popup
        assert not overlap(info, box), (info, box)
        assert page.locator("#ws-info .ws-caution").is_visible()
        page.locator(".leaflet-popup-close-button").click()
        page.wait_for_timeout(300)
        again = page.locator("#ws-info").bounding_box()
        assert again and again["height"] == pytest.approx(tall["height"], abs=1)
