"""Settings of a screening run: required factors, case definitions and the defaults
that fill blanks in a sparse register.

Every default carries its source, because an owner must be able to see on what
ground a blank was filled (method.md §7). The whole object is frozen; load a
variant from TOML with :func:`load_config`.
"""

from __future__ import annotations

import dataclasses
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
    workbook_full_results_limit: int = 1_000
    """Registers with more walls keep only this many walls, first in the ranking, on the
    workbook's per-case sheet (results.csv always has every wall)."""
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


def _validate(c: Config) -> None:
    """Reject settings that cannot be right, naming the setting, the value and what is expected."""

    def need(ok: bool, name: str, value: object, expected: str) -> None:
        if not ok:
            raise ConfigError(f"setting {name} = {value!r}: expected {expected}")

    for name in ("fos_sliding_required", "fos_overturning_required", "fos_bearing_required"):
        value = getattr(c, name)
        need(value > 0, name, value, "a factor above 0")
    need(
        isinstance(c.joint_planes, int) and 0 <= c.joint_planes <= 1000,
        "joint_planes",
        c.joint_planes,
        "a whole number from 0 (off) to 1000",
    )
    unknown = [m for m in c.joint_check_materials if m not in MATERIALS]
    need(not unknown, "joint_check_materials", list(c.joint_check_materials), f"materials from {MATERIALS}")
    need(
        0 <= c.passive_mobilisation <= 1,
        "passive_mobilisation",
        c.passive_mobilisation,
        "a share from 0 to 1",
    )
    need(c.paper in PAPER_SIZES, "paper", c.paper, f"one of {', '.join(PAPER_SIZES)}")
    need(c.toe_excavation_m >= 0, "toe_excavation_m", c.toe_excavation_m, "a depth of 0 m or more")
    for case, crit in c.criteria.items():
        need(case in CASES, "criteria", case, f"a table per case, named from {CASES}")
        for key in ("fos_sliding_required", "fos_overturning_required"):
            value = getattr(crit, key)
            need(value is None or value > 0, f"criteria.{case}.{key}", value, "a factor above 0")
        limit = crit.resultant_limit
        need(
            limit is None or 0 < limit <= 1,
            f"criteria.{case}.resultant_limit",
            limit,
            "a fraction of B/2 above 0 and up to 1 "
            "(1/3 = middle third, 1/2 = 75 % of the base in compression)",
        )


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
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise ConfigError(f"cannot read the config file {path}: {exc}") from exc
    known = {f.name: f for f in dataclasses.fields(base)}
    changes: dict[str, Any] = {}
    for key, value in data.items():
        if key not in known:
            raise ConfigError(
                f"{path}: unknown setting {key!r}; known settings are {', '.join(sorted(known))}"
            )
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
            if not isinstance(value, Mapping):
                raise ConfigError(f"{path}: setting {key!r} must be a table")
            names = {f.name for f in dataclasses.fields(current)}
            unknown = set(value) - names
            if unknown:
                raise ConfigError(f"{path}: unknown [priority] setting(s) {sorted(unknown)}")
            sub: dict[str, Any] = {
                k: (_frozen({**current.band_thresholds, **v}) if k == "band_thresholds" else float(v))
                for k, v in value.items()
            }
            changes[key] = dataclasses.replace(current, **sub)
        elif isinstance(current, Default):
            if isinstance(value, Mapping):
                changes[key] = Default(float(value["value"]), str(value.get("source", path.name)))
            else:
                changes[key] = Default(float(value), f"set in {path.name}")
        elif isinstance(current, Mapping):
            if not isinstance(value, Mapping):
                raise ConfigError(f"{path}: setting {key!r} must be a table")
            merged = dict(current)
            for k, v in value.items():
                old = merged.get(k)
                if isinstance(old, Default):
                    merged[k] = Default(float(v), f"set in {path.name}")
                else:
                    merged[k] = float(v)
            changes[key] = _frozen(merged)
        elif isinstance(current, bool):
            if not isinstance(value, bool):
                raise ConfigError(f"{path}: setting {key!r} must be true or false")
            changes[key] = value
        elif isinstance(current, (int, float)):
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise ConfigError(f"{path}: setting {key!r} must be a number, got {value!r}")
            if isinstance(current, int) and not float(value).is_integer():
                raise ConfigError(f"{path}: setting {key!r} must be a whole number, got {value!r}")
            changes[key] = type(current)(value)
        else:
            changes[key] = str(value)
    try:
        return dataclasses.replace(base, **changes)
    except ConfigError as exc:
        raise ConfigError(f"{path}: {exc}") from exc
