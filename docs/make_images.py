"""Regenerate the README's pictures from a demo run (all produced by the tool itself).

Usage: ``wallscreen demo --out maps && python docs/make_images.py maps``. Needs Debian's
chromium (map screenshot, through the test harness that serves Leaflet from the npm
registry), LibreOffice with poppler-utils (workbook render) and Debian's python3-qgis (the
GeoPackage as QGIS draws it).
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from tests.browser import browser_page  # noqa: E402

OUT = ROOT / "docs" / "images"


def map_screenshot(run: Path) -> None:
    with browser_page() as page:
        page.goto((run / "map.html").as_uri())
        page.wait_for_function("window.wallscreenMap !== undefined")
        page.wait_for_timeout(500)
        page.screenshot(path=str(OUT / "map.png"))
        page.get_by_text("Priority band").click()
        page.wait_for_timeout(300)
        page.screenshot(path=str(OUT / "map_bands.png"))
        page.get_by_text("Worst case").click()
        import pandas as pd

        first = str(pd.read_csv(run / "walls.csv", dtype={"wall_id": str})["wall_id"].iloc[0])
        page.fill("#ws-search-input", first)
        page.press("#ws-search-input", "Enter")
        page.wait_for_timeout(600)
        page.screenshot(path=str(OUT / "map_popup.png"))


def sheet_figure(run: Path) -> None:
    import pandas as pd

    from screening.outputs import sheet_filename

    walls = pd.read_csv(run / "walls.csv")
    cracked = walls[walls["crack_height_m"].notna()]
    first = str((cracked if len(cracked) else walls)["wall_id"].iloc[0])  # the highest-ranked cracked wall

    # the sheet's first figure (SVG): the section in the three cases, as Chromium draws it
    with browser_page() as page:
        page.goto((run / "sheets" / sheet_filename(first)).as_uri())
        page.locator("img.fig").first.screenshot(path=str(OUT / "sheet_figure.png"))


def workbook_render(run: Path) -> None:
    soffice = shutil.which("soffice") or shutil.which("libreoffice")
    if not soffice:
        print("LibreOffice not found: workbook picture skipped")
        return
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run(
            [soffice, "--headless", "--convert-to", "pdf", "--outdir", tmp, str(run / "report.xlsx")],
            check=True,
            capture_output=True,
        )
        pdf = Path(tmp) / "report.pdf"
        text = subprocess.run(["pdftotext", str(pdf), "-"], capture_output=True, text=True).stdout
        pages = text.split("\f")
        page = next(i for i, p in enumerate(pages, start=1) if "walls to look at first" in p)
        subprocess.run(
            [
                "pdftoppm",
                "-png",
                "-r",
                "160",
                "-f",
                str(page),
                "-l",
                str(page),
                str(pdf),
                str(Path(tmp) / "wb"),
            ],
            check=True,
        )
        from PIL import Image

        image = Image.open(next(Path(tmp).glob("wb*.png")))
        w, h = image.size
        image.crop((int(0.05 * w), int(0.07 * h), int(0.97 * w), int(0.30 * h))).save(OUT / "workbook.png")


def qgis_render(run: Path) -> None:
    """walls.gpkg as Debian's QGIS draws it with the style it opens with (tests/qgis_check.py)."""
    import os

    with tempfile.TemporaryDirectory() as tmp:
        png = Path(tmp) / "qgis.png"
        env = dict(os.environ, QT_QPA_PLATFORM="offscreen", XDG_RUNTIME_DIR=tmp)
        subprocess.run(
            ["/usr/bin/python3", str(ROOT / "tests" / "qgis_check.py"), str(run / "walls.gpkg"), str(png),
             "600", "The sample's walls.gpkg in QGIS: the saved default style, by priority band"],
            check=True, env=env, stdout=subprocess.DEVNULL,
        )  # fmt: skip
        shutil.copyfile(png, OUT / "qgis.png")


if __name__ == "__main__":
    run = Path(sys.argv[1] if len(sys.argv) > 1 else "maps")
    OUT.mkdir(parents=True, exist_ok=True)
    map_screenshot(run)
    sheet_figure(run)
    workbook_render(run)
    qgis_render(run)
    print(f"pictures written to {OUT}")
