"""Section properties against shapely (GEOS) geometry."""

from __future__ import annotations

import numpy as np
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from screening.core.section import back_wedge, lever_after_lean, wall_section

dims = st.tuples(
    st.floats(0.5, 8.0),  # H
    st.floats(0.3, 4.0),  # B
    st.floats(0.05, 1.0),  # t as a fraction of B
    st.floats(0.0, 1.0),  # f as a fraction of B - t
)


@settings(max_examples=80, deadline=None)
@given(dims)
def test_wall_section_matches_shapely(d) -> None:
    h, b, tf, ff = d
    t = tf * b
    f = ff * (b - t)
    area, xc, zc = wall_section(h, b, t, f)
    poly = shapely.Polygon([(0, 0), (b, 0), (f + t, h), (f, h)])
    assert_allclose(area, poly.area, rtol=1e-9)
    assert_allclose([xc, zc], [poly.centroid.x, poly.centroid.y], rtol=1e-9, atol=1e-12)


@settings(max_examples=60, deadline=None)
@given(dims, st.floats(0.1, 1.0), st.floats(0.0, 1.0))
def test_back_wedge_matches_shapely(d, rfrac, wfrac) -> None:
    h, b, tf, ff = d
    t = tf * b
    f = ff * (b - t)
    back = b - f - t
    r = rfrac * h
    hw = wfrac * r
    g, gsat = 18.0, 21.0
    weight, x, z = back_wedge(h, b, back, r, hw, g, gsat)
    wedge = shapely.Polygon([(b, 0), (b, r), (b - back * r / h, r)])
    if wedge.area < 1e-9:
        assert weight < 1e-6
        return
    below = wedge.intersection(shapely.box(-1, -1, b + 1, hw)) if hw > 0 else shapely.Polygon()
    above = wedge.difference(below) if hw > 0 else wedge
    ref_w = g * above.area + gsat * below.area
    assert_allclose(weight, ref_w, rtol=1e-9, atol=1e-9)
    parts = [(gam * part.area, part.centroid) for gam, part in ((g, above), (gsat, below)) if part.area > 0]
    ref_x = sum(w * c.x for w, c in parts) / ref_w
    ref_z = sum(w * c.y for w, c in parts) / ref_w
    assert_allclose([x, z], [ref_x, ref_z], rtol=1e-7)


def test_lean_lever_matches_shapely_rotation() -> None:
    # rotating the section about the toe with shapely moves the centroid to x cos ω − z sin ω
    poly = shapely.Polygon([(0, 0), (1.6, 0), (0.9, 3.0), (0.3, 3.0)])
    _area, xc, zc = wall_section(3.0, 1.6, 0.6, 0.3)
    for lean in (-3.0, 0.0, 2.5, 7.0):
        # positive lean moves the top towards the toe (x = 0): a counter-clockwise turn
        turned = shapely.affinity.rotate(poly, lean, origin=(0, 0))
        assert_allclose(lever_after_lean(xc, zc, lean), turned.centroid.x, rtol=1e-9, atol=1e-12)


def test_vectorised_over_many_walls() -> None:
    rng = np.random.default_rng(1)
    h = rng.uniform(1, 6, 1000)
    b = rng.uniform(0.5, 3, 1000)
    area, _xc, _zc = wall_section(h, b, 0.4 * b, 0.1 * b)
    assert area.shape == (1000,)
    assert_allclose(area, h * (b + 0.4 * b) / 2)
