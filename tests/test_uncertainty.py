"""Probability of failure given that the wall stands today (method.md §13)."""

from __future__ import annotations

import math
import pickle

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from benchmarks.run import synthetic_register
from benchmarks.scalar import check_wall
from screening import evaluate
from screening.config import Config
from screening.core import uncertainty
from screening.errors import ConfigError
from screening.pipeline import LocalRunner, evaluate_chunk, split_prepared
from screening.prepare import prepare
from tests.conftest import worked_wall

REGISTER = synthetic_register(60, seed=3)


def _p(run, column: str = "p_failure") -> pd.Series:
    r = run.results
    return r.set_index(["wall_id", "case"])[column].sort_index()


@pytest.fixture(scope="module")
def base_run():
    return evaluate(REGISTER, Config(samples=2000))


def _binomial_ok(a: np.ndarray, na: float, b: np.ndarray, nb: float, z: float = 4.5) -> np.ndarray:
    """|a − b| within z standard errors of the difference of two shares (plus a small floor)."""
    p = (a + b) / 2
    se = np.sqrt(p * (1 - p) * (1 / na + 1 / nb))
    return np.abs(a - b) <= z * se + 2 / na


def test_converges_to_a_run_of_50000_draws(base_run) -> None:
    # binomial sampling error of a share estimated from n draws (common statistics, no source)
    big = evaluate(REGISTER, Config(samples=50_000))
    a, b = _p(base_run), _p(big)
    walls_a = base_run.walls.set_index("wall_id")
    walls_b = big.walls.set_index("wall_id")
    stands = walls_a["p_stands"].reindex(a.index.get_level_values(0)).to_numpy() * 2000
    stands_b = walls_b["p_stands"].reindex(b.index.get_level_values(0)).to_numpy() * 50_000
    ok = np.isnan(a.to_numpy()) | np.isnan(b.to_numpy())
    ok |= _binomial_ok(a.to_numpy(), np.maximum(stands, 1), b.to_numpy(), np.maximum(stands_b, 1))
    assert ok.all()
    ps = walls_a["p_stands"].to_numpy()
    assert _binomial_ok(ps, 2000, walls_b["p_stands"].reindex(walls_a.index).to_numpy(), 50_000).all()


def test_common_random_numbers_shuffle_subset_and_chunking(base_run) -> None:
    a = _p(base_run)
    shuffled = evaluate(REGISTER.sample(frac=1.0, random_state=7), Config(samples=2000))
    subset = evaluate(REGISTER.iloc[[5, 17, 40]], Config(samples=2000))
    small = evaluate(REGISTER, Config(samples=2000, chunk_size=7, samples_chunk=3_000))
    pd.testing.assert_series_equal(a, _p(shuffled))
    pd.testing.assert_series_equal(a.loc[_p(subset).index], _p(subset))
    pd.testing.assert_series_equal(a, _p(small))
    for col in ("p_failure_prior", "p_outside_middle_third", "driver"):
        pd.testing.assert_series_equal(_p(base_run, col), _p(small, col))
    stands = base_run.walls.set_index("wall_id")["p_stands"].sort_index()
    pd.testing.assert_series_equal(stands, shuffled.walls.set_index("wall_id")["p_stands"].sort_index())


def test_enormous_margins_give_zero_failure_and_certain_standing() -> None:
    reg = pd.DataFrame([worked_wall("BIG", 6.0, height_m=1.0, drainage="working", foundation="rock")])
    run = evaluate(reg, Config(samples=2000))
    assert (run.results["p_failure"] == 0).all()
    assert (run.results["p_failure_prior"] == 0).all()
    assert run.walls.loc[0, "p_stands"] == 1.0 and not run.walls.loc[0, "data_inconsistent"]


def test_recorded_figures_failing_drained_by_far_are_inconsistent() -> None:
    # every figure recorded; 0.4 m of base under 3 m of soil slides and topples drained many times over
    reg = pd.DataFrame([worked_wall("THIN", 0.4, drainage="working", dimensions_source="measured")])
    run = evaluate(reg, Config(samples=2000))
    w = run.walls.iloc[0]
    assert w["data_inconsistent"] and w["p_stands"] < 0.01
    assert w["priority_band"] == "check_data"
    assert run.results["p_failure"].isna().all() and run.results["p_failure_prior"].notna().all()
    assert "check the data first" in w["reason"]


def test_bounds_on_shares() -> None:
    run = evaluate(REGISTER, Config(samples=500))
    r, w = run.results, run.walls
    for col in ("p_failure", "p_failure_prior", "p_outside_middle_third"):
        v = r[col].dropna()
        assert ((v >= 0) & (v <= 1)).all()
    assert ((w["p_stands"] >= 0) & (w["p_stands"] <= 1)).all()
    # p_failure's denominator is the standing draws, never more than the draws: p·k must be whole
    k = w.set_index("wall_id")["p_stands"].reindex(r["wall_id"]).to_numpy() * 500
    counts = r["p_failure"].to_numpy() * k
    ok = np.isnan(counts) | (np.abs(counts - np.round(counts)) < 1e-6)
    assert ok.all() and (k <= 500 + 1e-9).all()
    assert (r.loc[r["case"] == "drained", "p_failure"].dropna() == 0).all()


def test_one_wall_against_scipy_draws_and_a_plain_loop() -> None:
    # independent: scipy.stats distributions, draws of our own, the per-wall implementation of
    # benchmarks/scalar.py for each draw, the limit states of method.md §13 written out here
    wall = worked_wall("W", 1.6, drainage="partial", material="mass_concrete", foundation="sand")
    wall.pop("wall_unit_weight_kn_m3")
    run = evaluate(pd.DataFrame([wall]), Config(samples=4000))
    ours = run.results.set_index("case")
    prep = prepare(pd.DataFrame([wall]))
    base = {k: float(v[0]) for k, v in prep.inputs.items()}
    n = 600
    rng = np.random.default_rng(11)
    phi = np.clip(stats.norm(30.0, 2.0).rvs(n, random_state=rng), 15, 50)
    gamma = 18.0 * (1 + 0.05 * stats.truncnorm(-3, 3).rvs(n, random_state=rng))
    wall_gamma = 24.0 * (1 + 0.10 * stats.truncnorm(-3, 3).rvs(n, random_state=rng))
    delta = np.clip(stats.norm(base["base_friction_deg"], 2.0).rvs(n, random_state=rng), 5, 45)
    q_ult = stats.lognorm(s=0.30, scale=3 * 200.0).rvs(n, random_state=rng)
    scale = 1 + 0.05 * stats.truncnorm(-3, 3).rvs(n, random_state=rng)
    water = stats.uniform(0.25 * 3.0, 0.5 * 3.0).rvs(n, random_state=rng)
    stands, fails = 0, {"blocked": 0, "surveyed": 0}
    for i in range(n):
        w = dict(base)
        w.update(
            soil_friction_deg=phi[i],
            soil_unit_weight_kn_m3=gamma[i],
            soil_saturated_unit_weight_kn_m3=gamma[i] + 2.0,
            wall_unit_weight_kn_m3=wall_gamma[i],
            base_friction_deg=delta[i],
            base_width_m=1.6 * scale[i],
            top_width_m=1.6 * scale[i],
        )
        cases = {"drained": 0.0, "blocked": 3.0, "surveyed": water[i]}
        failed = {
            c: _fails(check_wall(w, hw, Config()), w["base_width_m"], q_ult[i]) for c, hw in cases.items()
        }
        if failed["drained"]:
            continue
        stands += 1
        for c in fails:
            fails[c] += failed[c]
    for case in fails:
        p_loop = fails[case] / stands
        p_ours = ours.loc[case, "p_failure"]
        k = run.walls.loc[0, "p_stands"] * 4000
        assert _binomial_ok(np.array([p_ours]), k, np.array([p_loop]), stands).all(), (case, p_ours, p_loop)
    assert _binomial_ok(np.array([run.walls.loc[0, "p_stands"]]), 4000, np.array([stands / n]), n).all()


def _fails(res: dict, width: float, q_ult: float) -> bool:
    """The ultimate limit states of method.md §13 for one draw of a wall without crack or joints."""
    if not res["vertical_kn_m"] > 0:
        return True
    x_r = res["resultant_from_toe_m"]
    if x_r <= 0 or x_r >= width:
        return True
    q_max = max(res["toe_pressure_kpa"], res["heel_pressure_kpa"])
    return bool(res["fos_sliding"] < 1 or q_max > q_ult or not math.isfinite(q_max))


@settings(max_examples=15, deadline=None)
@given(
    base=st.floats(1.2, 3.0),
    condition=st.integers(1, 4),
    drains=st.sampled_from([("working", "partial"), ("partial", "blocked"), ("working", "blocked")]),
    consequences=st.sampled_from([("open_land", "road"), ("road", "railway"), ("footpath", "building")]),
)
def test_worse_condition_consequence_or_drainage_never_lowers_the_score(
    base, condition, drains, consequences
) -> None:
    rows = [
        worked_wall("A", base, drainage=drains[0], condition_rating=condition, consequence=consequences[0]),
        worked_wall(
            "COND", base, drainage=drains[0], condition_rating=condition + 1, consequence=consequences[0]
        ),
        worked_wall(
            "CONS", base, drainage=drains[0], condition_rating=condition, consequence=consequences[1]
        ),
        worked_wall(
            "DRAIN", base, drainage=drains[1], condition_rating=condition, consequence=consequences[0]
        ),
    ]
    walls = evaluate(pd.DataFrame(rows), Config(samples=300)).walls.set_index("wall_id")
    score = walls["priority_score"]
    for twin in ("COND", "CONS", "DRAIN"):
        assert score[twin] >= score["A"] - 1e-9, twin


def test_chunk_function_and_config_pickle() -> None:
    config = Config(samples=200)
    assert pickle.loads(pickle.dumps(config)) == config
    prepared = prepare(REGISTER.head(10), config)
    chunks = split_prepared(prepared, 4)
    assert [len(c.walls) for c in chunks] == [4, 4, 2]
    piece = pickle.loads(pickle.dumps(evaluate_chunk))(pickle.loads(pickle.dumps(chunks[0])), config)
    assert len(piece.results) == 12 and piece.results["p_failure_prior"].notna().all()
    assert len(list(LocalRunner().map(evaluate_chunk, chunks, config))) == 3


def test_samples_off_leaves_the_columns_blank_and_ranks_by_utilisation() -> None:
    run = evaluate(REGISTER.head(5), Config(samples=0))
    assert run.results["p_failure"].isna().all() if "p_failure" in run.results else True
    assert "p_stands" not in run.walls


def test_screen_with_samples_off_returns_every_result_column_blank_where_drawn() -> None:
    from screening import RESULT_COLUMNS, screen

    out = screen(REGISTER.head(5), Config(samples=0))
    assert list(out.columns) == list(RESULT_COLUMNS) and len(out) == 15
    assert out["p_failure"].isna().all() and out["utilisation"].notna().all()


def test_ranks_in_the_shared_order_of_the_draws_match_scipy() -> None:
    # scipy.stats.rankdata "average" (the reference library) on clamped, tied and unsorted rows
    rng = np.random.default_rng(1)
    z = rng.standard_normal(300)
    order = np.argsort(z, kind="stable")
    x = np.stack([np.clip(30 + 5 * z, 25, 38), np.exp(0.3 * z), np.full(300, 2.0), np.sin(3 * z)])
    mask = rng.random(x.shape) < 0.6
    ours = uncertainty.ordered_ranks(x, order, mask)
    for i in range(len(x)):
        np.testing.assert_allclose(ours[i, mask[i]], stats.rankdata(x[i, mask[i]]))
        assert np.isnan(ours[i, ~mask[i]]).all()
    flags = rng.random((3, 40)) < np.array([[0.0], [0.3], [1.0]])
    for row, ranks in zip(flags, uncertainty._flag_ranks(flags), strict=True):
        np.testing.assert_array_equal(ranks, stats.rankdata(row.astype(float)))


def test_average_ranks_match_scipy() -> None:
    # scipy.stats.rankdata with method="average" (the reference library)
    rng = np.random.default_rng(0)
    x = np.round(rng.normal(size=(4, 50)), 1)
    mask = rng.random((4, 50)) < 0.7
    ours = uncertainty.average_ranks(x, mask)
    for i in range(4):
        np.testing.assert_allclose(ours[i, mask[i]], stats.rankdata(x[i, mask[i]]))
    y = x**3 + rng.normal(size=x.shape)
    rho = uncertainty.spearman(x, y, mask)
    for i in range(4):
        ref = stats.spearmanr(x[i, mask[i]], y[i, mask[i]]).statistic
        np.testing.assert_allclose(rho[i], ref, rtol=1e-12)


@pytest.mark.parametrize(
    ("key", "value"),
    [("samples", -1), ("p_stands_min", 1.0), ("sd_soil_unit_weight_default", 0.5), ("seed", -3)],
)
def test_bad_settings_are_named(key, value) -> None:
    with pytest.raises(ConfigError, match=key):
        Config(**{key: value})


def test_sample_register_has_a_wall_whose_figures_cannot_be_right() -> None:
    # sample_inventory/README.md names HV-102 (its implausible lean) as inconsistent by design
    from screening.demo import sample_paths
    from screening.job import screen_file

    register, mapping = sample_paths()
    walls = screen_file(register, mapping=mapping).walls.set_index("wall_id")
    assert walls.loc["HV-102", "data_inconsistent"]
    assert walls.loc["HV-102", "priority_band"] == "check_data"
    assert (walls["measure_next"].fillna("") != "").sum() > 10


def test_the_sample_config_file_loads_with_every_setting_where_it_belongs() -> None:
    # the settings of §13 were once written below a [table] header, where TOML files them
    # inside that table: the sample file must load and set them at the top level
    import tomllib
    from pathlib import Path

    from screening.config import load_config

    path = Path(__file__).resolve().parents[1] / "sample_inventory" / "config.toml"
    top = tomllib.loads(path.read_text(encoding="utf-8"))
    assert "samples" in top and "seed" in top
    config = load_config(path)
    assert config.samples == top["samples"] and config.seed == top["seed"]
