"""Settings of a screening run: required factors, case definitions and the defaults
that fill blanks in a sparse register.

Every default carries its source, because an owner must be able to see on what
ground a blank was filled (method.md §7). The whole object is frozen; load a
variant from TOML with :func:`load_config`.
"""

from __future__ import annotations

import copyreg
import dataclasses
import difflib
import math
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

from screening.errors import ConfigError
from screening.priority import PrioritySettings

GAMMA_W_KN_M3 = 9.81
"""Unit weight of water [kN/m³]."""

MATERIALS = ("mass_concrete", "stone_masonry", "brick_masonry", "drystone")
FOUNDATIONS = ("rock", "gravel", "sand", "stiff_clay", "firm_clay", "soft_clay")
DRAINAGE_STATES = ("working", "partial", "blocked", "unknown")
CONSEQUENCES = ("railway", "road", "building", "footpath", "open_land")
CASES = ("drained", "blocked", "surveyed")
PAPER_SIZES = ("A4", "A3", "letter", "legal")


# a frozen mapping pickles as its plain dict, so that Config pickles (chunks sent to other processes)
def _mapping_proxy(items: dict[str, Any]) -> MappingProxyType[str, Any]:
    return MappingProxyType(items)


copyreg.pickle(MappingProxyType, lambda m: (_mapping_proxy, (dict(m),)))


def _frozen(mapping: Mapping[str, Any]) -> Mapping[str, Any]:
    return MappingProxyType(dict(mapping))


@dataclass(frozen=True)
class Default:
    """A value used where the register is blank, with where it comes from."""

    value: float
    source: str


@dataclass(frozen=True)
class CaseCriteria:
    """Required factors and the limit on the resultant for one case (method.md §12).

    ``None`` takes the top-level value (``fos_sliding_required``, ``fos_overturning_required``;
    ``resultant_limit`` 1/3, the middle third).
    """

    fos_sliding_required: float | None = None
    fos_overturning_required: float | None = None
    resultant_limit: float | None = None
    """Fraction of B/2 that the eccentricity |e| may reach (1/3: the middle third; 1/2: 75 % of
    the base in compression)."""


BY_LOAD_CATEGORY = _frozen(
    {
        "drained": CaseCriteria(1.5, 2.0, 1 / 3),
        "blocked": CaseCriteria(1.33, 1.5, 1 / 2),
        "surveyed": CaseCriteria(1.5, 2.0, 1 / 3),
    }
)
BY_LOAD_CATEGORY_SOURCE = (
    "by_load_category: drained and surveyed usual, blocked unusual; values from memory of "
    "US Army Corps of Engineers EM 1110-2-2100, §3-6 (load categories)"
)
"""The built-in criteria set ``criteria = "by_load_category"``."""


@dataclass(frozen=True)
class Config:
    """All options of a screening run, with the source of every default.

    Attributes mirror method.md; change them in a TOML file (see
    ``sample_inventory/config.toml``), never in code.
    """

    # --- required factors of safety (common practice, e.g. Das; from memory)
    fos_sliding_required: float = 1.5
    fos_overturning_required: float = 2.0
    # --- loads
    uplift: bool = True
    gamma_w_kn_m3: float = GAMMA_W_KN_M3
    # --- surveyed case: water height as a fraction of the retained height
    # (EN 1997-1 §9.6 via Bond & Harris: water to the top of the fill when
    # drainage cannot be relied on; "partial" at half height is our choice)
    drainage_water_fraction: Mapping[str, float] = field(
        default_factory=lambda: _frozen({"working": 0.0, "partial": 0.5, "blocked": 1.0, "unknown": 1.0})
    )
    # --- wall unit weight by material [kN/m³]
    wall_unit_weight_kn_m3: Mapping[str, Default] = field(
        default_factory=lambda: _frozen(
            {
                "mass_concrete": Default(24.0, "EN 1991-1-1 Annex A, plain concrete"),
                "stone_masonry": Default(22.0, "EN 1991-1-1 Annex A, stone masonry"),
                "brick_masonry": Default(20.0, "EN 1991-1-1 Annex A, brick masonry"),
                "drystone": Default(18.0, "solid stone less 20-45 % voids (common practice, no source)"),
            }
        )
    )
    material_default: str = "stone_masonry"
    """Material assumed when the register gives neither material nor unit weight."""
    # --- backfill
    soil_unit_weight_kn_m3: Default = Default(19.0, "common practice for granular fill")
    soil_saturated_unit_weight_kn_m3: Default = Default(20.0, "common practice for granular fill")
    soil_friction_deg: Default = Default(30.0, "common practice, conservative for granular fill")
    wall_friction_deg: Default = Default(0.0, "conservative: smooth back")
    backfill_slope_deg: Default = Default(0.0, "level backfill assumed")
    surcharge_kpa: Default = Default(10.0, "BS 8002:1994 minimum surcharge")
    joint_friction_deg: Default = Default(35.0, "masonry on masonry, NAVFAC DM 7.02 Table 1")
    lean_deg: Default = Default(0.0, "no lean recorded: plumb assumed")
    front_batter_m: Default = Default(0.0, "no batter recorded: vertical front assumed")
    # --- every bed joint of a masonry wall (method.md §8; GEO Report 31, Hong Kong; Alejano et
    # al., Géotechnique 62(11), 2012: old masonry fails on bed joints above the base)
    joint_planes: int = 10
    """N: the planes z = k·H/N, k = 1 … N−1, are checked; 0 (or 1) switches the check off."""
    joint_check_materials: tuple[str, ...] = ("stone_masonry", "brick_masonry", "drystone")
    """Materials whose bed joints are checked (mass concrete is monolithic between lifts)."""
    # --- bearing resistance after EN 1997-1 Annex D, where foundation_friction_deg is given (§10)
    fos_bearing_required: float = 3.0
    """Global factor on the ultimate bearing resistance (customary; common practice, from memory)."""
    foundation_cohesion_kpa: Default = Default(0.0, "not recorded: no effective cohesion (conservative)")
    foundation_unit_weight_kn_m3: Default = Default(19.0, "common practice for granular soil")
    embedment_m: Default = Default(
        0.0, "not recorded: base at the level of the ground in front (conservative)"
    )
    # --- passive resistance in front of the toe (method.md §11)
    passive_mobilisation: float = 0.0
    """Share m of the Rankine passive resistance added to the base's sliding resistance; 0 ignores
    it (method.md §3). Full passive resistance needs far more movement than the active state, so
    a half or less is customary where it is relied on at all (common practice, from memory)."""
    toe_excavation_m: float = 0.0
    """Depth of unplanned excavation in front of the toe taken off the embedment (trenches and
    regrading; BS 8002 allows for unplanned excavation, common practice)."""
    # --- criteria per case (method.md §12): empty = the top-level factors in every case
    criteria: Mapping[str, CaseCriteria] = field(default_factory=lambda: _frozen({}))
    criteria_source: str = ""
    """Where the criteria per case come from (shown in the outputs)."""
    # --- foundation: (allowable bearing kPa, base friction deg)
    foundation_allowable_bearing_kpa: Mapping[str, float] = field(
        default_factory=lambda: _frozen(
            {
                "rock": 1000.0,
                "gravel": 200.0,
                "sand": 100.0,
                "stiff_clay": 150.0,
                "firm_clay": 75.0,
                "soft_clay": 40.0,
            }
        )
    )
    foundation_base_friction_deg: Mapping[str, float] = field(
        default_factory=lambda: _frozen(
            {
                "rock": 35.0,
                "gravel": 29.0,
                "sand": 24.0,
                "stiff_clay": 17.0,
                "firm_clay": 17.0,
                "soft_clay": 17.0,
            }
        )
    )
    foundation_source: str = (
        "presumed values after BS 8004:1986 Table 1 and NAVFAC DM 7.02 Table 1 "
        "(conservative ends of their ranges)"
    )
    foundation_default: str = "firm_clay"
    """Foundation class assumed when the register is blank (a cautious middle choice)."""
    # --- priority (see screening/priority.py)
    consequence_weight: Mapping[str, float] = field(
        default_factory=lambda: _frozen(
            {"open_land": 1.0, "footpath": 2.0, "road": 3.0, "building": 4.0, "railway": 5.0}
        )
    )
    consequence_default: str = "road"
    lean_rate_threshold_deg_per_year: float = 0.25
    """Lean growing faster than this is flagged. Two surveys with a digital inclinometer on a
    masonry face each read to about ±0.1° (common practice, from memory), so a change below
    about 0.2° between surveys a year apart cannot be told from survey scatter."""
    condition_default: Default = Default(3.0, "not recorded: middle of the 1-5 scale assumed")
    priority: PrioritySettings = field(default_factory=PrioritySettings)
    # --- outputs
    resultant_near_toe_m: float = 0.020
    """A resultant this close to the toe (0 < x_R < this) gives a correct but absurd toe pressure:
    the outputs say "resultant within 20 mm of the toe" instead (results.csv keeps the number)."""
    workbook_full_results_limit: int = 1_000
    """Registers with more walls keep only this many walls, first in the ranking, on the
    workbook's per-case sheet (results.csv always has every wall)."""
    # --- uncertainty (method.md §13): draws, standing today, probability of failure
    samples: int = 2000
    """Draws per wall (n); 0 switches the probabilities off."""
    seed: int = 20261201
    """Seed of the one matrix of draws per run (numpy's PCG64): the same seed, the same figures."""
    p_stands_min: float = 0.01
    """Below this share of draws in which the wall could stand, its figures cannot be right."""
    sd_soil_friction_recorded_deg: float = 2.0
    sd_soil_friction_default_deg: float = 4.0
    sd_soil_unit_weight_recorded: float = 0.05
    """Fractions of the value (γ; γ_sat follows)."""
    sd_soil_unit_weight_default: float = 0.10
    sd_wall_unit_weight_recorded: float = 0.05
    sd_wall_unit_weight_default: float = 0.10
    sd_wall_unit_weight_drystone: float = 0.10
    """Drystone's voids vary from wall to wall: this SD whether recorded or not."""
    sd_base_friction_recorded_deg: float = 2.0
    sd_base_friction_default_deg: float = 4.0
    sd_joint_friction_recorded_deg: float = 2.0
    sd_joint_friction_default_deg: float = 4.0
    sd_ultimate_bearing_log: float = 0.30
    """SD of ln q_ult (a lognormal about the median)."""
    ultimate_bearing_factor: float = 3.0
    """Median ultimate bearing pressure = this × the allowable (presumed values carry about 3)."""
    sd_dimensions: Mapping[str, float] = field(
        default_factory=lambda: _frozen({"measured": 0.02, "recorded": 0.05, "estimated": 0.20})
    )
    """SD of the one factor on B, t and f, by ``dimensions_source`` (blank reads recorded)."""
    samples_chunk: int = 200_000
    """Wall-draws evaluated per pass of the engine (bounds the working memory)."""
    # --- reading spreadsheets: a sheet over these is refused before any cell is read
    max_cells: int = 2_000_000
    """Cells a sheet may span (rows x columns of its extent, stray far cells included)."""
    max_sheet_mb: float = 200.0
    """Uncompressed size a sheet (and the shared strings) may have [MB]."""
    paper: str = "A4"
    """Paper the workbook and the calculation sheets are laid out for: A4, A3, letter or legal."""
    # --- run
    chunk_size: int = 20_000
    """Walls screened per pass; larger registers go through the engine in chunks, which bounds
    its working memory and keeps its arrays in cache (20,000 was fastest here: benchmarks/)."""

    def __post_init__(self) -> None:
        _validate(self)

    @property
    def criteria_set(self) -> bool:
        """Whether criteria per case are in use (then ``resultant`` replaces ``middle_third``)."""
        return bool(self.criteria)

    def case_criteria(self) -> dict[str, CaseCriteria]:
        """The required factors and resultant limit of every case, missing keys filled."""
        out = {}
        for case in CASES:
            c = self.criteria.get(case, CaseCriteria())
            out[case] = CaseCriteria(
                self.fos_sliding_required if c.fos_sliding_required is None else c.fos_sliding_required,
                self.fos_overturning_required
                if c.fos_overturning_required is None
                else c.fos_overturning_required,
                1 / 3 if c.resultant_limit is None else c.resultant_limit,
            )
        return out

    def to_dict(self) -> dict[str, Any]:
        """Plain nested dict of every setting (for the settings sheet and the history)."""

        def plain(value: Any) -> Any:
            if dataclasses.is_dataclass(value) and not isinstance(value, (Default, type)):
                return {f.name: plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
            if isinstance(value, Default):
                return {"value": value.value, "source": value.source}
            if isinstance(value, Mapping):
                return {k: plain(v) for k, v in value.items()}
            return value

        return {f.name: plain(getattr(self, f.name)) for f in dataclasses.fields(self)}


@dataclass(frozen=True)
class Rule:
    """A range a numeric setting must lie in (every number must also be finite)."""

    lo: float | None
    hi: float | None
    expected: str
    lo_open: bool = False

    def holds(self, value: object) -> bool:
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            return False
        if self.lo is not None and (value <= self.lo if self.lo_open else value < self.lo):
            return False
        return self.hi is None or value <= self.hi


_FACTOR = Rule(0, 100, "a finite factor above 0 and up to 100", lo_open=True)
_UNIT_WEIGHT = Rule(10, 30, "a unit weight between 10 and 30 kN/m³ (as in the register)")
_ANGLE_POS = Rule(0, 50, "an angle above 0° and up to 50°", lo_open=True)
NUMBER_RULES: Mapping[str, Rule] = _frozen(
    {
        "fos_sliding_required": _FACTOR,
        "fos_overturning_required": _FACTOR,
        "fos_bearing_required": _FACTOR,
        "gamma_w_kn_m3": Rule(9.0, 10.6, "the unit weight of water, 9.0 to 10.6 kN/m³ (fresh to sea water)"),
        "drainage_water_fraction": Rule(0, 1, "a fraction of the retained height from 0 to 1"),
        "wall_unit_weight_kn_m3": _UNIT_WEIGHT,
        "soil_unit_weight_kn_m3": _UNIT_WEIGHT,
        "soil_saturated_unit_weight_kn_m3": Rule(
            9.81, 30, "a saturated unit weight above that of water (9.81) and up to 30 kN/m³", lo_open=True
        ),
        "soil_friction_deg": _ANGLE_POS,
        "wall_friction_deg": Rule(0, 45, "an angle between 0° and 45°"),
        "backfill_slope_deg": Rule(-45, 45, "a slope between -45° and 45°"),
        "surcharge_kpa": Rule(0, 500, "a surcharge between 0 and 500 kPa"),
        "joint_friction_deg": _ANGLE_POS,
        "lean_deg": Rule(-30, 30, "a lean between -30° and 30°"),
        "front_batter_m": Rule(0, 10, "a front batter from 0 to 10 m"),
        "joint_planes": Rule(0, 1000, "a whole number from 0 (off) to 1000"),
        "foundation_cohesion_kpa": Rule(0, 500, "an effective cohesion between 0 and 500 kPa"),
        "foundation_unit_weight_kn_m3": _UNIT_WEIGHT,
        "embedment_m": Rule(0, 25, "an embedment of 0 m or more (up to 25 m)"),
        "passive_mobilisation": Rule(0, 1, "a share from 0 to 1"),
        "toe_excavation_m": Rule(0, 25, "a depth of 0 m or more (up to 25 m)"),
        "resultant_near_toe_m": Rule(0, 1, "a distance from 0 to 1 m (0 switches the words off)"),
        "samples": Rule(0, 1_000_000, "a whole number of draws from 0 (off) to 1,000,000"),
        "seed": Rule(0, 2**63 - 1, "a whole number from 0"),
        "samples_chunk": Rule(1, 1e12, "a whole number of wall-draws of 1 or more"),
        "p_stands_min": Rule(0, 0.999999, "a share from 0 up to (not including) 1"),
        "ultimate_bearing_factor": Rule(0, 100, "a factor above 0", lo_open=True),
        "sd_soil_friction_recorded_deg": Rule(0, 20, "an SD from 0 (draws reach 3 SD)"),
        "sd_soil_friction_default_deg": Rule(0, 20, "an SD from 0 (draws reach 3 SD)"),
        "sd_soil_unit_weight_recorded": Rule(0, 0.333, "an SD from 0 (draws reach 3 SD)"),
        "sd_soil_unit_weight_default": Rule(0, 0.333, "an SD from 0 (draws reach 3 SD)"),
        "sd_wall_unit_weight_recorded": Rule(0, 0.333, "an SD from 0 (draws reach 3 SD)"),
        "sd_wall_unit_weight_default": Rule(0, 0.333, "an SD from 0 (draws reach 3 SD)"),
        "sd_wall_unit_weight_drystone": Rule(0, 0.333, "an SD from 0 (draws reach 3 SD)"),
        "sd_base_friction_recorded_deg": Rule(0, 20, "an SD from 0 (draws reach 3 SD)"),
        "sd_base_friction_default_deg": Rule(0, 20, "an SD from 0 (draws reach 3 SD)"),
        "sd_joint_friction_recorded_deg": Rule(0, 20, "an SD from 0 (draws reach 3 SD)"),
        "sd_joint_friction_default_deg": Rule(0, 20, "an SD from 0 (draws reach 3 SD)"),
        "sd_ultimate_bearing_log": Rule(0, 20, "an SD from 0 (draws reach 3 SD)"),
        "foundation_allowable_bearing_kpa": Rule(0, 1e5, "an allowable bearing pressure above 0 kPa", True),
        "foundation_base_friction_deg": _ANGLE_POS,
        "consequence_weight": Rule(0, 1e6, "a weight above 0", lo_open=True),
        "lean_rate_threshold_deg_per_year": Rule(0, 90, "a rate above 0°/yr", lo_open=True),
        "condition_default": Rule(1, 5, "a condition rating from 1 to 5"),
        "workbook_full_results_limit": Rule(0, 1_048_000, "a whole number of walls from 0 to 1,048,000"),
        "chunk_size": Rule(1, 10_000_000, "a whole number of walls from 1 to 10,000,000"),
        "max_cells": Rule(1, 1_048_576 * 16_384, "a whole number of cells above 0"),
        "max_sheet_mb": Rule(0, 1e6, "a size above 0 MB", lo_open=True),
        "priority.weight_structural": Rule(0, 10, "a weight from 0 to 10"),
        "priority.weight_condition": Rule(0, 10, "a weight from 0 to 10"),
        "priority.weight_lean": Rule(0, 10, "a weight from 0 to 10"),
        "priority.weight_crack": Rule(0, 10, "a weight from 0 to 10"),
        "priority.weight_lean_rate": Rule(0, 10, "a weight from 0 to 10"),
        "priority.weight_surveyed_case": Rule(0, 1, "a share from 0 to 1"),
        "priority.utilisation_scale": Rule(0, 100, "a scale above 0", lo_open=True),
        "priority.lean_full_deg": Rule(0, 90, "an angle above 0°", lo_open=True),
        "priority.lean_rate_full_deg_per_year": Rule(0, 90, "a rate above 0°/yr", lo_open=True),
        "priority.height_full_m": Rule(0, 100, "a height above 0 m", lo_open=True),
        "priority.band_thresholds": Rule(0, 100, "a score from 0 to 100"),
    }
)
"""Every numeric setting and the range it must lie in; NaN and infinity are always refused."""


def class_rules(c: Config) -> dict[str, tuple[Any, tuple[str, ...], bool]]:
    """Settings that name classes: setting -> (the names given, the classes, whether all are needed).

    A table keyed by class needs every class (a missing key would leave a NaN default);
    a single name or a list needs only known classes.
    """
    consequences = tuple(c.consequence_weight)
    return {
        "material_default": ([c.material_default], MATERIALS, False),
        "foundation_default": ([c.foundation_default], FOUNDATIONS, False),
        "consequence_default": ([c.consequence_default], consequences, False),
        "joint_check_materials": (list(c.joint_check_materials), MATERIALS, False),
        "wall_unit_weight_kn_m3": (list(c.wall_unit_weight_kn_m3), MATERIALS, True),
        "drainage_water_fraction": (list(c.drainage_water_fraction), DRAINAGE_STATES, True),
        "foundation_allowable_bearing_kpa": (list(c.foundation_allowable_bearing_kpa), FOUNDATIONS, True),
        "foundation_base_friction_deg": (list(c.foundation_base_friction_deg), FOUNDATIONS, True),
        "priority.band_thresholds": (
            list(c.priority.band_thresholds),
            ("inspect_first", "inspect_soon", "routine"),
            True,
        ),
    }


def _suggestion(name: object, options: tuple[str, ...] | list[str]) -> str:
    close = difflib.get_close_matches(str(name), list(options), n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def _numbers_of(c: Config, name: str) -> list[tuple[str, object]]:
    """(label, value) of every number a rule applies to: a Default's value, each item of a table."""
    head, _, tail = name.partition(".")
    value = getattr(c.priority, tail) if head == "priority" else getattr(c, name)
    if isinstance(value, Default):
        return [(name, value.value)]
    if isinstance(value, Mapping):
        return [(f"{name}.{k}", v.value if isinstance(v, Default) else v) for k, v in value.items()]
    return [(name, value)]


def _validate(c: Config) -> None:
    """Reject settings that cannot be right, naming the setting, the value and what is expected."""

    def need(ok: bool, name: str, value: object, expected: str) -> None:
        if not ok:
            raise ConfigError(f"setting {name} = {value!r}: expected {expected}")

    for name, (given, classes, complete) in class_rules(c).items():
        for g in given:
            need(g in classes, name, g, f"one of {', '.join(classes)}{_suggestion(g, classes)}")
        missing = [k for k in classes if k not in given] if complete else []
        need(not missing, name, given, f"a value for every class: {', '.join(missing)} missing")
    for name, rule in NUMBER_RULES.items():
        for label, value in _numbers_of(c, name):
            need(rule.holds(value), label, value, rule.expected + " (a finite number)")
    for name in (
        "joint_planes",
        "workbook_full_results_limit",
        "chunk_size",
        "max_cells",
        "samples",
        "seed",
        "samples_chunk",
    ):
        value = getattr(c, name)
        need(isinstance(value, int) and not isinstance(value, bool), name, value, "a whole number")
    _validate_uncertainty(c, need)
    need(c.paper in PAPER_SIZES, "paper", c.paper, f"one of {', '.join(PAPER_SIZES)}")
    _validate_criteria(c, need)


def _validate_criteria(c: Config, need: Any) -> None:
    for case, crit in c.criteria.items():
        need(case in CASES, "criteria", case, f"a table per case, named from {CASES}")
        for key in ("fos_sliding_required", "fos_overturning_required"):
            value = getattr(crit, key)
            need(value is None or _FACTOR.holds(value), f"criteria.{case}.{key}", value, "a factor above 0")
        limit = crit.resultant_limit
        need(
            limit is None or Rule(0, 1, "", lo_open=True).holds(limit),
            f"criteria.{case}.resultant_limit",
            limit,
            "a fraction of B/2 above 0 and up to 1 "
            "(1/3 = middle third, 1/2 = 75 % of the base in compression)",
        )


DIMENSION_SOURCES = ("measured", "recorded", "estimated")


def _validate_uncertainty(c: Config, need: Any) -> None:
    """The settings of method.md §13 beyond the range table (NUMBER_RULES): the SD per source of
    the dimensions."""
    need(
        set(c.sd_dimensions) == set(DIMENSION_SOURCES),
        "sd_dimensions",
        dict(c.sd_dimensions),
        f"one SD for each of {', '.join(DIMENSION_SOURCES)}",
    )
    for key, value in c.sd_dimensions.items():
        need(0 <= value < 1 / 3, f"sd_dimensions.{key}", value, "a fraction from 0 up to 1/3")


def _criteria(value: Any) -> tuple[Mapping[str, CaseCriteria], str]:
    """``criteria = "by_load_category"`` or ``[criteria.<case>]`` tables (method.md §12)."""
    if isinstance(value, str):
        if value != "by_load_category":
            raise ConfigError(
                f'setting criteria = {value!r}: expected "by_load_category" or [criteria.<case>] tables'
            )
        return BY_LOAD_CATEGORY, BY_LOAD_CATEGORY_SOURCE
    if not isinstance(value, Mapping):
        raise ConfigError('setting criteria: expected "by_load_category" or [criteria.<case>] tables')
    keys = {f.name for f in dataclasses.fields(CaseCriteria)}
    out: dict[str, CaseCriteria] = {}
    for case, table in value.items():
        if case not in CASES:
            raise ConfigError(f"setting criteria: unknown case {case!r}; the cases are {', '.join(CASES)}")
        if not isinstance(table, Mapping):
            raise ConfigError(f"setting criteria.{case}: expected a table with {', '.join(sorted(keys))}")
        unknown = set(table) - keys
        if unknown:
            raise ConfigError(
                f"setting criteria.{case}: unknown key(s) {sorted(unknown)}; "
                f"known keys are {', '.join(sorted(keys))}"
            )
        for k, v in table.items():
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                raise ConfigError(f"setting criteria.{case}.{k} = {v!r}: expected a number")
        out[case] = CaseCriteria(**{k: float(v) for k, v in table.items()})
    return _frozen(out), "criteria per case set in the config file"


def load_config(path: str | Path | None) -> Config:
    """Read a TOML file of overrides onto the defaults.

    Keys are the attribute names of :class:`Config`. A ``Default`` may be given as
    a number (the source then reads "set in <file>") or as a table with ``value``
    and ``source``. Mappings are merged key by key.
    """
    base = Config()
    if path is None:
        return base
    path = Path(path)
    data = read_toml(path, "config file", ConfigError)
    known = {f.name: f for f in dataclasses.fields(base)}
    changes: dict[str, Any] = {}
    for key, value in data.items():
        if key not in known:
            raise ConfigError(
                f"{path}: unknown setting {key!r}{_suggestion(key, sorted(known))}; "
                f"known settings are {', '.join(sorted(known))}"
            )
        _change(path, base, key, value, changes)
    try:
        return dataclasses.replace(base, **changes)
    except ConfigError as exc:
        raise ConfigError(f"{path}: {exc}") from exc


def read_toml(path: Path, what: str, error: type[Exception]) -> dict[str, Any]:
    """A TOML file as a dict; an unreadable, non-UTF-8 or malformed file is one clear error."""
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise error(f"cannot read the {what} {path}: {exc.strerror or exc}") from exc
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise error(
            f"{path}: the {what} is not UTF-8 text (byte 0x{data[exc.start]:02x} at offset {exc.start}); "
            "save it as UTF-8"
        ) from exc
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise error(f"{path}: the {what} is not valid TOML: {exc}") from exc


def _number(path: Path, key: str, value: object) -> float:
    """A TOML number as float; text, true/false or a table is a clear error naming the key."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ConfigError(f"{path}: setting {key} = {value!r}: expected a number")
    return float(value)


def _table(
    path: Path, key: str, current: Mapping[str, Any], value: Any, open_keys: bool
) -> Mapping[str, Any]:
    """Merge a TOML table onto a table setting key by key; unknown keys only where classes are open."""
    if not isinstance(value, Mapping):
        raise ConfigError(f"{path}: setting {key!r} must be a table")
    merged = dict(current)
    for k, v in value.items():
        if k not in merged and not open_keys:
            raise ConfigError(
                f"{path}: setting {key}: unknown key {k!r}{_suggestion(k, list(current))}; "
                f"known keys are {', '.join(current)}"
            )
        old = merged.get(k)
        if isinstance(old, Default):
            merged[k] = Default(_number(path, f"{key}.{k}", v), f"set in {path.name}")
        else:
            merged[k] = _number(path, f"{key}.{k}", v)
    return _frozen(merged)


def _change(path: Path, base: Config, key: str, value: Any, changes: dict[str, Any]) -> None:
    """Turn one TOML setting into the value of the Config field ``key`` (into ``changes``)."""
    current = getattr(base, key)
    if key == "criteria":
        try:
            changes["criteria"], source = _criteria(value)
        except ConfigError as exc:
            raise ConfigError(f"{path}: {exc}") from exc
        changes.setdefault("criteria_source", source)
    elif key == "joint_check_materials":
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            raise ConfigError(f'{path}: setting {key!r} must be a list of materials, e.g. ["drystone"]')
        changes[key] = tuple(value)
    elif isinstance(current, PrioritySettings):
        changes[key] = _priority(path, current, value)
    elif isinstance(current, Default):
        if isinstance(value, Mapping):
            if "value" not in value:
                raise ConfigError(f"{path}: setting {key}: a table needs value (and source)")
            changes[key] = Default(_number(path, key, value["value"]), str(value.get("source", path.name)))
        else:
            changes[key] = Default(_number(path, key, value), f"set in {path.name}")
    elif isinstance(current, Mapping):
        # consequence classes are the owner's own; every other table is keyed by fixed classes
        changes[key] = _table(path, key, current, value, open_keys=key == "consequence_weight")
    elif isinstance(current, bool):
        if not isinstance(value, bool):
            raise ConfigError(f"{path}: setting {key!r} must be true or false")
        changes[key] = value
    elif isinstance(current, (int, float)):
        number = _number(path, key, value)
        if isinstance(current, int) and not number.is_integer():
            raise ConfigError(f"{path}: setting {key!r} must be a whole number, got {value!r}")
        changes[key] = type(current)(number)
    elif not isinstance(value, str):
        raise ConfigError(f"{path}: setting {key} = {value!r}: expected text")
    else:
        changes[key] = value


def _priority(path: Path, current: PrioritySettings, value: Any) -> PrioritySettings:
    """The [priority] table: known keys only, numbers only, band thresholds merged."""
    if not isinstance(value, Mapping):
        raise ConfigError(f"{path}: setting 'priority' must be a table")
    names = [f.name for f in dataclasses.fields(current)]
    for k in value:
        if k not in names:
            raise ConfigError(f"{path}: unknown [priority] setting {k!r}{_suggestion(k, names)}")
    sub: dict[str, Any] = {
        k: (
            _table(path, "priority.band_thresholds", current.band_thresholds, v, open_keys=False)
            if k == "band_thresholds"
            else _number(path, f"priority.{k}", v)
        )
        for k, v in value.items()
    }
    return dataclasses.replace(current, **sub)
