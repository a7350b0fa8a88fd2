"""Inspection priority: which walls to look at first, and why.

Following the idea of geotechnical asset management guidance (risk as the
product of the likelihood of poor performance and its consequence; NCHRP
Report 903, *Geotechnical Asset Management for Transportation Agencies*,
2019), in our own terms:

- **likelihood** (0–1) = weighted sum of
  - the structural index 1 − exp(−u / u_scale), where u blends the surveyed
    case's utilisation (today's evidence) with the blocked case's (the
    plausible worst); infinite utilisation gives 1;
  - the surveyed condition rating, (rating − 1)/4;
  - the outward lean, lean / lean_full (capped at 1);
  - a known crack (1 if recorded);
- **consequence** (0–1) = class weight / the largest weight × (½ + ½·min(H/H_full, 1)):
  what a failure would hit and how high the wall is;
- **priority score** = 100 × likelihood × consequence.

Every term is non-decreasing in its input and the weights are non-negative,
so a worse utilisation, a worse condition, more lean or a higher consequence
never lowers a wall's priority (property-tested). Bands cut the score at
configurable thresholds.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]

BANDS = ("check_data", "inspect_first", "inspect_soon", "routine", "low_concern")
BAND_LABELS = {
    "check_data": "Check the data first",
    "inspect_first": "Inspect first",
    "inspect_soon": "Inspect soon",
    "routine": "Routine inspection",
    "low_concern": "Low concern",
}


@dataclass(frozen=True)
class PrioritySettings:
    """Weights and thresholds of the priority score (documented in the README)."""

    weight_structural: float = 0.5
    weight_condition: float = 0.25
    weight_lean: float = 0.15
    weight_crack: float = 0.10
    weight_surveyed_case: float = 0.6
    """Share of the surveyed case in the blended utilisation; the blocked case has the rest."""
    utilisation_scale: float = 1.5
    lean_full_deg: float = 5.0
    lean_rate_full_deg_per_year: float = 0.5
    weight_lean_rate: float = 0.1
    """Weight of the measured lean rate (walls with one survey count as not moving)."""
    height_full_m: float = 6.0
    band_thresholds: Mapping[str, float] = field(
        default_factory=lambda: MappingProxyType(
            {"inspect_first": 40.0, "inspect_soon": 25.0, "routine": 12.0}
        )
    )


def structural_index(
    utilisation_surveyed: ArrayLike, utilisation_blocked: ArrayLike, settings: PrioritySettings
) -> FloatArray:
    """1 − exp(−u/scale) of the blended utilisation; 1 for an infinite utilisation."""
    us = np.nan_to_num(np.asarray(utilisation_surveyed, dtype=float), nan=0.0, posinf=np.inf)
    ub = np.nan_to_num(np.asarray(utilisation_blocked, dtype=float), nan=0.0, posinf=np.inf)
    w = settings.weight_surveyed_case
    with np.errstate(invalid="ignore"):
        blended = w * us + (1 - w) * ub
    return 1.0 - np.exp(-np.clip(blended, 0.0, None) / settings.utilisation_scale)


def likelihood(
    utilisation_surveyed: ArrayLike,
    utilisation_blocked: ArrayLike,
    condition_rating: ArrayLike,
    lean_deg: ArrayLike,
    cracked: ArrayLike,
    settings: PrioritySettings,
    lean_rate_deg_per_year: ArrayLike | None = None,
    structural: ArrayLike | None = None,
) -> FloatArray:
    """Likelihood of poor performance on a 0–1 scale (see the module docstring).

    ``structural`` replaces the structural index of the utilisations where given (with samples
    on: :func:`probability_index`).
    """
    s = settings
    cond = np.clip((np.asarray(condition_rating, dtype=float) - 1.0) / 4.0, 0.0, 1.0)
    lean = np.clip(np.asarray(lean_deg, dtype=float) / s.lean_full_deg, 0.0, 1.0)
    crack = np.asarray(cracked, dtype=float)
    total = s.weight_structural + s.weight_condition + s.weight_lean + s.weight_crack
    value = (
        s.weight_structural
        * (
            structural_index(utilisation_surveyed, utilisation_blocked, s)
            if structural is None
            else np.asarray(structural, dtype=float)
        )
        + s.weight_condition * cond
        + s.weight_lean * lean
        + s.weight_crack * crack
    )
    if lean_rate_deg_per_year is not None and s.weight_lean_rate > 0:
        rate = np.nan_to_num(np.asarray(lean_rate_deg_per_year, dtype=float), nan=0.0)
        value = value + s.weight_lean_rate * np.clip(rate / s.lean_rate_full_deg_per_year, 0.0, 1.0)
        total += s.weight_lean_rate
    return value / total


def probability_index(
    p_failure_surveyed: ArrayLike, p_failure_blocked: ArrayLike, settings: PrioritySettings
) -> FloatArray:
    """The structural index with samples on (method.md §13): w·p(surveyed) + (1 − w)·p(blocked).

    w is ``weight_surveyed_case`` (0.6). For a wall whose figures cannot be right the callers
    pass p_failure_prior (the share over all draws). A blank probability counts as 0.
    """
    ps = np.nan_to_num(np.asarray(p_failure_surveyed, dtype=float), nan=0.0)
    pb = np.nan_to_num(np.asarray(p_failure_blocked, dtype=float), nan=0.0)
    w = settings.weight_surveyed_case
    return np.clip(w * ps + (1 - w) * pb, 0.0, 1.0)


def band_with_data_check(score: ArrayLike, inconsistent: ArrayLike, settings: PrioritySettings) -> NDArray:
    """The band of each score, and ``check_data`` for a wall whose figures cannot be right (§13)."""
    bands = band(score, settings).astype(object)
    return np.where(np.asarray(inconsistent, dtype=bool), "check_data", bands)


_FAILURE_MODES = {
    "sliding": "sliding",
    "overturning": "overturning",
    "bearing": "bearing failure",
    "crack_sliding": "sliding on the crack",
    "crack_overturning": "toppling above the crack",
    "crack_middle_third": "toppling above the crack",
    "joint_sliding": "sliding on a bed joint",
    "joint_overturning": "toppling above a bed joint",
    "joint_middle_third": "toppling above a bed joint",
}
"""The deterministic governing check as the way the wall would fail, for the §13 clause."""

_PROBABILITY_CASE_WORDS = {"surveyed": "as surveyed", "blocked": "with drains blocked"}


def _one_in(p: FloatArray) -> NDArray[np.object_]:
    """A probability in words an owner reads: "1 in 4", "3 in 10", "less than 1 in 1,000"."""
    with np.errstate(divide="ignore", invalid="ignore"):
        n = np.round(1.0 / p)
    in_n = "1 in " + np.char.mod("%d", np.where(np.isfinite(n), n, 0).astype(np.int64)).astype(object)
    tenths = np.char.mod("%d", np.round(10 * np.nan_to_num(p)).astype(np.int64)).astype(object) + " in 10"
    text = np.where(p > 0.5, tenths, in_n)
    text = np.where(p >= 0.95, "almost certain", text)
    return np.where(p < 0.001, "less than 1 in 1,000", text).astype(object)


def probability_parts(walls: pd.DataFrame, by_case: Mapping[str, pd.DataFrame]) -> NDArray[np.object_]:
    """The §13 clause of the reason line: the likelier failure given that the wall stands today,
    what to measure next, or for figures that cannot be right, the likeliest wrong input."""
    pieces = []
    for case, words in _PROBABILITY_CASE_WORDS.items():
        r = by_case[case]
        p = r["p_failure"].to_numpy(dtype=float)
        check = pd.Series(r["governing_check"].astype(str).to_numpy(dtype=object))
        mode = check.map(_FAILURE_MODES).fillna("failure").to_numpy(dtype=object)
        text = _one_in(p) + " chance of " + mode + " " + words + ", given it stands today"
        pieces.append((np.nan_to_num(p), _when(p >= 0.001, text)))
    (ps, ts), (pb, tb) = pieces
    text = np.where(pb > ps, tb, ts).astype(object)
    measure = walls["measure_next"].fillna("").to_numpy(dtype=object) if "measure_next" in walls else ""
    text = text + np.where((text != "") & (measure != ""), "; measure: " + measure, "")
    bad = walls["data_inconsistent"].fillna(False).to_numpy(dtype=bool)
    check_text = np.where(
        measure != "",
        "the recorded figures say this wall should not be standing: check the data first, likeliest "
        + measure,
        "the recorded figures say this wall should not be standing (no draw stands): check the data first",
    )
    text = np.where(text == "", "failure less likely than 1 in 1,000 given it stands today", text)
    return np.where(bad, check_text, text).astype(object)


def consequence(
    consequence_class: ArrayLike,
    height_m: ArrayLike,
    class_weight: Mapping[str, float],
    settings: PrioritySettings,
) -> FloatArray:
    """Consequence of failure on a 0–1 scale: what lies below and how high the wall is."""
    classes = pd.Series(np.asarray(consequence_class, dtype=object))
    weight = classes.map(dict(class_weight)).astype(float).to_numpy() / max(class_weight.values())
    height = np.clip(np.asarray(height_m, dtype=float) / settings.height_full_m, 0.0, 1.0)
    return weight * (0.5 + 0.5 * height)


def band(score: ArrayLike, settings: PrioritySettings) -> NDArray[np.str_]:
    """Priority band of each score (thresholds from the settings)."""
    s = np.asarray(score, dtype=float)
    t = settings.band_thresholds
    return np.select(
        [s >= t["inspect_first"], s >= t["inspect_soon"], s >= t["routine"]],
        ["inspect_first", "inspect_soon", "routine"],
        "low_concern",
    )


def _fmt(values: ArrayLike, digits: int) -> NDArray[np.object_]:
    """Numbers as text with fixed decimals, vectorised; ∞ for infinity, '' for NaN."""
    v = np.asarray(values, dtype=float)
    finite = np.isfinite(v)
    text = _fixed(np.where(finite, v, 0.0), digits)
    return np.where(np.isinf(v), "∞", np.where(finite, text, "")).astype(object)


def _fixed(v: FloatArray, digits: int) -> NDArray[np.object_]:
    """``%.{digits}f`` of finite values, each distinct rounded value formatted once (a register
    holds few: 10^5 utilisations to two decimals are some hundreds of texts). Values near a
    halfway point, or negative and rounding to 0 (printed "-0"), are formatted one by one, so
    the text is always exactly printf's."""
    scaled = v * 10.0**digits
    near_half = np.abs(np.abs(scaled - np.floor(scaled)) - 0.5) < 1e-6
    own = near_half | (np.abs(scaled) > 1e12) | (np.signbit(v) & (np.round(v, digits) == 0))
    out = np.empty(v.shape, dtype=object)
    pattern = f"%.{digits}f"
    out[own] = [pattern % x for x in v[own]]
    rest = v[~own]
    if rest.size:
        _, first, inverse = np.unique(np.round(rest, digits), return_index=True, return_inverse=True)
        texts = np.array([pattern % x for x in rest[first]], dtype=object)
        out[~own] = texts[inverse.reshape(-1)]
    return out


_CHECK_WORDS = {
    "middle_third": "the resultant leaves the middle third",
    "bearing": "the toe pressure exceeds the allowable",
    "sliding": "sliding resistance is short",
    "overturning": "the overturning margin is short",
    "crack_middle_third": "above the crack the resultant leaves the middle third",
    "crack_sliding": "sliding on the crack is short",
    "crack_overturning": "overturning about the crack is short",
    "resultant": "the resultant leaves the permitted part of the base",
    "joint_middle_third": "above a bed joint the resultant leaves the middle third",
    "joint_sliding": "sliding on a bed joint is short",
    "joint_overturning": "overturning about a bed joint is short",
    "vertical_load": "uplift exceeds the weight",
}


def _when(mask: ArrayLike, text: NDArray[np.object_] | str) -> NDArray[np.object_]:
    return np.where(np.asarray(mask, dtype=bool), text, "").astype(object)


def _only(mask: ArrayLike, build: Callable[[NDArray[np.intp]], NDArray[np.object_]]) -> NDArray[np.object_]:
    """Text where ``mask`` holds, built only for those rows (``build`` gets their positions); ''
    elsewhere. Most walls pass most checks: their words need not be assembled."""
    where = np.asarray(mask, dtype=bool)
    out = np.full(where.shape, "", dtype=object)
    at = np.flatnonzero(where)
    if at.size:
        out[at] = build(at)
    return out


LEAN_CAUTION = "a projection, not a prediction: drystone can collapse with little warning movement"
"""Said beside every years-to-critical-lean figure (method.md §9; Powrie et al., Géotechnique
52(6), 2002: unweathered drystone can collapse with little warning movement)."""


def _metres(values: ArrayLike) -> NDArray[np.object_]:
    """Heights as text: two decimals below 1 m (so that 0.04 m does not read 0.0), else one."""
    v = np.asarray(values, dtype=float)
    return np.where(v < 0.995, _fmt(v, 2), _fmt(v, 1)).astype(object)


def _critical_parts(walls: pd.DataFrame) -> tuple[NDArray[np.object_], NDArray[np.object_]]:
    """The §9 figures in words where they matter (method.md §9).

    The critical water height where there is one above 0 (at 0 the wall fails drained, which
    the case parts already say); the years to the critical lean where the lean is growing
    towards it, with the caution beside the figure.
    """
    water = years_part = np.full(len(walls), "", dtype=object)
    if "critical_water_height_m" in walls:
        h = walls["critical_water_height_m"].to_numpy(dtype=float)
        top = walls["retained_height_m"].to_numpy(dtype=float)
        water = _only(
            np.isfinite(h) & (h > 0),
            lambda i: "fails once water rises above " + _metres(h[i]) + " m of " + _metres(top[i]) + " m",
        )
    if "years_to_critical_lean" in walls:
        years = walls["years_to_critical_lean"].to_numpy(dtype=float)
        crit = walls["critical_lean_deg"].to_numpy(dtype=float)

        def lean_words(i: NDArray[np.intp]) -> NDArray[np.object_]:
            y = years[i]
            shown = np.where(y < 1, "within a year", "in about " + _fmt(np.round(y), 0) + " years")
            head = "lean reaches " + _fmt(crit[i], 1) + "° (resultant at the toe) "
            return head + shown + " at the present rate, " + LEAN_CAUTION

        years_part = _only(np.isfinite(years) & (years > 0), lean_words)
    return water, years_part


def _check_words(r: pd.DataFrame) -> NDArray[np.object_]:
    """The governing check of each row in words (the bed joint with its height)."""
    name = r["governing_check"].to_numpy(dtype=object)
    words = pd.Series(name).map(_CHECK_WORDS).fillna("").to_numpy(dtype=object)
    if "bearing_method" in r:
        annex_d = (name == "bearing") & (r["bearing_method"].to_numpy(dtype=object) == "annex_d")
        words = np.where(annex_d, "the bearing resistance is short (EN 1997-1 Annex D)", words)
    if "joint_height_m" in r:
        joint = pd.Series(name).astype(str).str.startswith("joint_").to_numpy()
        at = " (bed joint at " + _metres(r["joint_height_m"].to_numpy(dtype=float)) + " m)"
        words = np.where(joint, words + at, words)
    outside = r["state"].to_numpy(dtype=object) == "resultant_outside_base"
    return np.where(outside, "the resultant falls outside the base", words).astype(object)


def near_toe(resultant_from_toe_m: ArrayLike, limit_m: float) -> NDArray[np.bool_]:
    """Where the resultant lies inside the base but within ``limit_m`` of the toe (0 < x_R < limit):
    the toe pressure is correct but absurd there (it grows without bound as x_R → 0)."""
    x = np.asarray(resultant_from_toe_m, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.isfinite(x) & (x > 0) & (x < limit_m)


def near_toe_words(limit_m: float) -> str:
    """``resultant within 20 mm of the toe``: what is shown instead of such a toe pressure."""
    return f"resultant within {limit_m * 1000:g} mm of the toe"


def _case_part(r: pd.DataFrame, near_toe_m: float) -> NDArray[np.object_]:
    """One case's words where it fails (without the case's name); a bearing check with the
    resultant at the toe in words."""
    util = r["utilisation"].to_numpy(dtype=float)

    def words(i: NDArray[np.intp]) -> NDArray[np.object_]:
        failing = r.iloc[i]
        check = _check_words(failing)
        figure = " (utilisation " + _fmt(util[i], 2) + ")"
        if near_toe_m > 0 and "resultant_from_toe_m" in failing:
            at_toe = near_toe(failing["resultant_from_toe_m"], near_toe_m) & (
                failing["governing_check"].to_numpy(dtype=object) == "bearing"
            )
            check = np.where(at_toe, f"the resultant is within {near_toe_m * 1000:g} mm of the toe", check)
            figure = np.where(at_toe, "", figure)
        return (check + figure).astype(object)

    return _only(util > 1, words)


def _suspect_part(walls: pd.DataFrame) -> NDArray[np.object_]:
    """The data warnings on inputs of the mechanics, in words (``suspect_words``, from the pipeline)."""
    if "suspect_words" not in walls:
        return np.full(len(walls), "", dtype=object)
    return walls["suspect_words"].fillna("").to_numpy(dtype=object)


def _drainage_part(walls: pd.DataFrame) -> NDArray[np.object_]:
    """Drainage not recorded is a data gap, screened like blocked drains (method.md §4): say so."""
    if "drainage_not_recorded" not in walls:
        return np.full(len(walls), "", dtype=object)
    gap = walls["drainage_not_recorded"].fillna(False).to_numpy(dtype=bool)
    return _when(gap, "drainage not recorded (screened as blocked)")


def reasons(
    walls: pd.DataFrame, by_case: Mapping[str, pd.DataFrame], near_toe_m: float = 0.0
) -> NDArray[np.object_]:
    """A one-line reason in plain words for each wall, built column-wise (object arrays).

    ``walls`` needs ``condition_rating``, ``lean_deg``, ``crack_height_m``, ``consequence``,
    ``height_m`` (and optionally ``lean_rate_deg_per_year``, ``lean_growing``, and the §9
    figures ``critical_water_height_m`` with ``retained_height_m``, ``critical_lean_deg`` and
    ``years_to_critical_lean``); ``by_case``
    the results of the ``surveyed`` and ``blocked`` cases, row for row with ``walls``.
    """
    surveyed, blocked = (_case_part(by_case[case], near_toe_m) for case in ("surveyed", "blocked"))
    # say the blocked case only where it adds to the surveyed one
    none_fail = (surveyed == "") & (blocked == "")
    parts = [
        _only(surveyed != "", lambda i: "as surveyed " + surveyed[i]),
        _only((blocked != "") & (blocked != surveyed), lambda i: "with drains blocked " + blocked[i]),
    ]
    if "p_failure" in by_case["surveyed"] and "data_inconsistent" in walls:
        # with samples on the probabilities take the place of the utilisations (method.md §13)
        parts = [probability_parts(walls, by_case)]
    parts.append(_drainage_part(walls))
    water, years = _critical_parts(walls)
    parts.append(water)
    cond = walls["condition_rating"].to_numpy(dtype=float)
    parts.append(_only(cond >= 3, lambda i: "condition " + _fmt(cond[i], 0)))
    lean = walls["lean_deg"].to_numpy(dtype=float)
    parts.append(_only(lean >= 1.0, lambda i: "lean " + _fmt(lean[i], 1) + "° outwards"))
    if "lean_rate_deg_per_year" in walls:
        rate = walls["lean_rate_deg_per_year"].to_numpy(dtype=float)
        growing = (
            walls["lean_growing"].fillna(False).to_numpy(dtype=bool) if "lean_growing" in walls else rate > 0
        )
        parts.append(_only(growing, lambda i: "lean growing " + _fmt(rate[i], 2) + "°/yr"))
    parts.append(years)
    crack = walls["crack_height_m"].to_numpy(dtype=float)
    parts.append(_only(np.isfinite(crack), lambda i: "crack at " + _fmt(crack[i], 1) + " m"))
    codes, classes = pd.factorize(walls["consequence"].to_numpy(dtype=str))
    below = np.asarray([str(c).replace("_", " ") for c in classes] or [""], dtype=object)[codes]
    parts.append(below + " below, " + _fmt(walls["height_m"], 1) + " m high")
    passes = _when(none_fail, "passes every check in every case")
    return _joined([_suspect_part(walls), passes, *parts])  # a data warning is said first


def _joined(parts: list[NDArray[np.object_]]) -> NDArray[np.object_]:
    """Row by row, the non-empty parts joined by "; ", the first letter a capital."""
    lines = ["; ".join(filter(None, row)) for row in zip(*parts, strict=True)]
    return np.array([t[:1].upper() + t[1:] for t in lines], dtype=object).reshape(-1)
