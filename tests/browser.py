"""Headless Chromium for the map tests: Debian's chromium driven by Playwright, with Leaflet
served from the npm registry's package in place of the CDN, and blank tiles.

Nothing is fetched from the internet: every request that is not Leaflet or a tile is aborted.
"""

from __future__ import annotations

import base64
import shutil
import subprocess
import tarfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest

CACHE = Path(__file__).resolve().parent / ".cache"
LEAFLET_VERSION = "1.9.3"
FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]
# a 1x1 light grey PNG for every tile request
TILE = base64.b64decode(
    "iVBORw0KGgoAAAANSUhEUgAAAAEAAAABCAIAAACQd1PeAAAADElEQVR4nGP4//8/AAX+Av4N70a4AAAAAElFTkSuQmCC"
)


def leaflet_dir() -> Path:
    """Leaflet's dist folder from the npm package (npm pack, cached under tests/.cache)."""
    dist = CACHE / "package" / "dist"
    if (dist / "leaflet.js").exists():
        return dist
    npm = shutil.which("npm")
    if npm is None:
        pytest.skip("npm is needed to fetch Leaflet from the npm registry")
    CACHE.mkdir(exist_ok=True)
    out = subprocess.run(
        [npm, "pack", f"leaflet@{LEAFLET_VERSION}", "--silent"], cwd=CACHE, capture_output=True, text=True
    )
    if out.returncode != 0:
        pytest.skip(f"npm pack leaflet failed: {out.stderr.strip()[:200]}")
    with tarfile.open(CACHE / f"leaflet-{LEAFLET_VERSION}.tgz") as tar:
        tar.extractall(CACHE, filter="data")
    return dist


@contextmanager
def browser_page() -> Iterator[object]:
    """A Playwright page in Debian's chromium with Leaflet and tiles served locally."""
    sync_api = pytest.importorskip("playwright.sync_api")
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    if exe is None:
        pytest.skip("Debian's chromium is not installed (.ci/run installs it)")
    dist = leaflet_dir()

    def route(r) -> None:
        url = r.request.url
        if url.startswith("file://"):
            r.continue_()
        elif url.endswith("/leaflet.js"):
            r.fulfill(body=(dist / "leaflet.js").read_bytes(), content_type="application/javascript")
        elif url.endswith("/leaflet.css"):
            r.fulfill(body=(dist / "leaflet.css").read_bytes(), content_type="text/css")
        elif url.endswith(".png"):
            r.fulfill(body=TILE, content_type="image/png")
        else:
            r.abort()

    with sync_api.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=exe, args=FLAGS)
        page = browser.new_page(viewport={"width": 1400, "height": 900})
        page.route("**/*", route)
        try:
            yield page
        finally:
            browser.close()
