"""Shared fixtures: small registers in canonical columns."""

from __future__ import annotations

import pandas as pd
import pytest

# The worked closed-form cases of method.md §6: rectangular wall H = 3, γ_wall = 24,
# γ = 18, γ_sat = 20, φ' = 30°, δ = 0, tan δ_b = 0.5, no surcharge, linear uplift.
WORKED = {
    "height_m": 3.0,
    "top_width_m": None,  # = base width (rectangular)
    "front_batter_m": 0.0,
    "wall_unit_weight_kn_m3": 24.0,
    "soil_unit_weight_kn_m3": 18.0,
    "soil_saturated_unit_weight_kn_m3": 20.0,
    "soil_friction_deg": 30.0,
    "wall_friction_deg": 0.0,
    "backfill_slope_deg": 0.0,
    "surcharge_kpa": 0.0,
    "base_friction_deg": 26.56505117707799,  # atan(0.5)
    "joint_friction_deg": 35.0,
    "allowable_bearing_kpa": 200.0,
    "lean_deg": 0.0,
}


def worked_wall(wall_id: str, base_width_m: float, **extra: object) -> dict[str, object]:
    row: dict[str, object] = dict(WORKED, wall_id=wall_id, base_width_m=base_width_m)
    row["top_width_m"] = base_width_m
    row.update(extra)
    return row


@pytest.fixture
def worked_register() -> pd.DataFrame:
    return pd.DataFrame(
        [
            worked_wall("B15", 1.5, drainage="working"),
            worked_wall("B20", 2.0, drainage="blocked"),
        ]
    )
