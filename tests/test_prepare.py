"""Validation and defaults: every problem names row, column, value and expectation."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from screening import Config, evaluate
from screening.prepare import prepare
from tests.conftest import worked_wall


def _problems(reg: pd.DataFrame) -> pd.DataFrame:
    return prepare(reg).problems


def test_good_rows_are_screened_and_bad_rows_named() -> None:
    reg = pd.DataFrame(
        [
            worked_wall("OK1", 2.0),
            worked_wall("NEG", 2.0, top_width_m=2.5),  # b < 0
            worked_wall("TXT", 2.0, height_m="three"),
            worked_wall("SLOPE", 2.0, backfill_slope_deg=31.0),  # β ≥ φ'
            worked_wall("OK2", 2.0),
        ]
    )
    run = evaluate(reg)
    assert set(run.walls.wall_id) == {"OK1", "OK2"}
    errs = run.problems[run.problems.severity == "error"]
    # rows as the user sees them: header is row 1, first wall row 2
    by_wall = errs.set_index("wall_id")
    assert by_wall.loc["NEG", "row"] == 3 and by_wall.loc["NEG", "column"] == "base_width_m"
    assert by_wall.loc["TXT", "row"] == 4 and by_wall.loc["TXT", "value"] == "three"
    assert "number" in by_wall.loc["TXT", "message"]
    assert by_wall.loc["SLOPE", "column"] == "backfill_slope_deg"
    assert run.n_rejected == 3


@pytest.mark.parametrize(
    ("change", "column", "words"),
    [
        ({"wall_id": None}, "wall_id", "required"),
        ({"height_m": np.nan}, "height_m", "required"),
        ({"top_width_m": 0.0}, "top_width_m", "above 0"),
        ({"retained_height_m": 5.0}, "retained_height_m", "above the wall height"),
        ({"water_height_m": 3.5, "retained_height_m": 3.0}, "water_height_m", "above the retained"),
        ({"crack_height_m": 3.0}, "crack_height_m", "below the wall height"),
        ({"material": "granite"}, "material", "expected one of"),
        ({"drainage": "clogged"}, "drainage", "expected one of"),
        ({"condition_rating": 7}, "condition_rating", "1 to 5"),
        ({"lat": 153.7, "lon": 53.0}, "lat", "swapped"),
        ({"lean_deg": 40.0}, "lean_deg", "between"),
        ({"survey_date": "last spring"}, "survey_date", "date"),
    ],
)
def test_each_rule_rejects_with_a_message(change, column, words) -> None:
    reg = pd.DataFrame([{**worked_wall("X", 2.0), **change}, worked_wall("GOOD", 2.0)])
    problems = _problems(reg)
    hit = problems[(problems.column == column) & (problems.severity == "error")]
    assert len(hit) == 1, problems
    assert words in hit.message.iloc[0]
    assert hit.row.iloc[0] == 2
    assert set(prepare(reg).walls.wall_id) == {"GOOD"}


def test_warnings_keep_the_row() -> None:
    reg = pd.DataFrame([worked_wall("TALL", 2.0, height_m=40.0), worked_wall("LEAN", 2.0, lean_deg=12.0)])
    p = prepare(reg)
    assert set(p.walls.wall_id) == {"TALL", "LEAN"}
    assert set(p.problems.severity) == {"warning"}
    assert p.problems.message.str.contains("millimetres").any()


def test_duplicate_wall_id_within_a_survey() -> None:
    reg = pd.DataFrame([worked_wall("D", 2.0), worked_wall("D", 2.5)])
    problems = _problems(reg)
    assert problems.loc[0, "row"] == 3 and "unique" in problems.loc[0, "message"]


def test_same_wall_at_two_survey_dates_screens_the_latest() -> None:
    reg = pd.DataFrame(
        [
            worked_wall("S", 2.0, survey_date="2026-05-01", lean_deg=2.0),
            worked_wall("S", 2.0, survey_date="2025-05-01"),
        ]
    )
    p = prepare(reg)
    assert len(p.walls) == 1 and p.walls.lean_deg.iloc[0] == 2.0
    assert len(p.earlier_surveys) == 1


def test_every_default_is_recorded_with_its_source() -> None:
    # a sparse row: only the required columns
    reg = pd.DataFrame([{"wall_id": "SPARSE", "height_m": 3.0, "base_width_m": 1.5, "top_width_m": 0.6}])
    p = prepare(reg)
    a = p.assumptions.long().set_index("column")
    # method.md §7 defaults
    assert a.loc["surcharge_kpa", "value"] == 10.0 and "BS 8002" in a.loc["surcharge_kpa", "source"]
    assert a.loc["soil_friction_deg", "value"] == 30.0
    assert a.loc["wall_unit_weight_kn_m3", "value"] == 22.0  # stone masonry assumed
    assert (
        a.loc["allowable_bearing_kpa", "value"] == 75.0
        and "BS 8004" in a.loc["allowable_bearing_kpa", "source"]
    )
    assert a.loc["retained_height_m", "value"] == 3.0
    assert a.loc["drainage", "value"] == "unknown"
    assert a.loc["surveyed water_height_m", "value"] == 3.0  # unknown -> H_r
    assert p.walls.surveyed_water_height_m.iloc[0] == 3.0


def test_material_and_foundation_tables() -> None:
    # EN 1991-1-1 Annex A unit weights; presumed bearing after BS 8004 Table 1
    rows = [
        {"wall_id": m, "height_m": 2, "base_width_m": 1, "top_width_m": 0.5, "material": m, "foundation": f}
        for m, f in [("mass_concrete", "rock"), ("brick_masonry", "sand"), ("drystone", "soft_clay")]
    ]
    w = prepare(pd.DataFrame(rows)).walls.set_index("wall_id")
    assert w.loc["mass_concrete", "wall_unit_weight_kn_m3"] == 24.0
    assert w.loc["brick_masonry", "wall_unit_weight_kn_m3"] == 20.0
    assert w.loc["drystone", "wall_unit_weight_kn_m3"] == 18.0
    assert w.loc["mass_concrete", "allowable_bearing_kpa"] == 1000.0
    assert w.loc["brick_masonry", "base_friction_deg"] == 24.0
    assert w.loc["drystone", "allowable_bearing_kpa"] == 40.0


def test_partial_drainage_half_height_is_configurable() -> None:
    reg = pd.DataFrame([worked_wall("P", 2.0, drainage="partial")])
    assert prepare(reg).walls.surveyed_water_height_m.iloc[0] == 1.5
    cfg = Config(drainage_water_fraction={"working": 0, "partial": 0.75, "blocked": 1, "unknown": 1})
    assert prepare(reg, cfg).walls.surveyed_water_height_m.iloc[0] == 2.25


def test_register_is_not_modified() -> None:
    reg = pd.DataFrame([worked_wall("A", 2.0, height_m="3")])
    before = reg.copy()
    evaluate(reg)
    pd.testing.assert_frame_equal(reg, before)


@pytest.mark.parametrize(
    ("change", "column", "words"),
    [
        ({"wall_friction_deg": 32.0}, "wall_friction_deg", "δ > φ'"),
        ({"soil_saturated_unit_weight_kn_m3": 17.0}, "soil_saturated_unit_weight_kn_m3", "γ_sat < γ"),
        ({"lean_deg": 6.0}, "lean_deg", "check the survey"),
        ({"lean_deg": -6.0}, "lean_deg", "check the survey"),
        ({"embedment_m": 4.0}, "embedment_m", "deeper than the wall"),
    ],
)
def test_implausible_figures_warn_and_keep_the_row(change, column, words) -> None:
    reg = pd.DataFrame([{**worked_wall("X", 2.0), **change}, worked_wall("GOOD", 2.0)])
    p = prepare(reg)
    assert set(p.walls.wall_id) == {"X", "GOOD"}
    hit = p.problems[p.problems.column == column]
    assert len(hit) == 1 and hit.severity.iloc[0] == "warning" and words in hit.message.iloc[0]
    assert hit.row.iloc[0] == 2


@pytest.mark.parametrize(
    ("change", "column", "words"),
    [
        ({"foundation_friction_deg": 0.0}, "foundation_friction_deg", "above 0°"),
        ({"foundation_friction_deg": "firm"}, "foundation_friction_deg", "number"),
        ({"foundation_cohesion_kpa": -5.0}, "foundation_cohesion_kpa", "between 0 and 500"),
        ({"foundation_unit_weight_kn_m3": 45.0}, "foundation_unit_weight_kn_m3", "between 10 and 30"),
        ({"embedment_m": -0.2}, "embedment_m", "0 m or more"),
    ],
)
def test_foundation_soil_columns_are_validated(change, column, words) -> None:
    reg = pd.DataFrame([{**worked_wall("X", 2.0), **change}, worked_wall("GOOD", 2.0)])
    problems = _problems(reg)
    hit = problems[(problems.column == column) & (problems.severity == "error")]
    assert len(hit) == 1 and words in hit.message.iloc[0], problems
    assert set(prepare(reg).walls.wall_id) == {"GOOD"}


def test_foundation_soil_defaults_are_recorded_where_used() -> None:
    # method.md §10/§11: c' 0, γ_f 19, embedment 0, recorded for the walls that use them
    # (Annex D where φ'_f is given; with passive_mobilisation on, every wall)
    reg = pd.DataFrame([worked_wall("AD", 2.0, foundation_friction_deg=30.0), worked_wall("PR", 2.0)])
    p = prepare(reg)
    facts = p.assumptions.long()
    used = set(facts.loc[facts.wall_id == "AD", "column"])
    assert {"foundation_cohesion_kpa", "foundation_unit_weight_kn_m3", "embedment_m"} <= used
    assert not {"foundation_cohesion_kpa", "embedment_m"} & set(facts.loc[facts.wall_id == "PR", "column"])
    filled = p.walls.set_index("wall_id")
    assert filled.loc["PR", "foundation_unit_weight_kn_m3"] == 19.0 and filled.loc["PR", "embedment_m"] == 0.0
    assert np.isnan(filled.loc["PR", "foundation_friction_deg"])
    passive = prepare(reg, Config(passive_mobilisation=0.5)).assumptions.long()
    assert {"foundation_unit_weight_kn_m3", "embedment_m"} <= set(
        passive.loc[passive.wall_id == "PR", "column"]
    )
