"""Critical water height, critical lean and the years to it (method.md §9): against a
brute-force scan, scipy's root finder, the per-wall implementation and the identities of the
definition."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import optimize

from benchmarks.scalar import _section, critical_figures
from screening import Config, evaluate
from screening.core import critical, engine
from screening.pipeline import CRITICAL_COLUMNS
from screening.prepare import prepare
from tests.conftest import worked_wall
from tests.test_engine import _random_register, _with_foundation_soil


def _brute_force(p: dict[str, np.ndarray], i: int, config: Config) -> float:
    """The first water height on a 1 mm grid (and H_r itself) at which the utilisation exceeds 1."""
    wall = {k: v[i : i + 1] for k, v in p.items()}
    top = float(wall["retained_height_m"][0])
    heights = np.append(np.arange(0.0, top, 0.001), top)
    crit = {k: v[-1:] for k, v in engine.case_criteria(config).items()}
    u = np.asarray(engine.screen_grid(wall, heights[:, None], config, crit)["utilisation"])[:, 0]
    over = np.flatnonzero(u > 1)
    return float(heights[over[0]]) if over.size else math.nan


def test_critical_water_height_against_a_one_millimetre_scan() -> None:
    # brute force: every millimetre from 0 to H_r, all checks, on random walls (all materials,
    # cracks, Annex D walls); the 64-step search with bisection lands within 1 mm of it
    config = Config()
    p = prepare(_with_foundation_soil(_random_register(120, seed=17), seed=3), config).inputs
    found = critical.critical_water_height(p, config)
    brute = np.array([_brute_force(p, i, config) for i in range(len(found))])
    between = np.isfinite(brute) & (brute > 0)
    assert between.sum() > 20  # the register has walls whose water height decides
    assert_allclose(found[between], brute[between], atol=0.001 + 1e-9, rtol=0)
    assert ((found == 0) == (brute == 0)).all()
    # where the brute force finds no failing height the wall holds with water to the top: blank
    assert np.isnan(found[np.isnan(brute)]).all()


_SURVEYS = [_random_register(25, seed) for seed in range(40)]


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 39))
def test_zero_and_blank_mean_what_they_say(k) -> None:
    # method.md §9: 0 exactly when the drained case fails, blank exactly when the blocked case
    # passes (criteria off, so the surveyed case's criteria are every case's)
    walls = evaluate(_SURVEYS[k]).walls
    h = walls["critical_water_height_m"].to_numpy(float)
    assert ((h == 0) == (walls["utilisation_drained"] > 1)).all()
    assert (np.isnan(h) == (walls["utilisation_blocked"] <= 1)).all()
    retained = _SURVEYS[k].set_index("wall_id").loc[walls.wall_id, "retained_height_m"].to_numpy()
    inside = np.isfinite(h)
    assert ((h[inside] >= 0) & (h[inside] <= retained[inside] + 1e-12)).all()
    assert_allclose(walls["critical_water_fraction"][inside], h[inside] / retained[inside])


def test_critical_lean_against_scipy_brentq() -> None:
    # the lean at which x_R = 0 in the surveyed case, by scipy.optimize.brentq on the per-wall
    # implementation's resultant (benchmarks/scalar.py); ours is the upper end of a 0.01° bracket
    p = prepare(_random_register(80, seed=23)).inputs
    found = critical.critical_lean(p, Config())
    checked = 0
    for i in range(len(found)):
        w = {k: float(v[i]) for k, v in p.items()}

        def x_r(lean: float, w: dict[str, float] = w) -> float:
            return _section({**w, "lean_deg": lean}, w["surveyed_water_height_m"], True, 30.0)[
                "resultant_from_toe_m"
            ]

        if x_r(w["lean_deg"]) <= 0:
            assert found[i] == w["lean_deg"]
        elif x_r(45.0) > 0:
            assert np.isnan(found[i])
        else:
            root = optimize.brentq(x_r, w["lean_deg"], 45.0, xtol=1e-10)
            assert root - 1e-9 <= found[i] <= root + 0.01 + 1e-9
            checked += 1
    assert checked > 20


def test_critical_figures_match_the_per_wall_implementation() -> None:
    # benchmarks/scalar.py searches wall by wall (64 steps, then bisection while wider than the
    # tolerance); the engine searches all walls at once
    config = Config(passive_mobilisation=0.3)
    p = prepare(_with_foundation_soil(_random_register(60, seed=31), seed=5), config).inputs
    water = critical.critical_water_height(p, config)
    lean = critical.critical_lean(p, config)
    for i in range(len(water)):
        ref = critical_figures({k: float(v[i]) for k, v in p.items()}, config)
        assert_allclose(water[i], ref["critical_water_height_m"], atol=0.001, equal_nan=True)
        assert_allclose(lean[i], ref["critical_lean_deg"], atol=0.01, equal_nan=True)


def test_years_to_critical_lean_from_the_lean_history() -> None:
    # two surveys a year apart, lean 1.0° then 1.5°: rate 0.5°/yr; years = (critical − lean)/rate;
    # blank where the lean is not growing; 0 where the lean has already reached it
    rows = []
    for wall, leans in {"GROW": (1.0, 1.5), "STILL": (1.5, 1.5), "BACK": (1.5, 1.0)}.items():
        for date, lean in zip(("2025-05-01", "2026-05-01"), leans, strict=True):
            rows.append(worked_wall(wall, 2.0, lean_deg=lean, survey_date=date, drainage="working"))
    rows.append(worked_wall("GONE", 1.0, lean_deg=4.0, survey_date="2026-05-01", drainage="blocked"))
    run = evaluate(pd.DataFrame(rows))
    walls = run.walls.set_index("wall_id")
    assert list(CRITICAL_COLUMNS) == [c for c in walls.columns if c in CRITICAL_COLUMNS]
    g = walls.loc["GROW"]
    rate = 0.5 / (365 / 365.25)
    assert_allclose(g.lean_rate_deg_per_year, rate)
    assert_allclose(g.years_to_critical_lean, (g.critical_lean_deg - 1.5) / rate)
    assert 1.5 < g.critical_lean_deg < 45
    assert np.isnan(walls.loc["STILL", "years_to_critical_lean"])
    assert np.isnan(walls.loc["BACK", "years_to_critical_lean"])
    assert walls.loc["GONE", "critical_lean_deg"] == 4.0 and walls.loc["GONE", "years_to_critical_lean"] == 0
    # the reason says the years with the caution of §9 beside them
    assert "in about" in g.reason and "a projection, not a prediction" in g.reason
    assert_allclose(
        critical.years_to_critical_lean([3.0, 2.0, np.nan], [1.0, 2.0, 1.0], [0.5, np.nan, 1.0]),
        [4.0, 0.0, np.nan],
    )


def test_the_reason_says_where_the_water_decides() -> None:
    # a wall that passes drained and fails with the drains blocked: the reason gives the height
    reg = pd.DataFrame([worked_wall("W", 2.0, drainage="working")])
    walls = evaluate(reg).walls
    h = float(walls.critical_water_height_m.iloc[0])
    assert 0 < h < 3.0
    assert f"fails once water rises above {h:.1f} m of 3.0 m" in walls.reason.iloc[0]
