"""Every bed joint of a masonry wall (method.md §8): against the crack check, shapely, a hand
calculation with the NAVFAC joint friction, and the identities that must hold."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from screening import Config, screen
from screening.core import section
from screening.core.engine import crack_section, joint_heights, run_cases
from screening.prepare import prepare
from tests.conftest import worked_wall
from tests.test_engine import _random_register

JOINT_UTILS = ["joint_middle_third_utilisation", "joint_sliding_utilisation", "joint_overturning_utilisation"]


def test_one_joint_at_mid_height_is_the_crack_check_at_that_height() -> None:
    # method.md §8: each plane is checked exactly as the crack plane of §5; with N = 2 the one
    # plane is at H/2, so a crack recorded at H/2 must give identical utilisations
    reg = _random_register(200, seed=21).assign(
        material="stone_masonry", crack_height_m=lambda d: d.height_m / 2
    )
    res = screen(reg, Config(joint_planes=2))
    assert_allclose(res.joint_height_m, reg.height_m.repeat(3).to_numpy() / 2)
    assert_allclose(res.joint_middle_third_utilisation, res.crack_middle_third_utilisation, rtol=1e-14)
    req_s, req_o = Config().fos_sliding_required, Config().fos_overturning_required
    assert_allclose(res.joint_sliding_utilisation, req_s / res.crack_fos_sliding, rtol=1e-14)
    assert_allclose(res.joint_overturning_utilisation, req_o / res.crack_fos_overturning, rtol=1e-14)


def test_every_cut_has_the_geometry_shapely_gives() -> None:
    # the part above each plane z_k = k·H/N is the wall polygon clipped at z_k (shapely, GEOS),
    # moved down by z_k and back by the front batter below it: same area and centroid
    p = prepare(_random_register(60, seed=4)).inputs
    n = len(p["height_m"])
    z = joint_heights(p["height_m"], 10)
    cut = crack_section(p | {"crack_height_m": z})
    area, xc, zc = section.wall_section(
        cut["height_m"], cut["base_width_m"], p["top_width_m"], cut["front_batter_m"]
    )
    for i in range(n):
        h, b, t, f = (p[k][i] for k in ("height_m", "base_width_m", "top_width_m", "front_batter_m"))
        wall = shapely.Polygon([(0, 0), (b, 0), (f + t, h), (f, h)])
        for k in range(z.shape[0]):
            zk = z[k, i]
            above = shapely.clip_by_rect(wall, -1.0, zk, b + 1.0, h + 1.0)
            x0 = f * zk / h  # the front face at the plane: the plane's own toe
            assert_allclose(area[k, i], above.area, rtol=1e-12)
            assert_allclose(xc[k, i] + x0, above.centroid.x, rtol=1e-12, atol=1e-12)
            assert_allclose(zc[k, i] + zk, above.centroid.y, rtol=1e-12)


def test_joint_by_hand_with_the_masonry_friction_of_navfac() -> None:
    # hand calculation: rectangular wall H = 3, B = t = 1, γ_wall = 24, γ = 18, φ' = 30° (Ka = 1/3),
    # δ = 0, q = 0, drained; the plane at 1.5 m carries W = 36 kN/m at 0.5 m and P = 6.75 kN/m at
    # 0.5 m. Joint friction tan 35° = 0.70, masonry on masonry, NAVFAC DM 7.02 (1986) Table 1.
    reg = pd.DataFrame([worked_wall("J", 1.0, material="stone_masonry", drainage="working")])
    r = screen(reg, Config(joint_planes=2)).iloc[0]
    assert math.tan(math.radians(35.0)) == 0.7002075382097097  # NAVFAC's 0.70 to two places
    assert_allclose(r.joint_height_m, 1.5)
    assert_allclose(r.joint_sliding_utilisation, 1.5 / (36 * math.tan(math.radians(35)) / 6.75), rtol=1e-12)
    assert_allclose(r.joint_overturning_utilisation, 2.0 / (18 / 3.375), rtol=1e-12)
    assert_allclose(r.joint_middle_third_utilisation, (0.5 - (18 - 3.375) / 36) / (1 / 6), rtol=1e-12)


def test_only_the_materials_configured_are_checked() -> None:
    # mass concrete is monolithic between lifts (method.md §8): no joint check; a blank material
    # takes stone masonry (§7) and is checked; joint_planes = 0 switches the check off
    reg = pd.DataFrame(
        [
            worked_wall("MC", 1.0, material="mass_concrete"),
            worked_wall("SM", 1.0, material="stone_masonry"),
            worked_wall("BLANK", 1.0, material=None, wall_unit_weight_kn_m3=22.0),
        ]
    )
    res = screen(reg).set_index("wall_id")
    assert res.loc["MC", "joint_height_m"].isna().all()
    assert res.loc["SM", "joint_height_m"].notna().all()
    assert res.loc["BLANK", "joint_height_m"].notna().all()
    assumed = prepare(reg).assumptions.long()
    assert ((assumed.wall_id == "BLANK") & (assumed.column == "material")).any()
    off = screen(reg, Config(joint_planes=0))
    assert off[["joint_height_m", *JOINT_UTILS]].isna().all().all()
    only_drystone = screen(reg, Config(joint_check_materials=("drystone",)))
    assert only_drystone.joint_height_m.isna().all()


def test_equal_planes_go_to_the_lower_one() -> None:
    # method.md §8 ties: nothing retained and nothing on top, a plumb rectangle: every plane has
    # utilisation 0, and the lowest plane (H/N) is reported
    reg = pd.DataFrame([worked_wall("T", 1.0, material="drystone", retained_height_m=0.0)])
    res = screen(reg, Config(joint_planes=6))
    assert_allclose(res.joint_height_m, 0.5)
    assert (res[JOINT_UTILS].to_numpy() == 0).all()


def test_a_weak_joint_governs_and_is_named() -> None:
    # bed joints weaker in friction (20°) than the base (40°): a joint governs the drained case
    reg = pd.DataFrame(
        [
            worked_wall(
                "S",
                2.0,
                material="drystone",
                drainage="working",
                base_friction_deg=40.0,
                joint_friction_deg=20.0,
            )
        ]
    )
    r = screen(reg).set_index("case").loc["drained"]
    assert r.governing_check == "joint_sliding"
    assert r.utilisation == r.joint_sliding_utilisation > r.middle_third_utilisation
    assert_allclose(r.joint_height_m, 0.3)  # the lowest plane carries the most


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 10_000), st.sampled_from([(10, 5), (10, 2), (12, 4), (9, 3), (8, 4), (6, 3)]))
def test_more_planes_never_lower_the_joint_utilisation(seed, pair) -> None:
    # the planes of N include those of any divisor of N, so the governing joint's utilisation
    # with N planes is never below that with the subset (floating point: 1e-12 relative)
    walls = prepare(_random_register(60, seed).assign(material="brick_masonry")).inputs
    many, few = pair
    a = run_cases(walls, Config(joint_planes=many))
    b = run_cases(walls, Config(joint_planes=few))
    ua = np.nanmax(np.stack([a[c] for c in JOINT_UTILS]), axis=0)
    ub = np.nanmax(np.stack([b[c] for c in JOINT_UTILS]), axis=0)
    assert (ua >= ub * (1 - 1e-12)).all()
    assert (a["utilisation"] >= b["utilisation"] * (1 - 1e-12)).all()
