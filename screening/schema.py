"""The canonical register columns (shared/inventory.md) and their fixed types.

One glossary: these names are also the parameter names of the engine.
"""

from __future__ import annotations

from screening.config import DIMENSION_SOURCES, DRAINAGE_STATES, FOUNDATIONS, MATERIALS
from screening.core.engine import ENGINE_INPUTS as ENGINE_INPUTS  # the engine declares what it reads

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
    "foundation_friction_deg",
    "foundation_cohesion_kpa",
    "foundation_unit_weight_kn_m3",
    "embedment_m",
    "water_height_m",
    "condition_rating",
)

LOCATION = ("lat", "lon", "easting", "northing")

CODED = {
    "material": MATERIALS,
    "foundation": FOUNDATIONS,
    "drainage": DRAINAGE_STATES,
    "dimensions_source": DIMENSION_SOURCES,
    # consequence classes come from the config (they are configurable)
    "consequence": None,
}

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
    "dimensions_source",
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
    "foundation_friction_deg",
    "foundation_cohesion_kpa",
    "foundation_unit_weight_kn_m3",
    "embedment_m",
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
    "foundation_friction_deg": "°",
    "foundation_cohesion_kpa": "kPa",
    "foundation_unit_weight_kn_m3": "kN/m³",
    "embedment_m": "m",
    "water_height_m": "m",
    "condition_rating": "1 good … 5 very poor",
}

DESCRIPTIONS = {
    "wall_id": "the owner's identifier; unique per survey",
    "name": "description, e.g. street and side",
    "lat": "latitude, WGS84 degrees (with lon)",
    "lon": "longitude, WGS84 degrees (with lat)",
    "easting": "easting in the CRS named in the mapping file (with northing)",
    "northing": "northing in the CRS named in the mapping file (with easting)",
    "geometry": "the wall's line (or point) as WKT in WGS84, start to end",
    "height_m": "underside of base to top of wall",
    "base_width_m": "width of the base",
    "top_width_m": "width at the top",
    "front_batter_m": "horizontal set-back of the front face over the height (0 = vertical)",
    "dimensions_source": "how the base width, top width and batter are known: measured, recorded "
    "(from drawings or records; the default) or estimated",
    "retained_height_m": "retained ground above the underside of the base at the back (default: the height)",
    "lean_deg": "measured out-of-plumb, positive when the top leans outwards",
    "crack_height_m": "height of a known horizontal through-crack above the underside of the base",
    "material": "mass_concrete, stone_masonry, brick_masonry or drystone (sets the unit weight)",
    "wall_unit_weight_kn_m3": "unit weight of the wall; overrides the material's",
    "soil_unit_weight_kn_m3": "unit weight of the retained soil above the water",
    "soil_saturated_unit_weight_kn_m3": "saturated unit weight of the retained soil",
    "soil_friction_deg": "angle of shearing resistance φ' of the retained soil",
    "wall_friction_deg": "friction δ on the virtual back",
    "backfill_slope_deg": "slope β of the retained surface",
    "surcharge_kpa": "uniform surcharge on the retained surface",
    "foundation": "rock, gravel, sand, stiff_clay, firm_clay or soft_clay (sets bearing and friction)",
    "base_friction_deg": "friction angle δ_b for sliding on the base",
    "joint_friction_deg": "friction across a crack or lift joint",
    "allowable_bearing_kpa": "allowable bearing pressure under the toe",
    "foundation_friction_deg": "φ' of the soil under the base; when given, bearing uses EN 1997-1 Annex D",
    "foundation_cohesion_kpa": "effective cohesion c' of the soil under the base (default 0)",
    "foundation_unit_weight_kn_m3": "unit weight of the soil under and in front of the base (default 19)",
    "embedment_m": "depth of the underside of the base below the ground in front (default 0)",
    "drainage": "surveyed state of the drainage: working, partial, blocked or unknown",
    "water_height_m": "measured water level behind the wall above the underside of the base",
    "condition_rating": "surveyor's overall condition, 1 (good) to 5 (very poor)",
    "consequence": "what a failure would hit: railway, road, building, footpath or open_land",
    "survey_date": "date of the survey the row describes (YYYY-MM-DD)",
    "notes": "free text; carried through, never interpreted",
}
"""What each canonical column means (shared/inventory.md), for the template's guide."""
