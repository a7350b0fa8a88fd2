"""The canonical register columns (shared/inventory.md) and their fixed types.

One glossary: these names are also the parameter names of the engine.
"""

from __future__ import annotations

from screening.config import DRAINAGE_STATES, FOUNDATIONS, MATERIALS

REQUIRED = ("wall_id", "height_m", "base_width_m", "top_width_m")

NUMERIC = (
    "lat",
    "lon",
    "easting",
    "northing",
    "height_m",
    "base_width_m",
    "top_width_m",
    "front_batter_m",
    "retained_height_m",
    "lean_deg",
    "crack_height_m",
    "wall_unit_weight_kn_m3",
    "soil_unit_weight_kn_m3",
    "soil_saturated_unit_weight_kn_m3",
    "soil_friction_deg",
    "wall_friction_deg",
    "backfill_slope_deg",
    "surcharge_kpa",
    "base_friction_deg",
    "joint_friction_deg",
    "allowable_bearing_kpa",
    "water_height_m",
    "condition_rating",
)

CODED = {
    "material": MATERIALS,
    "foundation": FOUNDATIONS,
    "drainage": DRAINAGE_STATES,
    # consequence classes come from the config (they are configurable)
    "consequence": None,
}

TEXT = ("wall_id", "name", "geometry", "notes")
DATES = ("survey_date",)

COLUMNS = (
    "wall_id",
    "name",
    "lat",
    "lon",
    "easting",
    "northing",
    "geometry",
    "height_m",
    "base_width_m",
    "top_width_m",
    "front_batter_m",
    "retained_height_m",
    "lean_deg",
    "crack_height_m",
    "material",
    "wall_unit_weight_kn_m3",
    "soil_unit_weight_kn_m3",
    "soil_saturated_unit_weight_kn_m3",
    "soil_friction_deg",
    "wall_friction_deg",
    "backfill_slope_deg",
    "surcharge_kpa",
    "foundation",
    "base_friction_deg",
    "joint_friction_deg",
    "allowable_bearing_kpa",
    "drainage",
    "water_height_m",
    "condition_rating",
    "consequence",
    "survey_date",
    "notes",
)
"""Every canonical column, in the order of shared/inventory.md."""

UNITS = {
    "lat": "°",
    "lon": "°",
    "easting": "m",
    "northing": "m",
    "height_m": "m",
    "base_width_m": "m",
    "top_width_m": "m",
    "front_batter_m": "m",
    "retained_height_m": "m",
    "lean_deg": "°, + outwards",
    "crack_height_m": "m",
    "wall_unit_weight_kn_m3": "kN/m³",
    "soil_unit_weight_kn_m3": "kN/m³",
    "soil_saturated_unit_weight_kn_m3": "kN/m³",
    "soil_friction_deg": "°",
    "wall_friction_deg": "°",
    "backfill_slope_deg": "°",
    "surcharge_kpa": "kPa",
    "base_friction_deg": "°",
    "joint_friction_deg": "°",
    "allowable_bearing_kpa": "kPa",
    "water_height_m": "m",
    "condition_rating": "1 good … 5 very poor",
}
