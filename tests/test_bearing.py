"""Bearing resistance after EN 1997-1 Annex D (method.md §10) and passive resistance in front
(§11): against published values, hand calculations and the identities that must hold."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from screening import Config, screen
from screening.core.bearing import annex_d_factors, annex_d_resistance, passive_resistance, rankine_kp
from tests.conftest import worked_wall


def test_annex_d_factors_against_published_values() -> None:
    # EN 1997-1:2004 Annex D formulas. N_q and N_c are the Prandtl-Reissner values tabulated in
    # most foundation texts (e.g. Das, Principles of Foundation Engineering, bearing capacity
    # factor table; from memory): N_q 10.66 / 18.40 / 33.30, N_c 20.72 / 30.14 / 46.12 at
    # 25° / 30° / 35°. N_γ in the Annex D form 2(N_q − 1)tan φ' (not Vesić's 2(N_q + 1)tan φ'):
    # 9.01 / 20.09 / 45.23, as tabulated for EC7 (from memory).
    n_q, n_c, n_g = annex_d_factors([25.0, 30.0, 35.0])
    assert_allclose(n_q, [10.66, 18.40, 33.30], atol=0.005)
    assert_allclose(n_c, [20.72, 30.14, 46.12], atol=0.005)
    assert_allclose(n_g, [9.01, 20.09, 45.23], atol=0.005)
    # a published Annex D worksheet ("Bearing resistance calculation - Annex D BS EN 1997-1:2004",
    # scribd.com document 383761215) prints 18.40 / 30.14 / 20.09 at 30° and 37.75 / 50.59 / 53.40
    # at 36° for N_q / N_c / N_γ
    assert_allclose(np.ravel(annex_d_factors(36.0)), [37.75, 50.59, 53.40], atol=0.005)


def test_annex_d_factors_limit_and_invalid() -> None:
    # as φ' → 0, N_c → π + 2 (Prandtl's undrained value) and N_q → 1; φ' ≤ 0 has no drained value
    n_q, n_c, n_g = annex_d_factors(1e-6)
    assert_allclose([float(n_q), float(n_c), float(n_g)], [1.0, math.pi + 2, 0.0], atol=1e-5)
    assert np.isnan(annex_d_factors(0.0)).all()


def test_annex_d_check_value_of_the_method() -> None:
    # method.md §10 check value, computed from the Annex D formulas: B = 2.0, V = 200, H = 50,
    # e = 0.2, D = 0.5, γ_f = 19, φ' = 30°, c' = 0 → B' = 1.6, i_q = 0.5625, i_γ = 0.4219, R = 363.5
    d = annex_d_resistance(200.0, 50.0, 0.2, 2.0, 30.0, 0.0, 19.0, 0.5)
    assert_allclose(d["effective_width_m"], 1.6)
    assert_allclose(d["i_q"], 0.5625)
    assert_allclose(d["i_gamma"], 0.4219, atol=5e-5)
    assert_allclose(d["resistance_kn_m"], 363.5, atol=0.05)
    # the same by hand: q' N_q i_q + ½ γ B' N_γ i_γ, times B'
    hand = 1.6 * (9.5 * 18.4011 * 0.5625 + 0.5 * 19 * 1.6 * 20.0931 * 0.421875)
    assert_allclose(d["resistance_kn_m"], hand, rtol=1e-5)


@settings(max_examples=200, deadline=None)
@given(
    v=st.floats(20.0, 1000.0),
    h1=st.floats(0.0, 1.0),
    h2=st.floats(0.0, 1.0),
    e_frac=st.floats(-0.49, 0.49),
    b=st.floats(0.5, 5.0),
    phi=st.floats(15.0, 45.0),
    c=st.floats(0.0, 30.0),
    d=st.floats(0.0, 2.0),
)
def test_annex_d_resistance_falls_as_the_load_inclines(v, h1, h2, e_frac, b, phi, c, d) -> None:
    # the inclination factors only fall as H/V rises, so R never rises with H at the same V, e
    lo, hi = sorted([h1, h2])
    r_lo = annex_d_resistance(v, lo * v, e_frac * b, b, phi, c, 19.0, d)["resistance_kn_m"]
    r_hi = annex_d_resistance(v, hi * v, e_frac * b, b, phi, c, 19.0, d)["resistance_kn_m"]
    assert r_hi <= r_lo * (1 + 1e-12) + 1e-12


def test_rankine_kp() -> None:
    # Rankine's theory (e.g. Craig, Soil Mechanics): K_p = 3.0 at φ' = 30°, and the closed form
    # (1 + sin φ')/(1 − sin φ') = tan²(45° + φ'/2) = 1/K_a
    assert_allclose(rankine_kp(30.0), 3.0, rtol=1e-12)
    phi = np.linspace(10, 45, 8)
    assert_allclose(rankine_kp(phi), np.tan(np.radians(45 + phi / 2)) ** 2, rtol=1e-12)
    assert_allclose(passive_resistance(0.5, 3.0, 19.0, [0.0, -1.0, 1.0]), [0.0, 0.0, 0.5 * 0.5 * 3 * 19])


def test_the_engine_uses_annex_d_where_the_foundation_friction_is_given() -> None:
    reg = pd.DataFrame(
        [
            worked_wall("AD", 2.0, foundation_friction_deg=30.0, embedment_m=0.5, drainage="working"),
            worked_wall("PR", 2.0, drainage="working"),
        ]
    )
    res = screen(reg).set_index(["wall_id", "case"])
    ad, pr = res.loc[("AD", "drained")], res.loc[("PR", "drained")]
    assert ad.bearing_method == "annex_d" and pr.bearing_method == "presumed"
    assert np.isnan(pr.bearing_resistance_kn_m)
    assert_allclose(pr.bearing_utilisation, pr.toe_pressure_kpa / 200.0)
    # the loads of §3 (V net of uplift, ΣH, e) into Annex D, global factor 3 (method.md §10)
    r = annex_d_resistance(
        ad.vertical_kn_m, ad.horizontal_kn_m, ad.eccentricity_m, 2.0, 30.0, 0.0, 19.0, 0.5
    )["resistance_kn_m"]
    assert_allclose(ad.bearing_resistance_kn_m, r, rtol=1e-12)
    assert_allclose(ad.bearing_utilisation, ad.vertical_kn_m * 3.0 / r, rtol=1e-12)
    strict = screen(reg, Config(fos_bearing_required=4.5)).set_index(["wall_id", "case"])
    assert_allclose(strict.loc[("AD", "drained"), "bearing_utilisation"], 1.5 * ad.bearing_utilisation)
    # toe excavation takes the embedment off: D = max(0.5 − 0.7, 0) = 0
    dug = screen(reg, Config(toe_excavation_m=0.7)).set_index(["wall_id", "case"]).loc[("AD", "drained")]
    r0 = annex_d_resistance(
        ad.vertical_kn_m, ad.horizontal_kn_m, ad.eccentricity_m, 2.0, 30.0, 0.0, 19.0, 0.0
    )
    assert_allclose(dug.bearing_resistance_kn_m, r0["resistance_kn_m"], rtol=1e-12)


def test_no_effective_width_is_infinite_utilisation() -> None:
    # a resultant outside the base leaves B' ≤ 0: R = 0 and the utilisation is infinite (§10)
    reg = pd.DataFrame([worked_wall("OUT", 1.5, foundation_friction_deg=30.0, drainage="blocked")])
    r = screen(reg).set_index("case").loc["blocked"]
    assert r.state == "resultant_outside_base"
    assert r.bearing_resistance_kn_m == 0 and math.isinf(r.bearing_utilisation)


def test_passive_resistance_adds_to_the_base_sliding_only() -> None:
    # method.md §11: FoS_sliding = (V tan δ_b + P_p)/ΣH with P_p = m·½·K_p·γ_f·D², K_p from φ'_f,
    # else from the retained soil's φ'; not on the crack plane
    reg = pd.DataFrame(
        [
            worked_wall("P", 2.0, embedment_m=0.8, foundation_friction_deg=34.0, crack_height_m=1.0),
            worked_wall("Q", 2.0, embedment_m=0.8, foundation_unit_weight_kn_m3=18.0),
        ]
    )
    off = screen(reg).set_index(["wall_id", "case"])
    on = screen(reg, Config(passive_mobilisation=0.5, toe_excavation_m=0.3)).set_index(["wall_id", "case"])
    kp_p, kp_q = rankine_kp(34.0), rankine_kp(30.0)
    expected = {"P": 0.5 * 0.5 * kp_p * 19.0 * 0.5**2, "Q": 0.5 * 0.5 * kp_q * 18.0 * 0.5**2}
    for (wall, case), r in on.iterrows():
        o = off.loc[(wall, case)]
        assert_allclose(r.passive_resistance_kn_m, expected[wall], rtol=1e-12)
        tan_b = math.tan(math.radians(26.56505117707799))
        assert_allclose(
            r.fos_sliding, (r.vertical_kn_m * tan_b + expected[wall]) / r.horizontal_kn_m, rtol=1e-12
        )
        assert o.passive_resistance_kn_m == 0
        assert_allclose(r.crack_fos_sliding, o.crack_fos_sliding, rtol=0, equal_nan=True)
