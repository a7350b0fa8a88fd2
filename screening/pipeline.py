"""Run the engine over a register and summarise it per wall.

``screen`` is the public entry point of the Python API; ``evaluate`` keeps
everything a run produces (problems, assumptions, per-wall summary) together.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Protocol

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from screening import priority
from screening.assumed import Assumptions
from screening.config import CASES, Config
from screening.core import critical
from screening.core.engine import BEARING_METHODS, DERIVED_INPUTS, ENGINE_INPUTS, GOVERNING, run_cases
from screening.core.stability import FLOATING, STATES
from screening.history import INPUT_COLUMNS, lean_rates
from screening.prepare import Prepared, prepare
from screening.probability import add_uncertainty, summarise_uncertainty
from screening.progress import Progress

RESULT_COLUMNS = (
    "wall_id",
    "case",
    "water_height_m",
    "weight_kn_m",
    "vertical_kn_m",
    "horizontal_kn_m",
    "uplift_kn_m",
    "restoring_moment_knm_m",
    "overturning_moment_knm_m",
    "resultant_from_toe_m",
    "eccentricity_m",
    "in_middle_third",
    "toe_pressure_kpa",
    "heel_pressure_kpa",
    "fos_sliding",
    "fos_overturning",
    "passive_resistance_kn_m",
    "middle_third_utilisation",
    "resultant_utilisation",
    "bearing_method",
    "bearing_resistance_kn_m",
    "bearing_utilisation",
    "sliding_utilisation",
    "overturning_utilisation",
    "crack_eccentricity_m",
    "crack_middle_third_utilisation",
    "crack_fos_overturning",
    "crack_fos_sliding",
    "joint_height_m",
    "joint_middle_third_utilisation",
    "joint_sliding_utilisation",
    "joint_overturning_utilisation",
    "utilisation",
    "governing_check",
    "margin",
    "state",
    "p_failure",
    "p_failure_prior",
    "p_outside_middle_third",
    "driver",
    "measure_next",
)
"""The columns of ``results.csv``, in order (the output contract); the last five are the
probabilities of method.md §13, blank when ``samples`` is 0."""

UNCERTAINTY_COLUMNS = RESULT_COLUMNS[-5:]
UNCERTAINTY_WALL_COLUMNS = ("p_stands", "data_inconsistent", *(f"p_failure_{c}" for c in CASES))

CRITICAL_COLUMNS = (
    "critical_water_height_m",
    "critical_water_fraction",
    "critical_lean_deg",
    "years_to_critical_lean",
)
"""The figures of method.md §9, per wall in ``walls.csv``."""


MECHANICS_COLUMNS = (frozenset(ENGINE_INPUTS) - frozenset(DERIVED_INPUTS)) | {
    "water_height_m",
    "material",
    "foundation",
    "drainage",
}
"""Register columns the mechanics rest on: a warning on one marks the wall as resting on suspect data."""

FLAG_COLUMNS = ("suspect_data", "suspect_inputs", "drainage_not_recorded")
"""Per wall in ``walls.csv``: a data warning on an input of the mechanics (and which inputs), and
drainage not recorded (screened like blocked drains, method.md §4, but a data gap)."""


def _n(values: pd.Series, digits: int) -> pd.Series:
    return values.astype(float).map(f"{{:.{digits}f}}".format)


_SUSPECT_WORDS: dict[str, Callable[[pd.DataFrame], pd.Series]] = {
    "lean_deg": lambda w: (
        "check the survey: lean " + _n(w["lean_deg"], 0) + "° is implausible for a standing wall"
    ),
    "height_m": lambda w: (
        "check the data: a height of "
        + _n(w["height_m"], 1)
        + " m is unusual (millimetres entered as metres?)"
    ),
    "wall_friction_deg": lambda w: (
        "check the data: wall friction "
        + _n(w["wall_friction_deg"], 0)
        + "° above the soil's friction angle "
        + _n(w["soil_friction_deg"], 0)
        + "°"
    ),
    "soil_saturated_unit_weight_kn_m3": lambda w: (
        "check the data: saturated unit weight "
        + _n(w["soil_saturated_unit_weight_kn_m3"], 1)
        + " below the unit weight "
        + _n(w["soil_unit_weight_kn_m3"], 1)
        + " kN/m³"
    ),
    "embedment_m": lambda w: (
        "check the data: embedment " + _n(w["embedment_m"], 2) + " m deeper than the wall is high"
    ),
}
"""A data warning in the words of the reason line, with the figure (other columns: the message)."""


def suspect_data(walls: pd.DataFrame, problems: pd.DataFrame, labels: Mapping[str, str]) -> pd.DataFrame:
    """Per wall (rows of ``walls``): the warnings on its screened row that touch an input of the
    mechanics (:data:`MECHANICS_COLUMNS`), as ``suspect_data``, ``suspect_inputs`` (canonical
    names, "; "-separated) and ``suspect_words`` (for the reason line). ``labels`` maps the
    canonical names to the user's headers, which the problems carry."""
    canonical = {v: k for k, v in labels.items()}
    warn = problems[problems["severity"] == "warning"].copy()
    warn["canonical"] = warn["column"].map(lambda c: canonical.get(c, c))
    position = pd.Series(np.arange(len(walls)), index=walls["row"].to_numpy())
    warn = warn[warn["canonical"].isin(MECHANICS_COLUMNS) & warn["row"].isin(position.index)]
    warn["pos"] = position.reindex(warn["row"].to_numpy()).to_numpy()
    warn = warn.drop_duplicates(["pos", "canonical"])
    words = pd.Series("", index=warn.index, dtype=object)
    for col, rows in warn.groupby("canonical").groups.items():
        pos = warn.loc[rows, "pos"].to_numpy()
        if col in _SUSPECT_WORDS:
            words.loc[rows] = _SUSPECT_WORDS[str(col)](walls.iloc[pos]).to_numpy()
        else:
            words.loc[rows] = (
                "check the data: "
                + warn.loc[rows, "column"].astype(str)
                + ": "
                + warn.loc[rows, "message"].astype(str)
            ).to_numpy()
    by_wall = warn.assign(words=words).groupby("pos")
    out = pd.DataFrame(index=np.arange(len(walls)))
    out["suspect_data"] = out.index.isin(warn["pos"])
    out["suspect_inputs"] = by_wall["canonical"].agg("; ".join).reindex(out.index).fillna("")
    out["suspect_words"] = by_wall["words"].agg("; ".join).reindex(out.index).fillna("")
    return out


def drainage_not_recorded(walls: pd.DataFrame) -> NDArray[np.bool_]:
    """No measured water and the drainage blank or ``unknown``: the surveyed case rests on a data gap."""
    drainage = walls["drainage"].astype(object)
    gap = drainage.isna() | (drainage.astype(str) == "unknown")
    return (gap & walls["water_height_m"].isna()).to_numpy(dtype=bool)


class RejectedRowsWarning(UserWarning):
    """Some rows of the register were rejected; the others were screened."""


@dataclass(frozen=True)
class Screening:
    """Everything one screening run produced."""

    prepared: Prepared
    results: pd.DataFrame
    walls: pd.DataFrame
    problems: pd.DataFrame
    config: Config

    @property
    def n_rejected(self) -> int:
        errors = self.problems[self.problems["severity"] == "error"]
        return int(errors["row"].nunique())


def screen_prepared(prepared: Prepared, config: Config, progress: Progress | None = None) -> pd.DataFrame:
    """Long results (one row per wall and case, wall by wall) of a prepared register.

    Registers larger than ``config.chunk_size`` go through the engine in chunks, so the
    engine's working memory stays bounded; ``progress`` hears of each chunk.
    """
    n = len(prepared.walls)
    size = max(int(config.chunk_size), 1)
    ids = prepared.walls["wall_id"].to_numpy(dtype=object)
    pieces = []
    for start in range(0, max(n, 1), size):
        chunk = {k: v[start : start + size] for k, v in prepared.inputs.items()}
        m = len(chunk["height_m"])
        if progress is not None and n > size:
            progress(f"screening walls {start + 1:,}-{start + m:,} of {n:,}")
        out = run_cases(chunk, config)
        # the engine is case-major; the results are wall by wall
        order = np.arange(len(CASES) * m).reshape(len(CASES), m).T.reshape(-1)
        index = out.pop("wall_index")[order] + start
        frame = pd.DataFrame({k: v[order] for k, v in out.items()})
        frame["state"] = pd.Categorical.from_codes(frame["state"], categories=list(STATES))
        frame["governing_check"] = pd.Categorical.from_codes(
            frame["governing_check"], categories=list(GOVERNING)
        )
        frame["bearing_method"] = pd.Categorical.from_codes(
            frame["bearing_method"], categories=list(BEARING_METHODS)
        )
        frame["case"] = pd.Categorical.from_codes(frame["case"], categories=list(CASES), ordered=True)
        frame.insert(0, "wall_id", ids[index])
        frame["_wall"] = index
        pieces.append(frame)
    return pd.concat(pieces, ignore_index=True)


def critical_figures(prepared: Prepared, config: Config, progress: Progress | None = None) -> pd.DataFrame:
    """Critical water height, its fraction of H_r, and the critical lean per wall (method.md §9).

    In chunks of ``config.chunk_size`` walls, as the screening; one row per wall in the order
    of ``prepared.walls``. ``years_to_critical_lean`` is added with the lean rates
    (:func:`add_priority`).
    """
    n = len(prepared.walls)
    size = max(int(config.chunk_size), 1)
    water, lean = np.full(n, np.nan), np.full(n, np.nan)
    for start in range(0, n, size):
        chunk = {k: v[start : start + size] for k, v in prepared.inputs.items()}
        if progress is not None and n > size:
            progress(
                f"critical water height and lean, walls {start + 1:,}-{start + len(chunk['height_m']):,}"
            )
        water[start : start + size] = critical.critical_water_height(chunk, config)
        lean[start : start + size] = critical.critical_lean(chunk, config)
    retained = prepared.inputs["retained_height_m"] if n else np.zeros(0)
    with np.errstate(invalid="ignore", divide="ignore"):
        fraction = np.where(water == 0, 0.0, water / retained)
    return pd.DataFrame(
        {"critical_water_height_m": water, "critical_water_fraction": fraction, "critical_lean_deg": lean}
    )


def case_positions(results: pd.DataFrame) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """The walls of long results (``_wall``, ascending) and, per wall and case (in the order of
    :data:`CASES`), the position of its row in ``results``: numpy indexing in place of pivots."""
    wall = results["_wall"].to_numpy(dtype=np.int64)
    case = pd.Categorical(results["case"], categories=list(CASES)).codes.astype(np.int64)
    walls, inverse = np.unique(wall, return_inverse=True)
    pos = np.full((len(walls), len(CASES)), -1, dtype=np.int64)
    pos[inverse.reshape(-1), case] = np.arange(len(results))
    if (pos < 0).any() or (case < 0).any():
        raise ValueError("internal: the results lack a case of some wall (each wall has every case)")
    return walls, pos


def summarise_walls(results: pd.DataFrame, walls: pd.DataFrame) -> pd.DataFrame:
    """One row per wall: worst case, governing check, margin, flags and rank.

    The worst case is the case with the largest utilisation; rank 1 is the
    least margin.
    """
    index, pos = case_positions(results)
    util = results["utilisation"].to_numpy(dtype=float)[pos]
    worst_idx = np.argmax(np.where(np.isnan(util), -np.inf, util), axis=1)
    worst = pos[np.arange(len(pos)), worst_idx]
    outside = (~results["in_middle_third"].to_numpy(dtype=bool))[pos].any(axis=1)
    over = (results["bearing_utilisation"].to_numpy(dtype=float) > 1)[pos].any(axis=1)
    summary = pd.DataFrame(
        {
            "wall_id": walls["wall_id"].to_numpy()[index],
            "name": walls["name"].to_numpy()[index],
            "worst_case": np.asarray(CASES)[worst_idx],
            "governing_check": results["governing_check"].to_numpy()[worst],
            "utilisation": util[np.arange(len(pos)), worst_idx],
            "margin": results["margin"].to_numpy()[worst],
            "state": results["state"].to_numpy()[worst],
        },
        index=pd.Index(index, name="_wall"),
    )
    for c, case in enumerate(CASES):
        summary[f"utilisation_{case}"] = util[:, c]
    summary["outside_middle_third"] = outside
    summary["over_allowable_bearing"] = over
    return summary


def add_priority(
    summary: pd.DataFrame, walls: pd.DataFrame, results: pd.DataFrame, config: Config
) -> pd.DataFrame:
    """Priority score, band and reason for each wall; rank follows the priority (1 = first).

    Ties in score are broken by the least margin, then by how far outside the base
    the resultant lies.
    """
    s = config.priority
    inputs = walls.iloc[summary.index.to_numpy()].reset_index(drop=True)
    out = summary.reset_index(drop=True)
    if "critical_lean_deg" in out:
        rate = inputs["lean_rate_deg_per_year"] if "lean_rate_deg_per_year" in inputs else np.nan
        out["years_to_critical_lean"] = critical.years_to_critical_lean(
            out["critical_lean_deg"].to_numpy(float),
            inputs["lean_deg"].to_numpy(float),
            np.broadcast_to(np.asarray(rate, dtype=float), len(out)),
        )
        inputs = inputs.assign(**{c: out[c].to_numpy() for c in CRITICAL_COLUMNS})
    structural = _probability_structural(out, results, s) if "p_failure_surveyed" in out else None
    if structural is not None:
        inputs = inputs.assign(
            data_inconsistent=out["data_inconsistent"].to_numpy(), measure_next=out["measure_next"].to_numpy()
        )
    like = priority.likelihood(
        out["utilisation_surveyed"],
        out["utilisation_blocked"],
        inputs["condition_rating"],
        inputs["lean_deg"],
        inputs["crack_height_m"].notna(),
        s,
        inputs["lean_rate_deg_per_year"] if "lean_rate_deg_per_year" in inputs else None,
        structural=structural,
    )
    cons = priority.consequence(inputs["consequence"], inputs["height_m"], config.consequence_weight, s)
    out["priority_score"] = np.round(100.0 * like * cons, 2)
    out["priority_band"] = priority.band(out["priority_score"], s)
    if structural is not None:
        out["priority_band"] = priority.band_with_data_check(
            out["priority_score"], out["data_inconsistent"], s
        )
    index, pos = case_positions(results)
    rows = pos[np.searchsorted(index, summary.index.to_numpy())]
    by_case = {case: results.iloc[rows[:, c]].set_axis(summary.index) for c, case in enumerate(CASES)}
    out["reason"] = priority.reasons(inputs, by_case, near_toe_m=config.resultant_near_toe_m)
    for col in (*INPUT_COLUMNS, "lean_rate_deg_per_year", "lean_rate_mm_per_year", "lean_growing"):
        out[col] = inputs[col].to_numpy()
    for col in FLAG_COLUMNS:
        if col in inputs:
            out[col] = inputs[col].to_numpy()
    worst = pd.Categorical(out["worst_case"], categories=list(CASES)).codes
    out["_far"] = results["middle_third_utilisation"].to_numpy()[rows[np.arange(len(out)), worst]]
    out = out.sort_values(["priority_score", "margin", "_far"], ascending=[False, True, False], kind="stable")
    out["rank"] = np.arange(1, len(out) + 1)
    return out.drop(columns="_far").reset_index(drop=True)


def _probability_structural(
    out: pd.DataFrame, results: pd.DataFrame, settings: priority.PrioritySettings
) -> np.ndarray:
    """The structural index of method.md §13 per wall (rows of ``out``, which carry ``_wall``
    order through ``wall_id``): p_failure, or p_failure_prior where the figures cannot be right."""
    prior = results.pivot(index="wall_id", columns="case", values="p_failure_prior").reindex(out["wall_id"])
    bad = out["data_inconsistent"].to_numpy(dtype=bool)
    surveyed = np.where(bad, prior["surveyed"].to_numpy(float), out["p_failure_surveyed"].to_numpy(float))
    blocked = np.where(bad, prior["blocked"].to_numpy(float), out["p_failure_blocked"].to_numpy(float))
    return priority.probability_index(surveyed, blocked, settings)


def _floating_problems(results: pd.DataFrame, walls: pd.DataFrame) -> pd.DataFrame:
    bad = results[results["state"] == FLOATING]
    rows = walls["row"].to_numpy()[bad["_wall"].to_numpy()]
    return pd.DataFrame(
        {
            "row": rows,
            "wall_id": bad["wall_id"].to_numpy(),
            "column": "height_m / base_width_m / wall_unit_weight_kn_m3",
            "value": "",
            "severity": "error",
            "message": "net vertical load V ≤ 0 in the "
            + bad["case"].astype(str)
            + " case: uplift exceeds the weight (the wall would float); "
            "check the dimensions and unit weights",
        }
    )


def with_lean_rates(
    prepared: Prepared, config: Config, history_points: pd.DataFrame | None = None
) -> Prepared:
    """Add the lean rate of each wall from every survey date known (this register's earlier
    rows, its current rows and the history's runs)."""
    cols = ["wall_id", "survey_date", "lean_deg", "height_m"]
    parts = [prepared.walls[cols], prepared.earlier_surveys.reindex(columns=cols)]
    if history_points is not None and len(history_points):
        parts.append(history_points[cols])
    points = pd.concat(parts, ignore_index=True)
    points["wall_id"] = points["wall_id"].astype(str)
    rates = (
        lean_rates(points)
        if len(points)
        else pd.DataFrame(columns=["lean_rate_deg_per_year", "lean_rate_mm_per_year"])
    )
    walls = prepared.walls.copy()
    ids = walls["wall_id"].astype(str)
    for col in ("lean_rate_deg_per_year", "lean_rate_mm_per_year"):
        walls[col] = ids.map(rates[col]).astype(float).to_numpy()
    walls["lean_growing"] = walls["lean_rate_deg_per_year"] > config.lean_rate_threshold_deg_per_year
    return dataclasses.replace(prepared, walls=walls)


@dataclass(frozen=True)
class ChunkResult:
    """What :func:`evaluate_chunk` returns for one chunk of walls (``_wall`` counts from 0 in it)."""

    results: pd.DataFrame
    """Long results, one row per wall and case."""
    walls: pd.DataFrame
    """One row per wall: the §9 figures and, with samples on, p_stands and the standing driver."""


def evaluate_chunk(chunk: Prepared, config: Config) -> ChunkResult:
    """Everything computed per wall for one chunk of a prepared register: engine, §9 search, §13.

    A top-level function of picklable arguments, so that a runner may send chunks to other
    processes (see :class:`Runner`); a wall's figures do not depend on the chunk it is in.
    """
    results = screen_prepared(chunk, dataclasses.replace(config, chunk_size=max(len(chunk.walls), 1)))
    walls = critical_figures(chunk, dataclasses.replace(config, chunk_size=max(len(chunk.walls), 1)))
    if config.samples > 0 and len(chunk.walls):
        results, extra = add_uncertainty(chunk, results, config)
        walls = walls.join(extra)
    return ChunkResult(results, walls)


class Runner(Protocol):
    """Runs :func:`evaluate_chunk` over chunks; results in the order of the chunks."""

    def map(
        self, fn: Callable[[Prepared, Config], ChunkResult], chunks: Sequence[Prepared], config: Config
    ) -> Iterable[ChunkResult]: ...


class LocalRunner:
    """The default runner: one chunk after the other in this process."""

    def map(
        self, fn: Callable[[Prepared, Config], ChunkResult], chunks: Sequence[Prepared], config: Config
    ) -> Iterator[ChunkResult]:
        for chunk in chunks:
            yield fn(chunk, config)


def split_prepared(prepared: Prepared, size: int) -> list[Prepared]:
    """The register in chunks of ``size`` walls (problems and assumptions stay with the whole)."""
    n = len(prepared.walls)
    empty = prepared.problems.iloc[:0]
    return [
        dataclasses.replace(
            prepared,
            walls=prepared.walls.iloc[start : start + size].reset_index(drop=True),
            inputs={k: v[start : start + size] for k, v in prepared.inputs.items()},
            problems=empty,
            assumptions=Assumptions.none(),
            earlier_surveys=prepared.earlier_surveys.iloc[:0],
        )
        for start in range(0, n, size)
    ]


def _run_chunks(
    prepared: Prepared, config: Config, runner: Runner, progress: Progress | None
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Every chunk through the runner, put back together in register order."""
    n = len(prepared.walls)
    size = max(int(config.chunk_size), 1)
    chunks = split_prepared(prepared, size)
    ids = prepared.walls["wall_id"].to_numpy(dtype=object)
    results, walls = [], []
    for k, piece in enumerate(runner.map(evaluate_chunk, chunks, config)):
        start = k * size
        if progress is not None and n > size:
            progress(f"screened walls {start + 1:,}-{min(start + size, n):,} of {n:,}")
        frame = piece.results.copy()
        frame["_wall"] = frame["_wall"] + start
        frame["wall_id"] = ids[frame["_wall"].to_numpy()]
        results.append(frame)
        walls.append(piece.walls.set_axis(piece.walls.index + start))
    return pd.concat(results, ignore_index=True), pd.concat(walls)


def evaluate(
    register: pd.DataFrame,
    config: Config | None = None,
    *,
    history_points: pd.DataFrame | None = None,
    progress: Progress | None = None,
    runner: Runner | None = None,
    client: object = None,
    **kwargs: object,
) -> Screening:
    """Prepare and screen a register; keep problems, assumptions and the per-wall summary.

    The walls go through :func:`evaluate_chunk` in chunks of ``config.chunk_size`` by way of
    ``runner`` (default :class:`LocalRunner`, in this process).
    With a ``distributed.Client`` and no runner, the chunks run on
    its cluster (:class:`screening.distributed.DaskRunner`, the extra ``wallscreen[dask]``).
    """
    config = config or Config()
    prepared = prepare(register, config, **kwargs)  # type: ignore[arg-type]
    prepared = with_lean_rates(prepared, config, history_points)
    if len(prepared.walls) == 0:
        empty = pd.DataFrame({c: pd.Series(dtype=object) for c in RESULT_COLUMNS})
        return Screening(prepared, empty, pd.DataFrame(), prepared.problems, config)
    if runner is None and client is not None:
        from screening.distributed import DaskRunner

        runner = DaskRunner(client, progress)
    results, per_wall = _run_chunks(prepared, config, runner or LocalRunner(), progress)
    summary = summarise_walls(results, prepared.walls)
    summary = summary.join(per_wall)
    if config.samples > 0:
        summary = summarise_uncertainty(summary, results)
    flags = suspect_data(prepared.walls, prepared.problems, kwargs.get("labels") or {})  # type: ignore[arg-type]
    flags["drainage_not_recorded"] = drainage_not_recorded(prepared.walls)
    walls = add_priority(summary, prepared.walls.assign(**flags), results, config)
    problems = pd.concat([prepared.problems, _floating_problems(results, prepared.walls)], ignore_index=True)
    return Screening(prepared, results, walls, problems, config)


def screen(register: pd.DataFrame, config: Config | None = None) -> pd.DataFrame:
    """Screen every wall of a register in the drained, blocked and surveyed cases.

    Parameters
    ----------
    register : pandas.DataFrame
        One row per wall with the canonical columns of shared/inventory.md
        (``wall_id``, ``height_m``, ``base_width_m``, ``top_width_m`` required).
    config : Config, optional
        Settings; the defaults of method.md when omitted.

    Returns
    -------
    pandas.DataFrame
        One row per wall and case with the columns of :data:`RESULT_COLUMNS` (the probability
        columns blank with ``samples = 0``).
        Rows of the register that fail validation are left out and listed in a
        :class:`RejectedRowsWarning`.
    """
    run = evaluate(register, config)
    errors = run.prepared.rejected_rows
    if len(errors):
        listing = "; ".join(
            f"row {r.row} ({r.column}={r.value!r}): {r.message}" for r in errors.head(20).itertuples()
        )
        warnings.warn(
            f"{errors['row'].nunique()} row(s) rejected: {listing}", RejectedRowsWarning, stacklevel=2
        )
    return run.results.reindex(columns=list(RESULT_COLUMNS)).reset_index(drop=True)


__all__ = ["RESULT_COLUMNS", "Screening", "evaluate", "screen"]
