"""The outputs a person opens: the workbook, the web map, the calculation sheets, the GIS layer.

Each module takes finished tables and writes one file atomically; none computes engineering
results. This package's own namespace stays light (no folium or xlsxwriter at
import), so that the names shared between outputs live here.
"""

from __future__ import annotations

import hashlib
import re


def sheet_filename(wall_id: str) -> str:
    """A safe, unique file name for a wall's calculation sheet."""
    slug = re.sub(r"[^A-Za-z0-9_-]+", "_", wall_id).strip("_")[:40] or "wall"
    digest = hashlib.sha1(wall_id.encode("utf-8")).hexdigest()[:8]
    return f"{slug}-{digest}.html"
