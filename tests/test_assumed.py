"""The compact assumptions (screening.assumed): one row per wall, the sources in a table of their
own, and nothing lost against the one-fact-per-row form."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from screening.assumed import Assumptions, Recorder, read_assumptions, write_assumptions
from screening.prepare import prepare

WALL = {"height_m": 3.0, "base_width_m": 1.5, "top_width_m": 0.6}


def _register() -> pd.DataFrame:
    return pd.DataFrame(
        [
            {"wall_id": "BLANK", **WALL},  # material and unit weight blank: the material default
            {"wall_id": "UW", **WALL, "wall_unit_weight_kn_m3": 21.0},  # the material decides the joints
            {"wall_id": "MC", **WALL, "material": "mass_concrete", "foundation": "rock"},
            {"wall_id": "REC", **WALL, "drainage": "working", "surcharge_kpa": 5.0, "lean_deg": 1.0},
        ]
    )


def test_one_row_per_wall_and_the_long_form_keeps_each_source() -> None:
    a = prepare(_register()).assumptions
    assert list(a.table["wall_id"]) == ["BLANK", "UW", "MC", "REC"]
    long = a.long().set_index(["wall_id", "column"])
    # the material default has two sources: not recorded, and deciding the bed-joint check
    assert long.loc[("BLANK", "material"), "source"] == "config material_default: not recorded"
    assert "decides whether the bed joints are checked" in long.loc[("UW", "material"), "source"]
    assert ("REC", "surcharge_kpa") not in long.index and ("MC", "surcharge_kpa") in long.index
    assert long.loc[("MC", "wall_unit_weight_kn_m3"), "value"] == 24.0
    assert len(a) == len(long)
    # the sources say how many walls took each
    sources = a.sources.set_index(["column", "source"])["walls"]
    assert sources[("surcharge_kpa", sources.loc["surcharge_kpa"].index[0])] == 3


def test_the_two_files_read_back_to_the_same_facts(tmp_path: Path) -> None:
    a = prepare(_register()).assumptions
    write_assumptions(a, tmp_path)
    table = pd.read_csv(tmp_path / "assumptions.csv")
    assert len(table) == 4 and "material source" in table  # two sources of material: numbered
    assert "surcharge_kpa source" not in table  # one source: no number needed
    back = read_assumptions(tmp_path).long()
    before = a.long()
    for col in ("wall_id", "column", "source"):
        assert list(back[col].astype(str)) == list(before[col].astype(str)), col
    assert list(back["row"]) == list(before["row"])
    x, y = back["value"].astype(str).to_numpy(), before["value"].astype(str).to_numpy()
    numbers = pd.to_numeric(before["value"], errors="coerce").notna().to_numpy()
    assert (x[~numbers] == y[~numbers]).all()
    assert np.allclose(
        back["value"][numbers].astype(float), before["value"][numbers].astype(float), rtol=1e-5
    )


def test_rows_keeps_only_the_screened_walls_in_row_order() -> None:
    a = prepare(_register()).assumptions
    kept = a.rows([5, 3])
    assert list(kept.table["row"]) == [3, 5]
    assert set(kept.long()["wall_id"]) == {"UW", "REC"}
    assert kept.sources["walls"].sum() == len(kept)


def test_a_missing_default_value_is_still_recorded_in_the_file(tmp_path: Path) -> None:
    rec = Recorder(2)
    rec.add("x", np.array([True, False]), np.nan, "a default without a value")
    a = rec.build(pd.Series(["A", "B"]), pd.Series([2, 3]))
    write_assumptions(a, tmp_path)
    assert "x source" in pd.read_csv(tmp_path / "assumptions.csv")
    long = read_assumptions(tmp_path).long()
    assert list(long["wall_id"]) == ["A"] and long["source"].iloc[0] == "a default without a value"


def test_two_defaults_for_one_cell_are_refused() -> None:
    rec = Recorder(1)
    rec.add("x", np.array([True]), 1.0, "first")
    with pytest.raises(ValueError, match="two defaults for x"):
        rec.add("x", np.array([True]), 2.0, "second")


def test_no_defaults() -> None:
    a = Assumptions.none()
    assert (
        a.empty
        and len(a.long()) == 0
        and list(a.long().columns) == ["wall_id", "row", "column", "value", "source"]
    )


def test_the_workbook_sheets_from_the_compact_form_equal_those_of_the_long_form() -> None:
    # the 'Assumed' sheets are built column by column from the compact form (no long form at 10^5
    # walls); they must be the rows, in the order, that the one-fact-per-row form gives
    from benchmarks.run import synthetic_register
    from screening.outputs import workbook

    register = pd.concat([_register(), synthetic_register(300)], ignore_index=True)
    a = prepare(register).assumptions
    long = a.long()
    pd.testing.assert_frame_equal(
        workbook._compact_summary(a),
        workbook._assumption_summary(long).reset_index(drop=True),
        check_dtype=False,
    )
    pd.testing.assert_frame_equal(
        workbook._compact_per_wall(a),
        workbook._assumptions_per_wall(long).reset_index(drop=True),
        check_dtype=False,
    )
    empty = prepare(pd.DataFrame([{"wall_id": "X", **WALL}])).assumptions.rows([])
    assert workbook._compact_per_wall(empty).empty and workbook._compact_summary(empty).empty
