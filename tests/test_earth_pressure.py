"""Earth pressure coefficients and thrusts against published values and integration."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import integrate

from screening.core.earth_pressure import base_uplift, coulomb_ka, effective_thrust, water_thrust

GW = 9.81


def test_rankine_level_30_degrees() -> None:
    # Rankine's theory: Ka = (1 - sin 30°)/(1 + sin 30°) = 1/3
    # (any soil mechanics textbook, e.g. Craig, Soil Mechanics)
    assert_allclose(coulomb_ka(30.0), 1.0 / 3.0, rtol=1e-12)


def test_coulomb_smith_example_6_7() -> None:
    # I. Smith, Smith's Elements of Soil Mechanics, Example 6.7:
    # φ' = 20°, δ = 10°, vertical back, level surface -> Ka = 0.4467
    assert_allclose(coulomb_ka(20.0, 10.0, 0.0), 0.4467, atol=5e-5)


def test_coulomb_das_table() -> None:
    # Das, Principles of Foundation Engineering, Coulomb Ka table (from memory):
    # φ' = 30°, δ = 20°, vertical back, level -> 0.2973
    assert_allclose(coulomb_ka(30.0, 20.0, 0.0), 0.2973, atol=5e-5)


def test_coulomb_reduces_to_rankine_over_a_range() -> None:
    # with δ = β = 0 Coulomb's coefficient is Rankine's (textbook identity)
    phi = np.linspace(15, 45, 31)
    rankine = (1 - np.sin(np.radians(phi))) / (1 + np.sin(np.radians(phi)))
    assert_allclose(coulomb_ka(phi), rankine, rtol=1e-12)


def test_coulomb_equals_rankine_sloping_backfill_when_delta_equals_beta() -> None:
    # For a vertical back with δ = β, Coulomb's Ka equals Rankine's coefficient for a
    # sloping surface, Ka = cos β (cos β − √(cos²β − cos²φ)) / (cos β + √(cos²β − cos²φ))
    # (Rankine's theory, e.g. Craig, Soil Mechanics; the equivalence from memory)
    phi, beta = np.radians(32.0), np.radians(15.0)
    root = np.sqrt(np.cos(beta) ** 2 - np.cos(phi) ** 2)
    ka_rankine = np.cos(beta) * (np.cos(beta) - root) / (np.cos(beta) + root)
    assert_allclose(coulomb_ka(32.0, 15.0, 15.0), ka_rankine, rtol=1e-12)


def test_no_solution_when_slope_reaches_friction_angle() -> None:
    # β ≥ φ' has no active wedge (method.md §2)
    ka = coulomb_ka([30.0, 30.0, 30.0], 0.0, [29.9, 30.0, 35.0])
    assert np.isfinite(ka[0]) and np.isnan(ka[1:]).all()


def _integrated(ka, r, h, g, gsat, q):
    def sigma(z):
        if z >= h:
            return g * (r - z)
        return g * (r - h) + (gsat - GW) * (h - z)

    force = integrate.quad(lambda z: ka * (sigma(z) + q), 0, r, points=[h])[0]
    moment = integrate.quad(lambda z: ka * (sigma(z) + q) * z, 0, r, points=[h])[0]
    return force, moment


@settings(max_examples=60, deadline=None)
@given(
    r=st.floats(0.5, 8.0),
    frac=st.floats(0.0, 1.0),
    g=st.floats(15.0, 21.0),
    extra=st.floats(0.0, 3.0),
    q=st.floats(0.0, 30.0),
    phi=st.floats(20.0, 40.0),
)
def test_effective_thrust_matches_numerical_integration(r, frac, g, extra, q, phi) -> None:
    # closed form of ∫Ka(σ'v + q)dz and ∫Ka(σ'v + q)z dz against scipy.integrate.quad
    h = frac * r
    gsat = max(g, 10.5) + extra
    ka = float(coulomb_ka(phi))
    force, moment = effective_thrust(ka, r, h, g, gsat, q, GW)
    ref_f, ref_m = _integrated(ka, r, h, g, gsat, q)
    assert_allclose([force, moment], [ref_f, ref_m], rtol=1e-9, atol=1e-9)


def test_water_thrust_and_uplift_integrate() -> None:
    # hydrostatic pressure γw(h − z) integrated numerically (scipy)
    h, b = 2.7, 1.9
    f, m = water_thrust(h, GW)
    assert_allclose(f, integrate.quad(lambda z: GW * (h - z), 0, h)[0], rtol=1e-12)
    assert_allclose(m, integrate.quad(lambda z: GW * (h - z) * z, 0, h)[0], rtol=1e-12)
    # uplift linear from γw·h at the heel (x = B) to 0 at the toe
    u, arm = base_uplift(h, b, GW)
    ref_u = integrate.quad(lambda x: GW * h * x / b, 0, b)[0]
    ref_m = integrate.quad(lambda x: GW * h * x / b * x, 0, b)[0]
    assert_allclose([u, arm], [ref_u, ref_m / ref_u], rtol=1e-12)


@pytest.mark.parametrize("bad", [[np.nan], [30.0, np.nan]])
def test_nan_in_nan_out(bad) -> None:
    ka = coulomb_ka(np.array(bad))
    assert np.isnan(ka).sum() == np.isnan(bad).sum()
