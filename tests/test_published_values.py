"""Every value of the reference method's table of published check values (method.md §6) and
its defaults (§7), each with its source beside it. Ka values are in test_earth_pressure.py and
the worked cases in test_engine.py; these are the rest."""

from __future__ import annotations

import math

import pandas as pd
import pytest

from screening.config import Config
from screening.prepare import prepare
from tests.conftest import worked_wall

C = Config()


def test_base_friction_mass_concrete_on_gravel() -> None:
    # NAVFAC DM 7.02 (1986), Table 1: mass concrete on clean gravel / sand-gravel, tan δ 0.55-0.60
    assert 0.55 <= math.tan(math.radians(C.foundation_base_friction_deg["gravel"])) <= 0.60


def test_masonry_on_masonry_friction() -> None:
    # NAVFAC DM 7.02 (1986), Table 1: masonry on masonry 0.70 (the joint friction default, 35°)
    assert math.tan(math.radians(C.joint_friction_deg.value)) == pytest.approx(0.70, abs=0.005)


def test_water_to_the_top_of_the_fill_when_drainage_is_not_reliable() -> None:
    # EN 1997-1 §9.6 (via Bond & Harris, Decoding Eurocode 7): h_w = H_r when drainage is not reliable
    reg = pd.DataFrame(
        [
            worked_wall("U", 2.0, drainage="unknown", retained_height_m=2.6),
            worked_wall("B", 2.0, drainage="blocked", retained_height_m=2.6),
        ]
    )
    assert prepare(reg).walls.surveyed_water_height_m.tolist() == [2.6, 2.6]


def test_minimum_surcharge() -> None:
    # BS 8002:1994: minimum surcharge on retaining walls 10 kPa
    assert C.surcharge_kpa.value == 10.0 and "BS 8002" in C.surcharge_kpa.source


def test_customary_factors_of_safety() -> None:
    # common practice (e.g. Das; from memory): sliding 1.5, overturning 2.0
    assert (C.fos_sliding_required, C.fos_overturning_required) == (1.5, 2.0)


def test_plain_concrete_unit_weight() -> None:
    # EN 1991-1-1 Annex A: plain concrete 24 kN/m³
    assert C.wall_unit_weight_kn_m3["mass_concrete"].value == 24.0


def test_defaults_for_a_sparse_register() -> None:
    # method.md §7 (EN 1991-1-1 Annex A; common practice for granular fill; presumed bearing after
    # BS 8004:1986 Table 1 and NAVFAC DM 7.02 Table 1, conservative ends, from memory)
    assert {k: d.value for k, d in C.wall_unit_weight_kn_m3.items()} == {
        "mass_concrete": 24.0,
        "stone_masonry": 22.0,
        "brick_masonry": 20.0,
        "drystone": 18.0,
    }
    assert (
        C.soil_unit_weight_kn_m3.value,
        C.soil_saturated_unit_weight_kn_m3.value,
        C.soil_friction_deg.value,
    ) == (19.0, 20.0, 30.0)
    assert (C.wall_friction_deg.value, C.backfill_slope_deg.value) == (0.0, 0.0)
    assert dict(C.foundation_allowable_bearing_kpa) == {
        "rock": 1000.0,
        "gravel": 200.0,
        "sand": 100.0,
        "stiff_clay": 150.0,
        "firm_clay": 75.0,
        "soft_clay": 40.0,
    }
    assert dict(C.foundation_base_friction_deg) == {
        "rock": 35.0,
        "gravel": 29.0,
        "sand": 24.0,
        "stiff_clay": 17.0,
        "firm_clay": 17.0,
        "soft_clay": 17.0,
    }
    assert dict(C.drainage_water_fraction) == {"working": 0.0, "partial": 0.5, "blocked": 1.0, "unknown": 1.0}
