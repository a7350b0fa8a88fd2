"""The engine against method.md's worked cases, an independent per-wall implementation,
and identities that must hold exactly."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import integrate

from benchmarks.scalar import screen_wall
from screening import Config, schema, screen
from screening.config import load_config
from screening.core.engine import DERIVED_INPUTS, ENGINE_INPUTS, decode, run_cases
from screening.core.stability import base_pressure
from screening.pipeline import RESULT_COLUMNS, UNCERTAINTY_COLUMNS
from screening.prepare import prepare
from tests.conftest import worked_wall


def load_config_text(text: str) -> Config:
    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "config.toml"
        path.write_text(text, encoding="utf-8")
        return load_config(path)


def _case(results: pd.DataFrame, wall: str, case: str) -> pd.Series:
    return results[(results.wall_id == wall) & (results.case == case)].iloc[0]


def test_output_contract_columns(worked_register) -> None:
    results = screen(worked_register)
    assert list(results.columns) == list(RESULT_COLUMNS)
    assert len(results) == 6


def test_worked_case_b15_drained(worked_register) -> None:
    # method.md §6 worked case (hand calculation of the method): B = 1.5 drained gives
    # e = B/6 exactly, q_max = 144.0 kPa, FoS_OT = 3.00, FoS_sliding = 2.00
    r = _case(screen(worked_register), "B15", "drained")
    assert_allclose(r.eccentricity_m, 1.5 / 6, rtol=1e-12)
    assert_allclose(r.toe_pressure_kpa, 144.0, rtol=1e-12)
    assert_allclose(r.heel_pressure_kpa, 0.0, atol=1e-9)
    assert_allclose(r.fos_overturning, 3.0, rtol=1e-12)
    assert_allclose(r.fos_sliding, 2.0, rtol=1e-12)
    assert r.in_middle_third


def test_worked_case_b20_blocked(worked_register) -> None:
    # method.md §6 worked case: B = 2.0 blocked gives V = 114.57 kN/m, e = 0.604 m,
    # q_max = 193.0 kPa, FoS_OT = 1.46, FoS_sliding = 0.964
    r = _case(screen(worked_register), "B20", "blocked")
    assert_allclose(r.vertical_kn_m, 114.57, atol=0.005)
    assert_allclose(r.eccentricity_m, 0.604, atol=0.0005)
    assert_allclose(r.toe_pressure_kpa, 193.0, atol=0.05)
    assert_allclose(r.fos_overturning, 1.46, atol=0.005)
    assert_allclose(r.fos_sliding, 0.964, atol=0.0005)
    assert r.state == "outside_middle_third"
    assert not r.in_middle_third


def test_resultant_outside_base_is_a_state_not_a_number() -> None:
    # B = 1.5 blocked: the resultant falls outside the toe; the toe pressure is inf, not finite
    reg = pd.DataFrame([worked_wall("B15", 1.5, drainage="blocked")])
    r = _case(screen(reg), "B15", "blocked")
    assert r.resultant_from_toe_m < 0
    assert r.state == "resultant_outside_base"
    assert math.isinf(r.toe_pressure_kpa)
    assert r.fos_overturning < 1
    assert r.governing_check == "overturning"
    assert math.isinf(r.utilisation) and r.margin == -math.inf


def _random_register(n: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    h = rng.uniform(1, 6, n)
    b = h * rng.uniform(0.35, 0.9, n)
    t = np.minimum(rng.uniform(0.3, 0.8, n), 0.9 * b)
    f = (b - t) * rng.uniform(0, 1, n) * (rng.random(n) < 0.6)
    return pd.DataFrame(
        {
            "wall_id": [f"W{i}" for i in range(n)],
            "height_m": h,
            "base_width_m": b,
            "top_width_m": t,
            "front_batter_m": f,
            "retained_height_m": h * rng.uniform(0.6, 1.0, n),
            "lean_deg": rng.uniform(-2, 5, n) * (rng.random(n) < 0.3),
            "crack_height_m": np.where(rng.random(n) < 0.3, h * rng.uniform(0.2, 0.8, n), np.nan),
            "material": rng.choice(["mass_concrete", "stone_masonry", "brick_masonry", "drystone"], n),
            "soil_friction_deg": rng.uniform(25, 38, n),
            "wall_friction_deg": rng.uniform(0, 20, n),
            "backfill_slope_deg": rng.uniform(0, 15, n),
            "surcharge_kpa": rng.uniform(0, 20, n),
            "foundation": rng.choice(["rock", "gravel", "sand", "stiff_clay", "firm_clay"], n),
            "drainage": rng.choice(["working", "partial", "blocked", "unknown"], n),
        }
    )


def _with_foundation_soil(reg: pd.DataFrame, seed: int) -> pd.DataFrame:
    """Some walls with the soil under the base recorded (Annex D bearing, method.md §10)."""
    rng = np.random.default_rng(seed)
    n = len(reg)
    given = rng.random(n) < 0.4
    return reg.assign(
        foundation_friction_deg=np.where(given, rng.uniform(22, 38, n), np.nan),
        foundation_cohesion_kpa=np.where(given & (rng.random(n) < 0.5), rng.uniform(0, 15, n), np.nan),
        foundation_unit_weight_kn_m3=np.where(rng.random(n) < 0.5, rng.uniform(16, 21, n), np.nan),
        embedment_m=np.where(rng.random(n) < 0.6, rng.uniform(0, 0.8, n), np.nan),
    )


SCALAR_CONFIGS = {
    "defaults": Config(),
    "every option": load_config_text(
        'criteria = "by_load_category"\npassive_mobilisation = 0.5\ntoe_excavation_m = 0.1\njoint_planes = 7\n'
    ),
    "criteria tables": load_config_text(
        "uplift = false\nfos_bearing_required = 2.5\n[criteria.blocked]\nresultant_limit = 0.45\n"
        "[criteria.surveyed]\nfos_sliding_required = 1.3\n"
    ),
}


@pytest.mark.parametrize("name", list(SCALAR_CONFIGS))
def test_engine_matches_independent_per_wall_implementation(name) -> None:
    # benchmarks/scalar.py: the method written again per wall with the hand method
    # (pressure blocks, section split into a rectangle and triangles, each bed joint and
    # the governing check in plain loops), math module only; every result column compared
    config = SCALAR_CONFIGS[name]
    reg = _with_foundation_soil(_random_register(300, seed=7), seed=8)
    prepared = prepare(reg, config)
    assert len(prepared.walls) == 300
    results = screen(reg, config)
    rows = []
    for _i, wall in prepared.walls.iterrows():
        w = {k: float(wall[k]) for k in ENGINE_INPUTS}
        for res in screen_wall(w, config):
            res["wall_id"] = wall["wall_id"]
            rows.append(res)
    ref = pd.DataFrame(rows)
    merged = results.merge(ref, on=["wall_id", "case"], suffixes=("", "_ref"))
    assert len(merged) == 900
    compared = set(ref.columns) & set(RESULT_COLUMNS) - {"wall_id", "case"}
    # the probabilities of method.md §13 are checked in tests/test_uncertainty.py
    assert compared == set(RESULT_COLUMNS) - {"wall_id", "case", "in_middle_third", *UNCERTAINTY_COLUMNS}
    for col in sorted(compared):
        if col in ("governing_check", "state", "bearing_method"):
            assert (merged[col].astype(str) == merged[f"{col}_ref"].astype(str)).all(), col
            continue
        assert_allclose(
            merged[col].astype(float), merged[f"{col}_ref"].astype(float), rtol=1e-9, atol=1e-9, err_msg=col
        )
    # the register exercises what is compared
    assert (merged.bearing_method == "annex_d").any() and merged.joint_height_m.notna().any()
    assert merged.governing_check.astype(str).str.startswith("joint").any()


@settings(max_examples=200, deadline=None)
@given(
    v=st.floats(1.0, 1000.0),
    b=st.floats(0.3, 5.0),
    frac=st.floats(0.01, 0.99),
)
def test_base_pressure_integrates_to_v_and_its_moment(v, b, frac) -> None:
    # the base pressure diagram carries V and its centroid is at x_R (statics identity);
    # checked by numerical integration of the diagram (scipy)
    x_r = frac * b
    toe, heel, _ = base_pressure(v, x_r, b)
    toe, heel = float(toe), float(heel)
    e = b / 2 - x_r
    if abs(e) <= b / 6:

        def q(x):
            return toe + (heel - toe) * x / b

        pts = None
    elif e > 0:

        def q(x):
            return max(toe * (1 - x / (3 * x_r)), 0.0)

        pts = [3 * x_r]
    else:

        def q(x):
            return max(heel * (1 - (b - x) / (3 * (b - x_r))), 0.0)

        pts = [b - 3 * (b - x_r)]
    total = integrate.quad(q, 0, b, points=pts)[0]
    moment = integrate.quad(lambda x: q(x) * x, 0, b, points=pts)[0]
    assert_allclose(total, v, rtol=1e-8)
    assert_allclose(moment, v * x_r, rtol=1e-8)


@settings(max_examples=15, deadline=None)
@given(st.integers(0, 10_000))
def test_surveyed_case_equals_drained_or_blocked(seed) -> None:
    # method.md §4: working drainage -> h_w = 0 (drained); blocked -> h_w = H_r (blocked)
    reg = _random_register(20, seed)
    reg["drainage"] = np.where(np.arange(20) % 2 == 0, "working", "blocked")
    res = screen(reg).set_index(["wall_id", "case"])
    numeric = [c for c in RESULT_COLUMNS if c not in ("wall_id", "case")]
    for i, wall in enumerate(reg["wall_id"]):
        same_as = "drained" if i % 2 == 0 else "blocked"
        a = res.loc[(wall, "surveyed"), numeric]
        b = res.loc[(wall, same_as), numeric]
        pd.testing.assert_series_equal(a, b, check_names=False)


_LEAN_WALLS = prepare(_random_register(500, seed=5)).inputs


@settings(max_examples=100, deadline=None)
@given(st.floats(0.01, 15.0), st.floats(0.0, 0.01))
def test_outward_lean_never_raises_the_overturning_factor(lean, extra) -> None:
    # method.md §1: lever arms x·cos ω − z·sin ω shrink for ω > 0, in every case
    # and on the crack plane too
    plumb = run_cases({**_LEAN_WALLS, "lean_deg": np.zeros(500)}, Config())
    leaning = run_cases({**_LEAN_WALLS, "lean_deg": np.full(500, lean)}, Config())
    more = run_cases({**_LEAN_WALLS, "lean_deg": np.full(500, lean + extra)}, Config())
    for col in ("fos_overturning", "crack_fos_overturning"):
        a, b, c = plumb[col], leaning[col], more[col]
        ok = np.isfinite(a)
        assert (b[ok] <= a[ok] + 1e-12).all()
        assert (c[ok] <= b[ok] + 1e-12).all()


def test_crack_check_equals_the_wall_above_screened_alone() -> None:
    # method.md §5: the part above the crack is a wall of its own (no uplift, joint friction)
    reg = _random_register(50, seed=3).assign(crack_height_m=lambda d: d.height_m * 0.4)
    res = screen(reg)
    p = prepare(reg).walls
    zc = p["crack_height_m"]
    back = p.base_width_m - p.front_batter_m - p.top_width_m
    above = reg.assign(
        height_m=p.height_m - zc,
        base_width_m=p.base_width_m - (p.front_batter_m + back) * zc / p.height_m,
        front_batter_m=p.front_batter_m * (p.height_m - zc) / p.height_m,
        retained_height_m=np.maximum(p.retained_height_m - zc, 0),
        base_friction_deg=p.joint_friction_deg,
        crack_height_m=np.nan,
        drainage="working",
    )
    alone = screen(above, Config(uplift=False))
    drained = res[res.case == "drained"].reset_index(drop=True)
    alone_d = alone[alone.case == "drained"].reset_index(drop=True)
    assert_allclose(drained.crack_eccentricity_m, alone_d.eccentricity_m, rtol=1e-12)
    assert_allclose(drained.crack_fos_overturning, alone_d.fos_overturning, rtol=1e-12)
    assert_allclose(drained.crack_fos_sliding, alone_d.fos_sliding, rtol=1e-12)


def test_crack_and_no_crack_columns_blank_where_none() -> None:
    reg = pd.DataFrame([worked_wall("A", 2.0), worked_wall("C", 2.0, crack_height_m=1.0)])
    res = screen(reg)
    assert res.loc[res.wall_id == "A", "crack_fos_sliding"].isna().all()
    assert res.loc[res.wall_id == "C", "crack_fos_sliding"].notna().all()


def test_floating_wall_is_an_error_state() -> None:
    # uplift larger than the weight (V ≤ 0): a state, with no resultant and no pressure.
    # Validated registers cannot reach it (unit weight ≥ 10 kN/m³), so the engine is fed directly.
    reg = pd.DataFrame([worked_wall("F", 2.0, drainage="blocked")])
    inputs = dict(prepare(reg).inputs)
    inputs["wall_unit_weight_kn_m3"] = np.array([4.0])
    out = decode(run_cases(inputs, Config()))
    blocked = list(out["case"]).index("blocked")
    assert out["vertical_kn_m"][blocked] < 0
    assert out["state"][blocked] == "floating"
    assert math.isnan(out["toe_pressure_kpa"][blocked])
    assert math.isinf(out["utilisation"][blocked])
    assert out["governing_check"][blocked] == "vertical_load"


def test_required_factors_are_configuration(worked_register) -> None:
    base = _case(screen(worked_register), "B15", "drained")
    strict = _case(screen(worked_register, Config(fos_sliding_required=3.0)), "B15", "drained")
    assert_allclose(strict.sliding_utilisation, 2 * base.sliding_utilisation)


def test_run_cases_is_vectorised_over_arrays() -> None:
    n = 10_000
    reg = _random_register(n, seed=11)
    p = prepare(reg)
    out = run_cases(p.inputs, Config())
    assert out["utilisation"].shape == (3 * n,)


def test_engine_inputs_are_canonical_numeric_columns():
    # the engine declares its inputs; each must be a canonical numeric column of the register
    # (inventory.md), apart from the two that preparation derives (surveyed water, joint check)
    assert set(DERIVED_INPUTS) == {"surveyed_water_height_m", "joint_check"}
    assert set(ENGINE_INPUTS) - set(DERIVED_INPUTS) <= set(schema.NUMERIC)


def test_lean_beyond_the_toe_never_reads_as_a_pass() -> None:
    # a slender wall leaning 7°: the weight's lever arm x·cos ω − z·sin ω is negative, on the
    # base and above the crack. The restoring moment is reported as it is (negative), but the
    # factor is 0, never negative, and the utilisation infinite (method.md §3: a state)
    reg = pd.DataFrame(
        [
            worked_wall("L", 0.6, height_m=6.0, lean_deg=7.0, crack_height_m=1.0),
            worked_wall("L0", 0.6, height_m=6.0, lean_deg=7.0, retained_height_m=0.0),
        ]
    )
    res = screen(reg)
    assert (res.restoring_moment_knm_m < 0).all()
    assert (res.fos_overturning == 0).all()
    assert np.isinf(res.overturning_utilisation).all() and np.isinf(res.utilisation).all()
    assert (res.state == "resultant_outside_base").all() and (res.governing_check == "overturning").all()
    cracked = res[res.wall_id == "L"]
    assert (cracked.crack_fos_overturning == 0).all()
    for col in ("overturning_utilisation", "crack_overturning_utilisation", "joint_overturning_utilisation"):
        values = run_cases(prepare(reg).inputs, Config())[col]
        assert not (values < 0).any(), col
