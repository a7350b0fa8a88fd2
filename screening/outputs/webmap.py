"""The risk map: every located wall on a folium (Leaflet) map, coloured by margin.

Walls are one GeoJSON blob embedded once and drawn by our own JavaScript: the
colour class is computed here and kept in the feature properties, so the map
opens fast for tens of thousands of walls (see shared/measured.md). Text from
the register only ever reaches the page through ``textContent`` or escaped
HTML, so nothing in a register can run in a reader's browser.

The page's own code is plain JavaScript and CSS shipped beside this module
(``webmap.js``, ``webmap.css``) and inlined into the page; the data reaches
``webmap.js`` through ``window.wallscreenConfig``, set by a script just before it.
"""

from __future__ import annotations

import html
import json
from collections.abc import Sequence
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any

import folium
import numpy as np
import pandas as pd
import shapely

from screening.config import CASES
from screening.io.writers import write_text_atomic
from screening.outputs.workbook import BAND_COLOURS
from screening.priority import BAND_LABELS, BANDS, LEAN_CAUTION, near_toe, near_toe_words

LEAFLET_VERSION = "1.9.3"
LEAFLET_CDN = f"https://cdn.jsdelivr.net/npm/leaflet@{LEAFLET_VERSION}/dist"
DEFAULT_TILES = "https://tile.openstreetmap.org/{z}/{x}/{y}.png"
TILES_ATTRIBUTION = '&copy; <a href="https://www.openstreetmap.org/copyright">OpenStreetMap</a> contributors'
CANVAS_FROM = 2_000
"""Registers with more walls than this are drawn on a canvas instead of SVG."""

# Margin classes: a diverging blue-to-red scale, readable with the common colour-vision
# deficiencies (blue against orange/red), ending in near-black for "overturns".
MARGIN_CLASSES: Sequence[tuple[float, str, str]] = (
    (0.8, "#2166AC", "utilisation up to 0.8: every check passes with room to spare"),
    (1.0, "#92C5DE", "0.8 to 1.0: passes, with little margin"),
    (1.5, "#F4A582", "1.0 to 1.5: fails a check, e.g. the resultant leaves the middle third"),
    (np.inf, "#B2182B", "over 1.5: fails clearly (toe pressure, sliding or overturning)"),
)
OVERTURNS_COLOUR = "#1A1A1A"
OVERLAY_COLOUR = "#FFD400"
"""The halo of an overlay (e.g. the walls changed since the last run), under the wall's colour."""
OVERTURNS_TEXT = "resultant outside the base: the wall overturns in this case"

# Probability-of-failure classes (method.md §13), darkest = most likely: the dark end of Paul Tol's
# sequential "iridescent" scheme (P. Tol, "Colour schemes", SRON technical note, 2021), each with a
# WCAG 2 contrast ratio of at least 3:1 against the map's land colour (tests/test_map.py checks it).
PF_CLASSES: Sequence[tuple[float, str, str]] = (
    (0.01, "#9D7DB2", "under 1 in 100"),
    (0.1, "#906388", "1 in 100 to 1 in 10"),
    (0.5, "#684957", "1 in 10 to 1 in 2"),
    (np.inf, "#46353A", "over 1 in 2"),
)
PF_CHECK_DATA = ("#009988", "check the data first: the figures say it could not stand")
"""Teal (Paul Tol's "vibrant" scheme, same note): a hue of its own beside the purple classes, where
the bands view's grey for these walls was hard to tell from the darkest class."""
PF_NOT_COMPUTED = ("#707070", "not computed")


def pf_class(p_failure: Any, data_inconsistent: Any) -> np.ndarray:
    """Class of each wall's worst-case p_failure: 0..3 by :data:`PF_CLASSES`, 4 for figures that
    cannot be right, 5 where no probability was computed (blank)."""
    p = np.asarray(p_failure, dtype=float)
    edges = np.array([c[0] for c in PF_CLASSES[:-1]])
    cls = np.searchsorted(edges, np.nan_to_num(p, nan=0.0), side="right")
    bad = np.asarray(pd.Series(np.asarray(data_inconsistent, dtype=object)).map(_truthy), dtype=bool)
    return np.where(bad, len(PF_CLASSES), np.where(np.isnan(p), len(PF_CLASSES) + 1, cls))


def _truthy(v: Any) -> bool:
    return str(v).strip().lower() in ("true", "1", "yes")


def pf_colours() -> list[str]:
    """Colour of each probability class, in class order."""
    return [c[1] for c in PF_CLASSES] + [PF_CHECK_DATA[0], PF_NOT_COMPUTED[0]]


def probability_data(w: pd.DataFrame) -> dict[str, Any]:
    """The probability view's lists: ``pf`` per case, ``pfCls`` of the worst case, ``mn`` measure
    next; empty (no view) when the run had samples = 0."""
    cols = [f"p_failure_{c}" for c in CASES]
    if not all(c in w for c in cols):
        return {}
    flagged = "data_inconsistent" in w and bool(w["data_inconsistent"].map(_truthy).any())
    if not w[cols].notna().to_numpy().any() and not flagged:
        return {}
    worst = w[cols].to_numpy(dtype=float)
    worst = np.where(np.isnan(worst).all(axis=1), np.nan, np.nanmax(np.nan_to_num(worst, nan=-1.0), axis=1))
    mn = w["measure_next"] if "measure_next" in w else pd.Series([""] * len(w))
    (mn_codes,), mn_text = coded_lines([[("" if pd.isna(v) else str(v)) for v in mn]])
    return {
        "pf": [_rounded(w[c], 4) for c in cols],
        "pfCls": pf_class(worst, w.get("data_inconsistent", pd.Series([False] * len(w)))).tolist(),
        "mn": mn_codes,
        "mnText": mn_text,
    }


CAUTION = (
    "Screening aid only: a colour means 'look here first', not 'failed'. Results must be reviewed "
    "by a qualified engineer; local codes and the asset owner's standards govern."
)


def margin_class(utilisation: Any, state: Any) -> np.ndarray:
    """Colour class of each utilisation: 0..3 by :data:`MARGIN_CLASSES`, 4 for overturning."""
    u = np.asarray(utilisation, dtype=float)
    edges = np.array([c[0] for c in MARGIN_CLASSES[:-1]])
    cls = np.searchsorted(edges, np.nan_to_num(u, nan=0.0, posinf=1e300), side="left")
    overturns = np.isin(np.asarray(state, dtype=object), ["resultant_outside_base", "floating"])
    return np.where(overturns, len(MARGIN_CLASSES), cls)


def margin_colours() -> list[str]:
    """Colour of each margin class, in class order."""
    return [c[1] for c in MARGIN_CLASSES] + [OVERTURNS_COLOUR]


def _rounded(values: Any, digits: int) -> list[float]:
    """Rounded floats for the page; NaN and infinity stay (valid JavaScript literals)."""
    return np.round(np.asarray(values, dtype=float), digits).tolist()


def _codes(values: Any) -> tuple[list[int], list[str]]:
    """Small integer codes and their names (the page looks the words up)."""
    codes, names = pd.factorize(pd.Series(np.asarray(values, dtype=object)).fillna(""), sort=True)
    return codes.tolist(), [str(n) for n in names]


def coded_lines(lines: list[list[str]]) -> tuple[list[list[int]], list[str]]:
    """Lists of texts (one per wall each) as codes into one table of the distinct texts, code 0
    the empty text: the same few sentences for thousands of walls are written once."""
    n = len(lines[0]) if lines else 0
    flat = np.concatenate([[""], *[np.asarray(line, dtype=object) for line in lines]]) if lines else [""]
    codes, names = pd.factorize(pd.Series(flat, dtype=object).fillna(""))
    codes = codes[1:]
    return [codes[k * n : (k + 1) * n].tolist() for k in range(len(lines))], [str(t) for t in names]


def _coded_reasons(reasons: pd.Series) -> dict[str, Any]:
    """The reason lines as codes of their clauses (split at "; ", joined back the same way by
    the page): the same clauses ("condition 4", "railway below") recur across thousands of walls."""
    clauses = reasons.fillna("").astype(str).str.split("; ", regex=False)
    lengths = clauses.str.len().to_numpy()
    flat = np.concatenate(clauses.to_numpy()) if len(clauses) else np.zeros(0, dtype=object)
    codes, texts = pd.factorize(pd.Series(flat, dtype=object))
    per_wall = [part.tolist() for part in np.split(codes, np.cumsum(lengths)[:-1])] if len(lengths) else []
    return {"reason": per_wall, "reasonText": [str(t) for t in texts]}


def map_data(
    walls: pd.DataFrame,
    geometry: np.ndarray,
    results: pd.DataFrame,
    sheets: dict[str, str] | None = None,
    near_toe_m: float = 0.0,
) -> dict[str, Any]:
    """The map's data, column-wise: one list per property, walls in ranking order.

    Located walls only. ``xy`` holds every vertex (lon, lat, 6 decimals, about 0.1 m) one after
    another and ``off`` where each wall's vertices start (a wall with one vertex is a point).
    Per-case lists (``u`` utilisation, ``cls`` colour class, ``gov`` governing check, ``st``
    state, ``e`` eccentricity, ``q`` toe pressure, ``fs``/``fo`` factors of safety) hold one
    list per case in the order of ``cases``. Register text is kept as data, never markup.
    """
    located = walls["located"].to_numpy(dtype=bool)
    w = walls[located].reset_index(drop=True)
    geoms = np.asarray(geometry, dtype=object)[located]
    coords, index = shapely.get_coordinates(geoms, return_index=True)
    counts = np.bincount(index, minlength=len(w)) if len(w) else np.zeros(0, dtype=int)
    off = np.concatenate([[0], np.cumsum(2 * counts)]).astype(int)
    by_case = {c: results[results["case"] == c].set_index("wall_id").reindex(w["wall_id"]) for c in CASES}
    gov, gov_names = _codes(
        np.concatenate([by_case[c]["governing_check"].to_numpy(dtype=object) for c in CASES])
    )
    st, st_names = _codes(np.concatenate([by_case[c]["state"].to_numpy(dtype=object) for c in CASES]))
    n = len(w)

    def split(codes: list[int]) -> list[list[int]]:
        return [codes[k * n : (k + 1) * n] for k in range(len(CASES))]

    band, band_names = _codes(w["priority_band"])
    return {
        "cases": list(CASES),
        "id": w["wall_id"].astype(str).tolist(),
        "name": [("" if pd.isna(v) else str(v)) for v in w["name"]],
        "rank": w["rank"].astype(int).tolist(),
        "score": _rounded(w["priority_score"], 1),
        "band": band,
        "bandNames": band_names,
        **_coded_reasons(w["reason"]),
        "worst": pd.Categorical(w["worst_case"], categories=CASES).codes.tolist(),
        "b6": _rounded(w["base_width_m"] / 6.0, 3),
        "qa": _rounded(w["allowable_bearing_kpa"], 0),
        "sheet": [(sheets or {}).get(i, "") for i in w["wall_id"].astype(str)],
        "xy": np.round(coords, 6).ravel().tolist(),
        "off": off.tolist(),
        "u": [_rounded(by_case[c]["utilisation"], 3) for c in CASES],
        "cls": [margin_class(by_case[c]["utilisation"], by_case[c]["state"]).tolist() for c in CASES],
        "gov": split(gov),
        "govNames": gov_names,
        "st": split(st),
        "stNames": st_names,
        "e": [_rounded(by_case[c]["eccentricity_m"], 3) for c in CASES],
        "q": [_rounded(by_case[c]["toe_pressure_kpa"], 1) for c in CASES],
        "fs": [_rounded(by_case[c]["fos_sliding"], 2) for c in CASES],
        "fo": [_rounded(by_case[c]["fos_overturning"], 2) for c in CASES],
    } | owner_data(w, by_case, near_toe_m)


def _words_where(mask: Any, text: Any) -> np.ndarray:
    return np.where(np.asarray(mask, dtype=bool), np.asarray(text, dtype=object), "").astype(object)


def _num(values: Any, digits: int) -> np.ndarray:
    v = np.asarray(values, dtype=float)
    return np.char.mod(f"%.{digits}f", np.where(np.isfinite(v), v, 0.0)).astype(object)


def owner_notes(w: pd.DataFrame) -> list[list[str]]:
    """Lines under the popup's table, column-wise ("" where a line does not apply): suspect data,
    drainage not recorded, and the figures of method.md §9 with the caution beside the years."""
    n = len(w)
    blank = np.full(n, "", dtype=object)

    def col(name: str) -> np.ndarray:
        return w[name].to_numpy(dtype=float) if name in w else np.full(n, np.nan)

    suspect = (
        w["suspect_inputs"].fillna("").astype(str).to_numpy(dtype=object) if "suspect_inputs" in w else blank
    )
    gap = (
        w["drainage_not_recorded"].fillna(False).to_numpy(dtype=bool)
        if "drainage_not_recorded" in w
        else blank != ""
    )
    hc, frac, top = col("critical_water_height_m"), col("critical_water_fraction"), col("retained_height_m")
    water = np.where(
        np.isnan(hc),
        "Critical water height: holds with water to the top of the retained ground",
        np.where(
            hc == 0,
            "Critical water height: 0 m (fails with no water behind it)",
            "Critical water height "
            + _num(hc, 2)
            + " m of "
            + _num(top, 2)
            + " m ("
            + _num(100 * frac, 0)
            + " % of the retained height)",
        ),
    ).astype(object)
    lean, now, years = col("critical_lean_deg"), col("lean_deg"), col("years_to_critical_lean")
    crit_lean = np.where(
        np.isnan(lean),
        "Critical lean: not reached by 45°",
        "Critical lean " + _num(lean, 1) + "° (resultant at the toe); lean now " + _num(now, 1) + "°",
    ).astype(object)
    shown = np.where(years < 1, "under a year", "about " + _num(np.round(years), 0) + " years")
    time = _words_where(
        np.isfinite(years),
        "Time to the critical lean at the present rate: " + shown + " (" + LEAN_CAUTION + ")",
    )
    return [
        _words_where(suspect != "", "Resting on suspect data: " + suspect + " (see the reason)").tolist(),
        _words_where(gap, "Drainage not recorded: screened as blocked").tolist(),
        (water if "critical_water_height_m" in w else blank).tolist(),
        (crit_lean if "critical_lean_deg" in w else blank).tolist(),
        time.tolist(),
    ]


def owner_data(w: pd.DataFrame, by_case: dict[str, pd.DataFrame], near_toe_m: float) -> dict[str, Any]:
    """What the popup adds to the figures per case: the notes of :func:`owner_notes`, the suspect
    inputs, a resultant at the toe (``nearToe`` per case, shown in words instead of the toe
    pressure), the governing bed joint's height (``jz``) and the Annex D resistance (``R``)."""

    def per_case(name: str, digits: int) -> list[list[float]]:
        return [
            _rounded(by_case[c][name] if name in by_case[c] else np.full(len(w), np.nan), digits)
            for c in CASES
        ]

    annex_d = [  # 1/0, not true/false: a few bytes less per wall
        (by_case[c]["bearing_method"].astype(str).to_numpy() == "annex_d").astype(int).tolist()
        if "bearing_method" in by_case[c]
        else [0] * len(w)
        for c in CASES
    ]
    notes, notes_text = coded_lines(owner_notes(w))
    return {
        "notes": notes,
        "notesText": notes_text,
        "suspect": w["suspect_inputs"].fillna("").astype(str).tolist()
        if "suspect_inputs" in w
        else [""] * len(w),
        "nearToe": [  # 1/0 per case
            (
                near_toe(by_case[c]["resultant_from_toe_m"], near_toe_m)
                if near_toe_m > 0
                else np.zeros(len(w), bool)
            )
            .astype(int)
            .tolist()
            for c in CASES
        ],
        "nearToeText": near_toe_words(near_toe_m),
        "jz": per_case("joint_height_m", 2),
        "R": per_case("bearing_resistance_kn_m", 0),
        "annexD": annex_d[0],
    }


def _script_json(value: Any) -> str:
    """A JavaScript literal safe to place inside a <script> element (NaN and Infinity allowed)."""
    return (
        json.dumps(value, ensure_ascii=False, separators=(",", ":"), allow_nan=True)
        .replace("<", "\\u003c")
        .replace(">", "\\u003e")
        .replace("&", "\\u0026")
        .replace("\u2028", "\\u2028")
        .replace("\u2029", "\\u2029")
    )


def build_map(
    walls: pd.DataFrame,
    geometry: np.ndarray,
    results: pd.DataFrame,
    *,
    title: str,
    subtitle: str,
    sheets: dict[str, str] | None = None,
    assets_url: str | None = None,
    assets_dir: str | Path | None = None,
    tiles: str | None = None,
    extra_layers: dict[str, Any] | None = None,
    near_toe_m: float = 0.0,
    carried: list[str] | None = None,
) -> MapPage:
    """The folium map of a run (see the module docstring).

    Parameters
    ----------
    assets_url : str, optional
        Base URL holding ``leaflet.js`` and ``leaflet.css`` (an intranet mirror)
        instead of the public CDN.
    assets_dir : path, optional
        Folder holding ``leaflet.js`` and ``leaflet.css`` to inline into the page,
        so it opens with no internet (tiles still need a tile server).
    tiles : str, optional
        Tile URL template; the public OpenStreetMap tiles by default.
    extra_layers : dict, optional
        Name -> {wall id: text} overlays (e.g. "changed since the last survey").
    """
    data = map_data(walls, geometry, results, sheets, near_toe_m)
    data |= probability_data(walls[walls["located"].to_numpy(dtype=bool)].reset_index(drop=True))
    n = len(data["id"])
    bounds = _bounds(data["xy"])
    m = _base_map(bounds, canvas=n > CANVAS_FROM, tiles=tiles)
    _leaflet_assets(m, assets_url=assets_url, assets_dir=assets_dir)
    root: Any = m.get_root()
    root.header.add_child(folium.Element(f"<style>\n{page_file('webmap.css')}</style>"))
    unlocated = int((~walls["located"].astype(bool)).sum())
    box = _info_box(title, subtitle, drawn=n, unlocated=unlocated)
    root.html.add_child(folium.Element(_with_carried(box, carried or [])))
    leaflet = "the page itself" if assets_dir is not None else (assets_url or LEAFLET_CDN).rstrip("/")
    settings = _settings(bounds, extra_layers or {}, canvas=n > CANVAS_FROM, leaflet_url=leaflet)
    config = {"map": m.get_name(), "data": data, "settings": settings}
    return MapPage(m, _script_json(config))


def page_file(name: str) -> str:
    """The text of one of the page files shipped beside this module (``webmap.js``, ``webmap.css``)."""
    return resources.files("screening.outputs").joinpath(name).read_text(encoding="utf-8")


def _bounds(xy: list[float]) -> list[list[float]]:
    """[[south, west], [north, east]] of the flat lon, lat vertex list; most of the world if empty."""
    if not xy:
        return [[-60, -170], [75, 170]]
    lonlat = np.asarray(xy).reshape(-1, 2)
    return [[lonlat[:, 1].min(), lonlat[:, 0].min()], [lonlat[:, 1].max(), lonlat[:, 0].max()]]


def _base_map(bounds: list[list[float]], *, canvas: bool, tiles: str | None) -> folium.Map:
    """The folium map centred on the walls, with its tile layer."""
    m = folium.Map(
        location=[(bounds[0][0] + bounds[1][0]) / 2, (bounds[0][1] + bounds[1][1]) / 2],
        zoom_start=14,
        tiles=None,
        prefer_canvas=canvas,
        control_scale=True,
    )
    folium.TileLayer(
        tiles or DEFAULT_TILES, attr=TILES_ATTRIBUTION if not tiles else "tiles", name="base", control=False
    ).add_to(m)
    return m


def _leaflet_assets(m: folium.Map, *, assets_url: str | None, assets_dir: str | Path | None) -> None:
    """Point this map (only this one, see shared/measured.md) at Leaflet: inlined from a folder,
    linked from a mirror, or linked from the public CDN."""
    if assets_dir is not None:
        folder = Path(assets_dir)
        js = (folder / "leaflet.js").read_text(encoding="utf-8")
        css = (folder / "leaflet.css").read_text(encoding="utf-8")
        m.default_js = []
        m.default_css = []
        root: Any = m.get_root()
        root.header.add_child(folium.Element(f"<style>{css}</style><script>{js}</script>"), index=0)
    else:
        base = (assets_url or LEAFLET_CDN).rstrip("/")
        m.default_js = [("leaflet", f"{base}/leaflet.js")]
        m.default_css = [("leaflet_css", f"{base}/leaflet.css")]


def _info_box(title: str, subtitle: str, *, drawn: int, unlocated: int) -> str:
    """The box with the run's title, the count of walls drawn and not drawn, and the caution."""
    missing = (
        f"; <b>{unlocated} without a location</b> (listed in the workbook, not drawn)" if unlocated else ""
    )
    return (
        f'<div id="ws-info"><div class="ws-title">{html.escape(title)}</div>'
        f'<div class="ws-sub">{html.escape(subtitle)}</div>'
        f'<div class="ws-sub">{drawn} walls drawn{missing}'
        f'</div><div class="ws-caution">{html.escape(CAUTION)}</div></div>'
    )


def _with_carried(box: str, carried: list[str], shown: int = 10) -> str:
    """The info box with the walls of the last run not re-screened this time (rows rejected),
    each with its band then and why: they are on no other list of this run."""
    if not carried:
        return box
    items = "".join(f"<li>{html.escape(line)}</li>" for line in carried[:shown])
    more = f"<li>… {len(carried) - shown} more in changes.csv</li>" if len(carried) > shown else ""
    block = (
        f'<div class="ws-carried"><b>Not re-screened this run ({len(carried)}): rows rejected, '
        f"carried from the last run</b><ul>{items}{more}</ul></div>"
    )
    head, sep, tail = box.rpartition('<div class="ws-caution">')
    return f"{head}{block}{sep}{tail}"


def _settings(
    bounds: list[list[float]], extra_layers: dict[str, Any], *, canvas: bool, leaflet_url: str = ""
) -> dict[str, Any]:
    """What the page's script needs besides the walls: colours, legend words, bounds, overlays."""
    return {
        "cases": list(CASES),
        "colours": margin_colours(),
        "marginText": [c[2] for c in MARGIN_CLASSES] + [OVERTURNS_TEXT],
        "bands": list(BANDS),
        "bandColours": [BAND_COLOURS[b] for b in BANDS],
        "bandText": [BAND_LABELS[b] for b in BANDS],
        "bounds": bounds,
        "extra": extra_layers,
        "overlayColour": OVERLAY_COLOUR,
        "leaflet": leaflet_url,
        "canvas": canvas,
        "pfColours": pf_colours(),
        "pfText": [c[2] for c in PF_CLASSES] + [PF_CHECK_DATA[1], PF_NOT_COMPUTED[1]],
    }


@dataclass(frozen=True)
class MapPage:
    """The folium map plus the data for our script, which must run after the map exists.

    ``config`` is the JavaScript literal of ``{map, data, settings}`` (see :func:`build_map`).
    It and ``webmap.js`` are appended to the rendered page rather than passed through folium's
    templates, so no register text is ever interpreted as template syntax.
    """

    map: folium.Map
    config: str

    def html(self) -> str:
        page = self.map.get_root().render()
        head, sep, tail = page.rpartition("</html>")
        return (
            f"{head}<script>\nwindow.wallscreenConfig = {self.config};\n</script>\n"
            f"<script>\n{page_file('webmap.js')}</script>\n{sep}{tail}"
        )


def write_map(page: MapPage, target: str | Path) -> Path:
    """Write the map's HTML atomically."""
    return write_text_atomic(target, page.html())
