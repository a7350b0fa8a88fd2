"""Criteria per case (method.md §12) and the validation of the new settings."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from screening import Config, screen
from screening.config import BY_LOAD_CATEGORY_SOURCE, CaseCriteria, load_config
from screening.errors import ConfigError
from tests.conftest import worked_wall


def _config(tmp_path: Path, text: str) -> Config:
    path = tmp_path / "config.toml"
    path.write_text(text, encoding="utf-8")
    return load_config(path)


def _register() -> pd.DataFrame:
    return pd.DataFrame(
        [
            worked_wall("B20", 2.0, drainage="partial", crack_height_m=1.0),
            worked_wall("B25", 2.5, drainage="working", material="drystone"),
        ]
    )


def test_by_load_category(tmp_path: Path) -> None:
    # values from memory of US Army Corps EM 1110-2-2100 §3-6: usual (drained, surveyed) 1/3,
    # 1.5, 2.0; unusual (blocked) 1/2, 1.33, 1.5; named as such in the outputs
    cfg = _config(tmp_path, 'criteria = "by_load_category"\n')
    crit = cfg.case_criteria()
    assert crit["drained"] == crit["surveyed"] == CaseCriteria(1.5, 2.0, 1 / 3)
    assert crit["blocked"] == CaseCriteria(1.33, 1.5, 0.5)
    assert "EM 1110-2-2100" in cfg.criteria_source and cfg.criteria_source == BY_LOAD_CATEGORY_SOURCE
    assert cfg.to_dict()["criteria"]["blocked"]["resultant_limit"] == 0.5
    res = screen(_register(), cfg).set_index(["wall_id", "case"])
    base = screen(_register()).set_index(["wall_id", "case"])
    width = {"B20": 2.0, "B25": 2.5}
    for (wall, case), r in res.iterrows():
        c = crit[str(case)]
        assert_allclose(r.sliding_utilisation, c.fos_sliding_required / r.fos_sliding)
        assert_allclose(r.overturning_utilisation, c.fos_overturning_required / r.fos_overturning)
        # a case's factors apply to the crack and joint planes alike (method.md §12)
        b = base.loc[(wall, case)]
        for plane in ("crack_sliding", "joint_sliding"):
            assert_allclose(
                r[f"{plane}_utilisation"] if f"{plane}_utilisation" in r else np.nan,
                b[f"{plane}_utilisation"] * c.fos_sliding_required / 1.5
                if f"{plane}_utilisation" in b
                else np.nan,
                equal_nan=True,
            )
        # the middle third is always reported; the resultant takes its place in the governing check
        assert_allclose(r.middle_third_utilisation, b.middle_third_utilisation)
        assert_allclose(
            r.resultant_utilisation, abs(r.eccentricity_m) / (c.resultant_limit * width[wall] / 2)
        )
        assert r.governing_check != "middle_third"
    assert (res.governing_check == "resultant").any()
    assert base.resultant_utilisation.isna().all()


def test_case_tables_take_the_top_level_for_missing_keys(tmp_path: Path) -> None:
    cfg = _config(
        tmp_path,
        "fos_sliding_required = 1.6\n[criteria.blocked]\nfos_overturning_required = 1.4\nresultant_limit = 0.5\n",
    )
    crit = cfg.case_criteria()
    assert crit["blocked"] == CaseCriteria(1.6, 1.4, 0.5)
    assert crit["drained"] == crit["surveyed"] == CaseCriteria(1.6, 2.0, 1 / 3)
    res = screen(_register(), cfg).set_index(["wall_id", "case"])
    r = res.loc[("B20", "blocked")]
    assert_allclose(r.resultant_utilisation, abs(r.eccentricity_m) / (0.5 * 1.0))
    assert_allclose(r.overturning_utilisation, 1.4 / r.fos_overturning)
    # with criteria set, `resultant` governs even where the limit is the middle third's 1/3
    d = res.loc[("B25", "drained")]
    assert_allclose(d.resultant_utilisation, d.middle_third_utilisation)
    assert d.governing_check != "middle_third"


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ('criteria = "strict"\n', "by_load_category"),
        ("[criteria.flooded]\nresultant_limit = 0.5\n", "unknown case 'flooded'"),
        ("[criteria.blocked]\nfos_slide = 1.2\n", "unknown key"),
        ("[criteria.blocked]\nresultant_limit = 0.0\n", "criteria.blocked.resultant_limit"),
        ("[criteria.blocked]\nfos_sliding_required = -1\n", "a factor above 0"),
        ('[criteria.blocked]\nfos_sliding_required = "high"\n', "expected a number"),
        ("joint_planes = 2.5\n", "whole number"),
        ("joint_planes = -1\n", "joint_planes"),
        ('joint_check_materials = ["granite"]\n', "joint_check_materials"),
        ('joint_check_materials = "drystone"\n', "list of materials"),
        ("passive_mobilisation = 1.5\n", "a share from 0 to 1"),
        ("toe_excavation_m = -0.5\n", "0 m or more"),
        ("fos_bearing_required = 0\n", "fos_bearing_required"),
    ],
)
def test_bad_settings_are_named(tmp_path: Path, text: str, words: str) -> None:
    with pytest.raises(ConfigError, match=r"config\.toml") as err:
        _config(tmp_path, text)
    assert words in str(err.value)


def test_new_settings_from_toml(tmp_path: Path) -> None:
    cfg = _config(
        tmp_path,
        'joint_planes = 6\njoint_check_materials = ["drystone"]\npassive_mobilisation = 0.5\n'
        "toe_excavation_m = 0.3\nfos_bearing_required = 2.5\n[embedment_m]\nvalue = 0.4\n"
        'source = "typical of the owner\'s records"\n',
    )
    assert cfg.joint_planes == 6 and cfg.joint_check_materials == ("drystone",)
    assert (cfg.passive_mobilisation, cfg.toe_excavation_m, cfg.fos_bearing_required) == (0.5, 0.3, 2.5)
    assert cfg.embedment_m.value == 0.4 and "owner" in cfg.embedment_m.source
    assert not cfg.criteria_set
