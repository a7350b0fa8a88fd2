"""Uncertainty, and what a wall's standing tells us (method.md §13).

Every wall's uncertain inputs are drawn from distributions set by how well each is known; the
draws in which the wall could not be standing today are ruled out; what remains gives the
probability that each case exceeds an ultimate limit state and the input that drives it.

Common random numbers: one matrix of standard normal draws ``z`` (draws × inputs, columns in the
order of :data:`DRAWN`) and one vector of uniform draws ``u``, made once per run from the seed,
serve every wall. A draw is indexed by its row and the input's column, never by the wall's
position, so a wall's figures do not depend on the rest of the register, its order or the
chunking. The mechanics are the engine's own (:func:`screening.core.engine.run_cases` on the
flattened draws × walls, bed joints, Annex D bearing, passive resistance included); only the
ultimate utilisation (unfactored) and the statistics are added here. Numpy only.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from screening.config import CASES, DIMENSION_SOURCES, Config
from screening.core import engine
from screening.core.stability import STATES, WITHIN_MIDDLE_THIRD

FloatArray = NDArray[np.float64]

DRAWN = (
    "soil_friction_deg",
    "soil_unit_weight_kn_m3",
    "wall_unit_weight_kn_m3",
    "base_friction_deg",
    "joint_friction_deg",
    "ultimate_bearing_kpa",
    "dimensions",
)
"""The columns of the matrix of standard normal draws, in order (method.md §13)."""

DRIVERS = (*DRAWN, "water_height_m")
"""Names a ``driver`` can take; the codes returned are indices into this tuple (−1 blank)."""

DRAINAGE_CODES = ("working", "partial", "blocked", "unknown")

UNCERTAINTY_INPUTS = (
    *engine.ENGINE_INPUTS,
    "soil_friction_recorded",
    "soil_unit_weight_recorded",
    "wall_unit_weight_recorded",
    "base_friction_recorded",
    "joint_friction_recorded",
    "drystone",
    "dimensions_code",
    "water_measured",
    "drainage_code",
    "joint_height_drained_m",
    "joint_height_blocked_m",
    "joint_height_surveyed_m",
)
"""Per-wall inputs of :func:`evaluate`: the engine's, then 1/0 flags (the cell was recorded,
the wall is drystone, the water height was measured), the index of ``dimensions_source`` in
``config.DIMENSION_SOURCES`` and of the drainage in :data:`DRAINAGE_CODES`, and the governing
bed-joint height of the deterministic result per case (NaN where no joint is checked)."""

Z_LIMIT = 3.0
FRICTION_LIMITS_DEG = (5.0, 45.0)
SOIL_FRICTION_LIMITS_DEG = (15.0, 50.0)
MIN_STANDING_FOR_DRIVER = 50


@dataclass(frozen=True)
class Draws:
    """The draws of one run: ``z`` (n × len(DRAWN)) standard normal, clamped to ±3; ``u`` (n) uniform."""

    z: FloatArray
    u: FloatArray

    @property
    def n(self) -> int:
        return int(self.z.shape[0])


def draw_orders(draws: Draws) -> list[NDArray[np.intp]]:
    """Per driver (:data:`DRIVERS`), the order that sorts its column of draws (Z, then U for the water)."""
    columns = [draws.z[:, k] for k in range(len(DRAWN))] + [draws.u]
    return [np.argsort(c, kind="stable") for c in columns]


def make_draws(samples: int, seed: int) -> Draws:
    """One matrix of draws per run from numpy's PCG64 (method.md §13): Z first, then U."""
    rng = np.random.Generator(np.random.PCG64(seed))
    z = np.clip(rng.standard_normal((samples, len(DRAWN))), -Z_LIMIT, Z_LIMIT)
    return Draws(z, rng.random(samples))


def drawn_inputs(
    p: Mapping[str, FloatArray], draws: Draws, config: Config
) -> tuple[dict[str, FloatArray], dict[str, FloatArray]]:
    """The engine's inputs per wall and draw (shape (walls, n)) and the drawn values of the drivers.

    Distributions of method.md §13; a clamp never moves the value in use outside its own range
    (a recorded 12° soil friction keeps 12° as the lowest draw's floor, not 15°).
    """
    z = {name: draws.z[None, :, k] for k, name in enumerate(DRAWN)}
    col = {k: np.asarray(v, dtype=float)[:, None] for k, v in p.items()}
    c = config

    def sd(flag: str, recorded: float, default: float) -> FloatArray:
        return np.where(col[flag] > 0, recorded, default)

    phi0, beta = col["soil_friction_deg"], col["backfill_slope_deg"]
    lo = np.maximum(beta + 1.0, np.minimum(SOIL_FRICTION_LIMITS_DEG[0], phi0))
    hi = np.maximum(SOIL_FRICTION_LIMITS_DEG[1], phi0)
    sd_phi = sd("soil_friction_recorded", c.sd_soil_friction_recorded_deg, c.sd_soil_friction_default_deg)
    phi = np.clip(phi0 + sd_phi * z["soil_friction_deg"], lo, hi)
    g0 = col["soil_unit_weight_kn_m3"]
    sd_g = sd("soil_unit_weight_recorded", c.sd_soil_unit_weight_recorded, c.sd_soil_unit_weight_default)
    gamma = g0 * (1.0 + sd_g * z["soil_unit_weight_kn_m3"])
    sd_w = np.where(
        col["drystone"] > 0,
        c.sd_wall_unit_weight_drystone,
        sd("wall_unit_weight_recorded", c.sd_wall_unit_weight_recorded, c.sd_wall_unit_weight_default),
    )
    wall = col["wall_unit_weight_kn_m3"] * (1.0 + sd_w * z["wall_unit_weight_kn_m3"])
    base_f = _friction(col["base_friction_deg"], z["base_friction_deg"], sd(
        "base_friction_recorded", c.sd_base_friction_recorded_deg, c.sd_base_friction_default_deg
    ))  # fmt: skip
    joint_f = _friction(col["joint_friction_deg"], z["joint_friction_deg"], sd(
        "joint_friction_recorded", c.sd_joint_friction_recorded_deg, c.sd_joint_friction_default_deg
    ))  # fmt: skip
    sd_dim = np.asarray([c.sd_dimensions[k] for k in DIMENSION_SOURCES])[col["dimensions_code"].astype(int)]
    scale = 1.0 + sd_dim * z["dimensions"]
    water = _surveyed_water(col, draws.u[None, :])
    shape = (len(phi0), draws.n)
    out = {k: np.broadcast_to(col[k], shape) for k in engine.ENGINE_INPUTS}
    out |= {
        "soil_friction_deg": phi,
        "soil_unit_weight_kn_m3": gamma,
        "soil_saturated_unit_weight_kn_m3": gamma + (col["soil_saturated_unit_weight_kn_m3"] - g0),
        "wall_unit_weight_kn_m3": wall,
        "base_friction_deg": base_f,
        "joint_friction_deg": joint_f,
        "base_width_m": col["base_width_m"] * scale,
        "top_width_m": col["top_width_m"] * scale,
        "front_batter_m": col["front_batter_m"] * scale,
        "surveyed_water_height_m": water,
    }
    bearing = np.exp(c.sd_ultimate_bearing_log * z["ultimate_bearing_kpa"])
    values = {
        "soil_friction_deg": phi,
        "soil_unit_weight_kn_m3": gamma,
        "wall_unit_weight_kn_m3": wall,
        "base_friction_deg": base_f,
        "joint_friction_deg": joint_f,
        "ultimate_bearing_kpa": bearing,
        "dimensions": scale,
        "water_height_m": water,
    }
    return {k: np.broadcast_to(v, shape) for k, v in out.items()}, {
        k: np.broadcast_to(v, shape) for k, v in values.items()
    }


def _friction(value: FloatArray, z: FloatArray, sd: FloatArray) -> FloatArray:
    """δ + sd·Z clamped to [5°, 45°], widened to hold the value in use (method.md §13)."""
    lo = np.minimum(FRICTION_LIMITS_DEG[0], value)
    hi = np.maximum(FRICTION_LIMITS_DEG[1], value)
    return np.clip(value + sd * z, lo, hi)


def _surveyed_water(col: Mapping[str, FloatArray], u: FloatArray) -> FloatArray:
    """Measured water stays; else working 0, partial (0.25 + 0.5U)·H_r, blocked H_r, unknown U·H_r."""
    top = col["retained_height_m"]
    code = col["drainage_code"]
    by_drainage = np.select(
        [code == 0, code == 1, code == 2],
        [0.0 * top * u, (0.25 + 0.5 * u) * top, top + 0.0 * u],
        u * top,
    )
    return np.where(col["water_measured"] > 0, col["surveyed_water_height_m"], by_drainage)


def _inverse(fos: FloatArray) -> FloatArray:
    """1/FoS: 0 where nothing disturbs, ∞ for a zero factor or an undefined one."""
    with np.errstate(divide="ignore"):
        inv = 1.0 / fos
    return np.where(np.isnan(inv), np.inf, inv)


def _plane_term(fos_sliding: FloatArray, ecc: FloatArray, width: FloatArray) -> FloatArray:
    """max(1/FoS_sliding, |e|/(b/2)) on a plane; ∞ where the resultant is outside or V ≤ 0."""
    with np.errstate(invalid="ignore"):
        reach = np.abs(ecc) / (width / 2.0)
    reach = np.where(np.isnan(reach) | (reach >= 1.0), np.inf, reach)
    return np.maximum(_inverse(fos_sliding), reach)


def _joint_term(
    d: Mapping[str, FloatArray], hw: FloatArray, p: Mapping[str, FloatArray], config: Config
) -> FloatArray:
    """The ultimate term on the deterministic governing bed joint of each case (method.md §8, §13).

    A wall whose governing joint is the same plane in all three cases (most are) has that plane's
    geometry computed once for the three water heights; the others one plane per case."""
    heights = np.stack([np.asarray(p[f"joint_height_{c}_m"], dtype=float) for c in CASES])  # (3, w)
    out = np.zeros(hw.shape)
    one_plane = np.isfinite(heights[0]) & (heights[0] == heights[1]) & (heights[1] == heights[2])
    rows = np.flatnonzero(one_plane)
    if rows.size:
        out[:, rows] = _plane_terms(d, hw, heights[:1, rows], rows, config)
    rows = np.flatnonzero(np.isfinite(heights).any(axis=0) & ~one_plane)
    if rows.size:
        term = _plane_terms(d, hw, np.nan_to_num(heights[:, rows], nan=0.0), rows, config)
        out[:, rows] = np.where(np.isfinite(heights[:, rows])[:, :, None], term, 0.0)  # 0 = no plane
    return out


def _plane_terms(
    d: Mapping[str, FloatArray], hw: FloatArray, z: FloatArray, rows: NDArray[np.intp], config: Config
) -> FloatArray:
    """The plane term of the walls ``rows`` on the joints at heights ``z`` (1 or 3 rows of cases)."""
    sub = {k: v[rows] for k, v in d.items()}
    zz = z[:, :, None]  # (1 or 3, w, 1)
    plane = engine.crack_section(sub | {"crack_height_m": zz})
    res = engine.section_checks(
        plane,
        np.maximum(hw[:, rows] - zz, 0.0),
        uplift=False,
        friction_deg=sub["joint_friction_deg"],
        config=config,
    )
    return _plane_term(res["fos_sliding"], res["eccentricity_m"], plane["base_width_m"])


def ultimate_utilisation(
    d: Mapping[str, FloatArray], bearing_factor: FloatArray, p: Mapping[str, FloatArray], config: Config
) -> tuple[FloatArray, NDArray[np.bool_]]:
    """Unfactored ultimate utilisation per case and draw (shape (3, walls, n)) and the base outside
    its middle third.

    The largest of 1/FoS_sliding, |e|/(B/2) and q_max/q_ult on the base, and of the first two on
    the crack plane and the deterministic governing bed joint; ∞ where a resultant is outside its
    base or V ≤ 0. Exceeds 1 exactly when an ultimate limit state is exceeded (method.md §13).
    For Annex D bearing (§10), the pressure is Annex D's own V/B' against q_ult = R/B'·exp(σZ),
    that is V against R·exp(σZ).
    """
    walls, n = d["height_m"].shape
    shape = (len(CASES), walls, n)
    flat = {k: np.ascontiguousarray(v).reshape(-1) for k, v in d.items()}
    mc_config = dataclasses.replace(config, joint_planes=0)
    out = engine.run_cases(flat, mc_config)
    r = {k: np.broadcast_to(v, (len(CASES) * walls * n,)).reshape(shape) for k, v in out.items()}
    base = _plane_term(r["fos_sliding"], r["eccentricity_m"], d["base_width_m"])
    annex_d = np.isfinite(d["foundation_friction_deg"])
    q_ult = config.ultimate_bearing_factor * d["allowable_bearing_kpa"] * bearing_factor
    with np.errstate(invalid="ignore", divide="ignore"):
        presumed = np.fmax(r["toe_pressure_kpa"], r["heel_pressure_kpa"]) / q_ult
        annex = r["vertical_kn_m"] / (r["bearing_resistance_kn_m"] * bearing_factor)
    bear = np.where(annex_d, annex, presumed)
    bear = np.where(np.isnan(bear) | (r["vertical_kn_m"] <= 0), np.inf, bear)
    u = np.maximum(base, bear)
    cracked = np.isfinite(d["crack_height_m"])
    if cracked.any():
        width = engine.crack_section(d)["base_width_m"]
        crack = _plane_term(r["crack_fos_sliding"], r["crack_eccentricity_m"], width)
        u = np.maximum(u, np.where(cracked, crack, 0.0))
    u = np.maximum(u, _joint_term(d, engine.case_water_heights(d), p, config))
    outside = r["state"] != STATES.index(WITHIN_MIDDLE_THIRD)
    return u, outside


def average_ranks(values: FloatArray, mask: NDArray[np.bool_]) -> FloatArray:
    """Ranks 1 … k of ``values`` along the last axis among the entries where ``mask`` holds,
    ties given their average rank (as scipy.stats.rankdata's "average"); NaN elsewhere."""
    v = np.where(mask, values, np.nan)
    order = np.argsort(v, axis=-1, kind="stable")
    s = np.take_along_axis(v, order, axis=-1)
    n = s.shape[-1]
    j = np.broadcast_to(np.arange(n, dtype=float), s.shape)
    differs = np.ones(s.shape, dtype=bool)
    differs[..., 1:] = ~(s[..., 1:] == s[..., :-1])
    first = np.maximum.accumulate(np.where(differs, j, 0.0), axis=-1)
    ends = np.ones(s.shape, dtype=bool)
    ends[..., :-1] = differs[..., 1:]
    last = np.flip(np.minimum.accumulate(np.flip(np.where(ends, j, n), axis=-1), axis=-1), axis=-1)
    ranks = np.empty(s.shape)
    np.put_along_axis(ranks, order, (first + last) / 2.0 + 1.0, axis=-1)
    return np.where(mask, ranks, np.nan)


def ordered_ranks(values: FloatArray, order: NDArray[np.intp], mask: NDArray[np.bool_]) -> FloatArray:
    """:func:`average_ranks` of ``values`` (walls × n) for draws that a shared ``order`` of the n
    draws sorts in every row: a gather and running counts in place of a sort per wall.

    A drawn input is a non-decreasing function of its own column of the common random numbers
    (δ + sd·Z clamped, γ·(1 + sd·Z), exp(σZ), the water from U), so the order of that column sorts
    it for every wall at once; ties (a clamp, an SD of 0) are equal neighbours in that order and get
    their average rank as before. A row the order does not sort (NaN, or a decreasing function)
    falls back to :func:`average_ranks`, so the ranks are the same in every case.
    """
    s = values[:, order]
    m = mask[:, order]
    counted = np.cumsum(m, axis=-1, dtype=np.int64)
    differs = np.ones(s.shape, dtype=bool)
    differs[:, 1:] = s[:, 1:] != s[:, :-1]
    before = np.maximum.accumulate(np.where(differs, counted - m, 0), axis=-1)
    ends = np.ones(s.shape, dtype=bool)
    ends[:, :-1] = differs[:, 1:]
    big = np.iinfo(np.int64).max
    through = np.flip(np.minimum.accumulate(np.flip(np.where(ends, counted, big), axis=-1), axis=-1), axis=-1)
    ranks = np.empty(s.shape)
    ranks[:, order] = (before + 1 + through) / 2.0
    ranks = np.where(mask, ranks, np.nan)
    unsorted = ~(s[:, 1:] >= s[:, :-1]).all(axis=-1)
    if unsorted.any():
        ranks[unsorted] = average_ranks(values[unsorted], mask[unsorted])
    return ranks


def spearman(x: FloatArray, y: FloatArray, mask: NDArray[np.bool_]) -> FloatArray:
    """Spearman rank correlation of x and y along the last axis over the entries in ``mask``
    (average ranks for ties); NaN where either is constant there or fewer than 2 entries."""
    return _rank_correlation(average_ranks(x, mask), average_ranks(y, mask), mask)


def _rank_correlation(rx: FloatArray, ry: FloatArray, mask: NDArray[np.bool_]) -> FloatArray:
    """Pearson correlation of two rank arrays (NaN outside ``mask``) along the last axis."""
    return _correlation(_centred(rx, mask), _centred(ry, mask))


def _centred(ranks: FloatArray, mask: NDArray[np.bool_]) -> tuple[FloatArray, FloatArray]:
    """Ranks less their mean (k + 1)/2 over ``mask`` (0 outside it) and their sum of squares."""
    k = mask.sum(axis=-1, keepdims=True)
    d = np.where(mask, ranks - (k + 1) / 2.0, 0.0)
    return d, (d * d).sum(axis=-1)


def _correlation(x: tuple[FloatArray, FloatArray], y: tuple[FloatArray, FloatArray]) -> FloatArray:
    """Pearson correlation of two :func:`_centred` rank arrays; NaN where either is constant."""
    (dx, sx), (dy, sy) = x, y
    cov = (dx * dy).sum(axis=-1)
    var = sx * sy
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(var > 0, cov / np.sqrt(var), np.nan)


def _flag_ranks(flag: NDArray[np.bool_]) -> FloatArray:
    """Average ranks of a true/false array along the last axis (false ranks below true)."""
    falses = (~flag).sum(axis=-1, keepdims=True)
    return np.where(flag, falses + (flag.shape[-1] - falses + 1) / 2.0, (falses + 1) / 2.0)


def _pick_driver(rho: list[FloatArray], allowed: list[NDArray[np.bool_]]) -> NDArray[np.int8]:
    """Index of the largest |ρ| among the allowed inputs (the first wins ties); −1 where none."""
    score = np.stack(
        [np.where(a & np.isfinite(r), np.abs(r), -1.0) for r, a in zip(rho, allowed, strict=True)]
    )
    best = np.argmax(score, axis=0).astype(np.int8)
    return np.where(score.max(axis=0) >= 0, best, -1).astype(np.int8)


def _candidates(p: Mapping[str, FloatArray], case: int | None) -> list[NDArray[np.bool_]]:
    """Per input, the walls on which it can affect the case (``None``: the standing event)."""
    walls = len(p["height_m"])
    yes = np.ones(walls, dtype=bool)
    heights = np.stack([np.asarray(p[f"joint_height_{c}_m"], dtype=float) for c in CASES])
    joint = np.isfinite(heights).any(axis=0) if case is None else np.isfinite(heights[case])
    joint = joint | np.isfinite(p["crack_height_m"])
    drawn_water = (np.asarray(p["water_measured"]) == 0) & np.isin(p["drainage_code"], (1, 3))
    water = drawn_water & (case == CASES.index("surveyed")) if case is not None else ~yes
    return [yes, yes, yes, yes, joint, yes, yes, water]


def statistics(
    u: FloatArray, outside: NDArray[np.bool_], values: Mapping[str, FloatArray], p: Mapping[str, FloatArray],
    config: Config, orders: list[NDArray[np.intp]],
) -> dict[str, NDArray]:  # fmt: skip
    """Standing, probabilities and drivers of one pass (method.md §13); see :func:`evaluate`.
    ``orders`` are the run's :func:`draw_orders`."""
    fails = u > 1.0
    measured = np.asarray(p["water_measured"])[:, None] > 0
    stands = ~fails[CASES.index("drained")] & ~(measured & fails[CASES.index("surveyed")])
    n = u.shape[-1]
    k = stands.sum(axis=-1)
    p_stands = k / n
    inconsistent = p_stands < config.p_stands_min
    with np.errstate(invalid="ignore", divide="ignore"):
        p_fail = np.where(k > 0, (fails & stands).sum(axis=-1) / k, np.nan)
        p_out = np.where(k > 0, (outside & stands).sum(axis=-1) / k, np.nan)
    p_fail = np.where(inconsistent, np.nan, p_fail)
    p_out = np.where(inconsistent, np.nan, p_out)
    # ranks of each input among the standing draws, once for every case
    x = [
        _centred(ordered_ranks(values[name], order, stands), stands)
        for name, order in zip(DRIVERS, orders, strict=True)
    ]
    drivers = np.full(u.shape[:2], -1, dtype=np.int8)
    enough = k >= MIN_STANDING_FOR_DRIVER
    for case in range(len(CASES)):
        ru = _centred(average_ranks(u[case], stands), stands)
        rho = [_correlation(rx, ru) for rx in x]
        drivers[case] = np.where(enough, _pick_driver(rho, _candidates(p, case)), -1)
    everywhere = np.ones(stands.shape, dtype=bool)
    flag = _centred(_flag_ranks(stands), everywhere)
    rho = [
        _correlation(_centred(ordered_ranks(values[name], order, everywhere), everywhere), flag)
        for name, order in zip(DRIVERS[:-1], orders, strict=False)
    ] + [np.full(len(k), np.nan)]
    standing = np.where(k > 0, _pick_driver(rho, _candidates(p, None)), -1).astype(np.int8)
    drivers = np.where(inconsistent, standing, drivers).astype(np.int8)
    return {
        "p_failure": p_fail,
        "p_failure_prior": fails.mean(axis=-1),
        "p_outside_middle_third": p_out,
        "driver": drivers,
        "p_stands": p_stands,
        "data_inconsistent": inconsistent,
        "standing_driver": standing,
    }


def evaluate(inputs: Mapping[str, NDArray], draws: Draws, config: Config) -> dict[str, NDArray]:
    """Probabilities of failure of every wall in every case, in passes that bound memory.

    Parameters
    ----------
    inputs : mapping of str to array
        The :data:`UNCERTAINTY_INPUTS` columns, length ``walls``.
    draws : Draws
        The run's draws (:func:`make_draws`), shared by every wall.
    config : Config
        The SDs, ``p_stands_min``, ``samples_chunk`` (wall-draws per pass) and the engine's settings.

    Returns
    -------
    dict of str to numpy.ndarray
        Per case and wall (shape (3, walls)): ``p_failure`` (share of the standing draws that
        exceed an ultimate limit state; NaN for a wall whose figures cannot be right),
        ``p_failure_prior`` (share of all draws), ``p_outside_middle_third``, ``driver`` (index
        into :data:`DRIVERS`, −1 blank). Per wall: ``p_stands``, ``data_inconsistent``,
        ``standing_driver`` (the input likeliest wrong, −1 where no draw stands).

    References
    ----------
    method.md §13 (standing today as evidence: draws in which the wall could not stand are
    ruled out, a Monte Carlo form of updating on survival).
    """
    p = {k: np.asarray(inputs[k], dtype=float) for k in UNCERTAINTY_INPUTS}
    walls = len(p["height_m"])
    per_pass = max(1, int(config.samples_chunk) // max(draws.n, 1))
    orders = draw_orders(draws)
    pieces = []
    for start in range(0, walls, per_pass):
        sub = {k: v[start : start + per_pass] for k, v in p.items()}
        d, values = drawn_inputs(sub, draws, config)
        u, outside = ultimate_utilisation(d, values["ultimate_bearing_kpa"], sub, config)
        pieces.append(statistics(u, outside, values, sub, config, orders))
    if not pieces:
        return _empty()
    return {k: np.concatenate([piece[k] for piece in pieces], axis=-1) for k in pieces[0]}


def _empty() -> dict[str, NDArray]:
    cases = len(CASES)
    return {
        "p_failure": np.zeros((cases, 0)),
        "p_failure_prior": np.zeros((cases, 0)),
        "p_outside_middle_third": np.zeros((cases, 0)),
        "driver": np.zeros((cases, 0), dtype=np.int8),
        "p_stands": np.zeros(0),
        "data_inconsistent": np.zeros(0, dtype=bool),
        "standing_driver": np.zeros(0, dtype=np.int8),
    }


def wall_draws(inputs: Mapping[str, NDArray], draws: Draws, config: Config) -> dict[str, NDArray]:
    """The draws of a few walls for a figure: ultimate utilisation (3, walls, n), standing (walls, n)
    and the drawn value of every driver (walls, n)."""
    p = {k: np.asarray(inputs[k], dtype=float) for k in UNCERTAINTY_INPUTS}
    d, values = drawn_inputs(p, draws, config)
    u, _ = ultimate_utilisation(d, values["ultimate_bearing_kpa"], p, config)
    fails = u > 1.0
    measured = p["water_measured"][:, None] > 0
    stands = ~fails[CASES.index("drained")] & ~(measured & fails[CASES.index("surveyed")])
    return {"utilisation": u, "stands": stands} | {f"value_{k}": np.asarray(v) for k, v in values.items()}
