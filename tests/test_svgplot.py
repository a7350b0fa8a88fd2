"""The calculation sheets' SVG figures: well-formed, to scale, escaped, with round ticks.

Outside checks: XML well-formedness by the standard library's parser (xml.etree); areas by
shapely; the trapezoid and triangle areas and Pythagoras are school geometry. The tick rule
(steps of 1, 2, 2.5 or 5 × 10^k) is common practice in plotting, no source.
"""

from __future__ import annotations

import base64
import math
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import Polygon

from screening.outputs.svgplot import Figure, nice_ticks, tick_text
from tests.conftest import worked_wall

SVG = "{http://www.w3.org/2000/svg}"


def _svg(uri: str) -> ET.Element:
    head, data = uri.split(",", 1)
    assert head == "data:image/svg+xml;base64"
    return ET.fromstring(base64.b64decode(data).decode("utf-8"))


def _points(element: ET.Element) -> list[tuple[float, float]]:
    return [tuple(map(float, p.split(","))) for p in element.attrib["points"].split()]  # type: ignore[misc]


def test_a_panel_maps_its_window_onto_its_box_with_y_up() -> None:
    fig = Figure(400, 300)
    p = fig.panel(50, 20, 300, 200, (0.0, 3.0), (-1.0, 1.0))
    assert (p.x(0.0), p.x(3.0), p.y(1.0), p.y(-1.0)) == (50, 350, 20, 220)
    p.polygon([(0, 0), (3, 0), (3, 1), (0, 1)], "#ff0000")
    root = _svg(fig.data_uri("t"))
    shape = Polygon(_points(root.find(f"{SVG}g/{SVG}polygon")))
    # 300 px over 3 units in x and 200 px over 2 units in y: a 3 × 1 rectangle is 300 × 100 px²
    assert shape.area == pytest.approx(300 * 100)


def test_text_is_escaped_and_the_document_parses() -> None:
    fig = Figure(200, 100)
    p = fig.panel(10, 10, 180, 80, (0, 1), (0, 1))
    p.text(0.5, 0.5, 'A & B <script>"x"</script>')
    p.line([0, 1], [0, 1], "#000000", label="<b>line</b>")
    fig.legend(100, 90)
    raw = base64.b64decode(fig.data_uri("wall <W1> & co").split(",", 1)[1]).decode()
    assert "<script>" not in raw and "<b>" not in raw
    root = ET.fromstring(raw)
    texts = ["".join(t.itertext()) for t in root.iter(f"{SVG}text")]
    assert 'A & B <script>"x"</script>' in texts and "<b>line</b>" in texts
    assert root.find(f"{SVG}title").text == "wall <W1> & co"


def test_dots_draw_one_mark_per_finite_point() -> None:
    fig = Figure(200, 100)
    p = fig.panel(0, 0, 200, 100, (0, 1), (0, 1))
    xs = np.array([0.1, 0.5, np.nan, 0.9, np.inf])
    p.dots(xs, np.array([0.2, 0.4, 0.6, np.nan, 0.5]), "#000000")
    d = _svg(fig.data_uri()).find(f"{SVG}g/{SVG}path").attrib["d"]
    assert d.count("M") == 2 and d.count("h0") == 2


@settings(max_examples=200, deadline=None)
@given(
    st.floats(-1e4, 1e4, allow_nan=False),
    st.floats(1e-3, 1e4, allow_nan=False),
    st.integers(2, 9),
)
def test_ticks_are_round_evenly_spaced_and_inside_the_range(lo: float, span: float, most: int) -> None:
    hi = lo + span
    ticks = nice_ticks(lo, hi, most)
    assert 2 <= ticks.size <= most + 2
    assert ticks[0] >= lo - 1e-9 * span and ticks[-1] <= hi + 1e-9 * span
    steps = np.diff(ticks)
    assert np.allclose(steps, steps[0], rtol=1e-6)
    step = (ticks[-1] - ticks[0]) / (ticks.size - 1)
    mantissa = step / 10 ** math.floor(math.log10(step) + 1e-9)
    assert any(math.isclose(mantissa, m, rel_tol=1e-6) for m in (1, 2, 2.5, 5))
    labels = tick_text(ticks)
    assert len(set(labels)) == len(labels)  # enough decimals to tell every tick apart
    assert all("-" not in s for s in labels)  # negatives carry a minus sign (U+2212)


@pytest.fixture(scope="module")
def section(tmp_path_factory) -> tuple[pd.Series, ET.Element]:
    from screening.config import CASES, Config
    from screening.core.engine import ENGINE_INPUTS, decode, run_cases
    from screening.job import screen_file
    from screening.outputs.sheets import sheet_context

    tmp: Path = tmp_path_factory.mktemp("svg")
    row = worked_wall("W1", 2.4, top_width_m=0.8, front_batter_m=0.3, lean_deg=4.0, crack_height_m=1.2)
    pd.DataFrame([row]).to_csv(tmp / "r.csv", index=False)
    prepared = screen_file(tmp / "r.csv").screening.prepared
    wall = prepared.walls.iloc[0]
    d = decode(
        run_cases({k: prepared.walls[k].to_numpy(float) for k in ENGINE_INPUTS}, Config(), details=True)
    )
    for k in ("_p_base", "_w_base", "_g", "_gs", "_q"):
        d[k] = np.ones(len(CASES))
    j = {case: c for c, case in enumerate(CASES)}
    context = sheet_context(wall, d, j, prepared.assumptions, Config(), [("run", "r")], with_figure=True)
    return wall, _svg(context["figure"])


def test_the_section_is_drawn_to_scale(section: tuple[pd.Series, ET.Element]) -> None:
    wall, root = section
    b, t, h = (float(wall[k]) for k in ("base_width_m", "top_width_m", "height_m"))
    r, f = float(wall["retained_height_m"]), float(wall["front_batter_m"])
    back = b - f - t
    groups = root.findall(f"{SVG}g")
    assert len(groups) == 3  # a panel per case
    for g in groups:
        body, wedge = (Polygon(_points(e)) for e in g.findall(f"{SVG}polygon")[:2])
        # trapezoid (B + T) h / 2 against the triangle of soil on the back, ½ · back · r · (r / h)
        assert body.area / wedge.area == pytest.approx((b + t) * h / 2 / (0.5 * back * r * r / h), rel=0.01)
        # equal scales in x and z: the base (B) against the sloping back (√(back² + h²)), leaned alike
        (x0, y0), (x1, y1), (x2, y2) = _points(g.find(f"{SVG}polygon"))[:3]
        base, slope = math.hypot(x1 - x0, y1 - y0), math.hypot(x2 - x1, y2 - y1)
        assert base / slope == pytest.approx(b / math.hypot(back, h), rel=0.01)
        # the lean: the base turned by lean_deg (y down in SVG, so an outward lean shows as -dy)
        assert math.degrees(math.atan2(-(y1 - y0), x1 - x0)) == pytest.approx(float(wall["lean_deg"]), abs=0.2)
    labels = ["".join(e.itertext()) for e in root.iter(f"{SVG}text")]
    assert {"wall", "soil carried", "known crack", "base pressure"} <= set(labels)  # the legend
    assert sum(s.startswith(("drained:", "blocked:", "surveyed:")) for s in labels) == 3
