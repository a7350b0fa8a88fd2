"""The risk map: every located wall on a folium (Leaflet) map, coloured by margin.

Walls are one GeoJSON blob embedded once and drawn by our own JavaScript: the
colour class is computed here and kept in the feature properties, so the map
opens fast for tens of thousands of walls (see shared/measured.md). Text from
the register only ever reaches the page through ``textContent`` or escaped
HTML, so nothing in a register can run in a reader's browser.
"""

from __future__ import annotations

import html
import json
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import folium
import numpy as np
import pandas as pd
import shapely

from screening.config import CASES
from screening.io.writers import write_text_atomic
from screening.outputs.workbook import BAND_COLOURS
from screening.priority import BAND_LABELS, BANDS

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
OVERTURNS_TEXT = "resultant outside the base: the wall overturns in this case"

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


def map_data(
    walls: pd.DataFrame,
    geometry: np.ndarray,
    results: pd.DataFrame,
    sheets: dict[str, str] | None = None,
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
        "reason": w["reason"].astype(str).tolist(),
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
    data = map_data(walls, geometry, results, sheets)
    n = len(data["id"])
    if n:
        xy = np.asarray(data["xy"]).reshape(-1, 2)
        bounds = [[xy[:, 1].min(), xy[:, 0].min()], [xy[:, 1].max(), xy[:, 0].max()]]
    else:
        bounds = [[-60, -170], [75, 170]]
    m = folium.Map(
        location=[(bounds[0][0] + bounds[1][0]) / 2, (bounds[0][1] + bounds[1][1]) / 2],
        zoom_start=14,
        tiles=None,
        prefer_canvas=n > CANVAS_FROM,
        control_scale=True,
    )
    folium.TileLayer(
        tiles or DEFAULT_TILES, attr=TILES_ATTRIBUTION if not tiles else "tiles", name="base", control=False
    ).add_to(m)
    root: Any = m.get_root()
    if assets_dir is not None:
        folder = Path(assets_dir)
        js = (folder / "leaflet.js").read_text(encoding="utf-8")
        css = (folder / "leaflet.css").read_text(encoding="utf-8")
        m.default_js = []
        m.default_css = []
        root.header.add_child(folium.Element(f"<style>{css}</style><script>{js}</script>"), index=0)
    else:
        base = (assets_url or LEAFLET_CDN).rstrip("/")
        m.default_js = [("leaflet", f"{base}/leaflet.js")]
        m.default_css = [("leaflet_css", f"{base}/leaflet.css")]

    unlocated = int((~walls["located"].astype(bool)).sum())
    info = (
        f'<div id="ws-info"><div class="ws-title">{html.escape(title)}</div>'
        f'<div class="ws-sub">{html.escape(subtitle)}</div>'
        f'<div class="ws-sub">{n} walls drawn'
        + (
            f"; <b>{unlocated} without a location</b> (listed in the workbook, not drawn)"
            if unlocated
            else ""
        )
        + f'</div><div class="ws-caution">{html.escape(CAUTION)}</div></div>'
    )
    settings = {
        "cases": list(CASES),
        "colours": margin_colours(),
        "marginText": [c[2] for c in MARGIN_CLASSES] + [OVERTURNS_TEXT],
        "bands": list(BANDS),
        "bandColours": [BAND_COLOURS[b] for b in BANDS],
        "bandText": [BAND_LABELS[b] for b in BANDS],
        "bounds": bounds,
        "extra": extra_layers or {},
        "canvas": n > CANVAS_FROM,
    }
    root.header.add_child(folium.Element(f"<style>{_CSS}</style>"))
    root.html.add_child(folium.Element(info))
    script = (
        _JS.replace("__MAP__", m.get_name())
        .replace("__DATA__", _script_json(data))
        .replace("__SETTINGS__", _script_json(settings))
    )
    return MapPage(m, script)


@dataclass(frozen=True)
class MapPage:
    """The folium map plus our script, which must run after the map exists.

    The script is appended to the rendered page rather than passed through folium's
    templates, so no register text is ever interpreted as template syntax.
    """

    map: folium.Map
    script: str

    def html(self) -> str:
        page = self.map.get_root().render()
        head, sep, tail = page.rpartition("</html>")
        return f"{head}<script>{self.script}</script>\n{sep}{tail}"


def write_map(page: MapPage, target: str | Path) -> Path:
    """Write the map's HTML atomically."""
    return write_text_atomic(target, page.html())


_CSS = """
#ws-info { position: absolute; bottom: 52px; left: 10px; z-index: 1000; max-width: 440px;
  background: rgba(255,255,255,0.94); padding: 8px 12px; border-radius: 4px;
  font: 13px/1.35 system-ui, sans-serif; box-shadow: 0 1px 4px rgba(0,0,0,0.3); }
#ws-info .ws-title { font-weight: 600; font-size: 15px; }
#ws-info .ws-caution { margin-top: 4px; font-size: 11.5px; color: #6b1d1d; }
.ws-legend, .ws-search { background: rgba(255,255,255,0.94); padding: 6px 10px; border-radius: 4px;
  font: 12px/1.4 system-ui, sans-serif; box-shadow: 0 1px 4px rgba(0,0,0,0.3); }
.ws-legend .sw { display: inline-block; width: 22px; height: 6px; margin-right: 6px;
  vertical-align: middle; border-radius: 2px; }
.ws-legend div { white-space: nowrap; }
.ws-search input { width: 160px; font-size: 13px; padding: 2px 4px; }
.ws-search .msg { color: #6b1d1d; font-size: 11px; }
.ws-popup table { border-collapse: collapse; font-size: 12px; margin-top: 4px; }
.ws-popup td, .ws-popup th { border-bottom: 1px solid #ddd; padding: 2px 5px; text-align: right; }
.ws-popup th:first-child, .ws-popup td:first-child { text-align: left; }
.ws-popup .reason { margin: 4px 0; max-width: 400px; white-space: normal; }
"""

# Our own JavaScript: register text is only ever assigned with textContent.
_JS = r"""
(function () {
  var map = __MAP__;
  var D = __DATA__;
  var S = __SETTINGS__;
  var n = D.id.length;
  var CASE_NAMES = {drained: "drained", blocked: "drains blocked", surveyed: "as surveyed"};
  var CHECK_NAMES = {middle_third: "middle third", bearing: "bearing", sliding: "sliding",
    overturning: "overturning", crack_middle_third: "crack: middle third", crack_sliding: "crack: sliding",
    crack_overturning: "crack: overturning", vertical_load: "uplift exceeds weight"};
  var views = [["Worst case", -1]];
  D.cases.forEach(function (c, k) { views.push(["Case: " + CASE_NAMES[c], k]); });
  views.push(["Priority band", "band"]);
  var renderer = S.canvas ? L.canvas({padding: 0.5}) : undefined;

  function el(tag, text, cls) {
    var e = document.createElement(tag);
    if (text !== undefined && text !== null) e.textContent = String(text);
    if (cls) e.className = cls;
    return e;
  }
  function fmt(v, d) {
    if (v === null || v === undefined || Number.isNaN(v)) return "–";
    if (!isFinite(v)) return v > 0 ? "∞" : "−∞";
    return Number(v).toFixed(d);
  }
  function bandOf(i) { return D.bandNames[D.band[i]]; }
  function colourOf(i, view) {
    if (view === "band") return S.bandColours[S.bands.indexOf(bandOf(i))];
    var k = view === -1 ? D.worst[i] : view;
    return S.colours[D.cls[k][i]];
  }
  function style(i, view) {
    var c = colourOf(i, view);
    return {color: c, fillColor: c, weight: S.canvas ? 3 : 5, opacity: 0.95, fillOpacity: 0.9,
            radius: S.canvas ? 3 : 6, renderer: renderer};
  }
  function latlngs(i) {
    var pts = [];
    for (var k = D.off[i]; k < D.off[i + 1]; k += 2) pts.push([D.xy[k + 1], D.xy[k]]);
    return pts;
  }
  function tooltip(i) {
    var d = el("div");
    d.appendChild(el("b", D.id[i]));
    if (D.name[i]) d.appendChild(el("span", " " + D.name[i]));
    return d;
  }
  function popup(i) {
    var d = el("div", null, "ws-popup");
    var h = el("div"); h.appendChild(el("b", D.id[i])); h.appendChild(el("span", " " + D.name[i]));
    d.appendChild(h);
    var bandText = S.bandText[S.bands.indexOf(bandOf(i))];
    d.appendChild(el("div", bandText + " (score " + fmt(D.score[i], 1) + ", rank " + D.rank[i] + ")"));
    d.appendChild(el("div", D.reason[i], "reason"));
    var t = el("table"); var head = el("tr");
    ["case", "utilisation", "governing", "e [m] / B/6", "toe / allow. [kPa]", "FoS sl.", "FoS ot."]
      .forEach(function (x) { head.appendChild(el("th", x)); });
    t.appendChild(head);
    D.cases.forEach(function (c, k) {
      var r = el("tr");
      r.setAttribute("data-case", c);
      var gov = D.govNames[D.gov[k][i]];
      [CASE_NAMES[c], fmt(D.u[k][i], 2), CHECK_NAMES[gov] || gov, fmt(D.e[k][i], 2) + " / " + fmt(D.b6[i], 2),
       fmt(D.q[k][i], 0) + " / " + fmt(D.qa[i], 0), fmt(D.fs[k][i], 2), fmt(D.fo[k][i], 2)]
        .forEach(function (x) { r.appendChild(el("td", x)); });
      t.appendChild(r);
    });
    d.appendChild(t);
    if (D.sheet[i]) {
      var a = el("a", "Calculation sheet"); a.href = D.sheet[i]; a.target = "_blank"; a.rel = "noopener";
      d.appendChild(a);
    }
    return d;
  }
  function shape(i, st) {
    var pts = latlngs(i);
    return pts.length === 1 ? L.circleMarker(pts[0], st) : L.polyline(pts, st);
  }

  var index = {};
  for (var i = 0; i < n; i++) index[D.id[i].toLowerCase()] = i;
  var built = {};
  var groups = {};
  var current = null;
  function build(name, view) {
    var byId = {};
    var g = L.featureGroup();
    // the data is in ranking order: draw from the last so that rank 1 ends on top
    for (var i = n - 1; i >= 0; i--) {
      var layer = shape(i, style(i, view));
      layer.wsIndex = i;
      layer.bindTooltip(tooltip.bind(null, i), {sticky: true});
      layer.bindPopup(popup.bind(null, i), {maxWidth: 460, autoPanPaddingBottomRight: L.point(20, 180)});
      byId[D.id[i].toLowerCase()] = layer;
      g.addLayer(layer);
    }
    built[name] = {layer: g, byId: byId};
    return g;
  }
  views.forEach(function (v) {
    var grp = L.layerGroup();
    grp.on("add", function () {
      if (!built[v[0]]) grp.addLayer(build(v[0], v[1]));
      current = v;
      legend.update(v[1]);
    });
    groups[v[0]] = grp;
  });
  var overlays = {};
  Object.keys(S.extra).forEach(function (name) {
    var notes = S.extra[name];
    var g = L.featureGroup();
    Object.keys(notes).forEach(function (id) {
      var i = index[id.toLowerCase()];
      if (i === undefined) return;
      var layer = shape(i, {color: "#FFD400", weight: 11, opacity: 0.55, radius: 11, fillOpacity: 0.3});
      layer.bindTooltip(function () { var d = tooltip(i); d.appendChild(el("div", notes[id])); return d; },
                        {sticky: true});
      g.addLayer(layer);
    });
    overlays[name] = g;
  });

  var legend = L.control({position: "bottomright"});
  legend.onAdd = function () { this._div = el("div", null, "ws-legend"); return this._div; };
  legend.update = function (view) {
    var d = this._div; if (!d) return;
    d.textContent = "";
    if (view === "band") {
      d.appendChild(el("b", "Inspection priority"));
      S.bands.forEach(function (b, k) { var r = el("div"); var s = el("span", null, "sw");
        s.style.background = S.bandColours[k]; r.appendChild(s); r.appendChild(el("span", S.bandText[k]));
        d.appendChild(r); });
    } else {
      var which = view === -1 ? "worst of the three cases" : CASE_NAMES[D.cases[view]];
      d.appendChild(el("b", "Margin, " + which));
      S.colours.forEach(function (c, k) { var r = el("div"); var s = el("span", null, "sw");
        s.style.background = c; r.appendChild(s); r.appendChild(el("span", S.marginText[k]));
        d.appendChild(r); });
    }
  };
  legend.addTo(map);

  var base = {};
  views.forEach(function (v) { base[v[0]] = groups[v[0]]; });
  L.control.layers(base, overlays, {collapsed: false, position: "topright"}).addTo(map);
  groups[views[0][0]].addTo(map);

  var search = L.control({position: "topright"});
  search.onAdd = function () {
    var d = el("div", null, "ws-search");
    var input = el("input"); input.type = "search"; input.placeholder = "Find a wall by id";
    input.id = "ws-search-input";
    var msg = el("div", "", "msg");
    d.appendChild(input); d.appendChild(msg);
    L.DomEvent.disableClickPropagation(d);
    input.addEventListener("keydown", function (ev) {
      if (ev.key !== "Enter") return;
      var key = input.value.trim().toLowerCase();
      if (index[key] === undefined) { msg.textContent = "No wall with that id on the map"; return; }
      msg.textContent = "";
      var layer = built[current[0]].byId[key];
      if (layer.getLatLng) map.setView(layer.getLatLng(), 18);
      else map.fitBounds(layer.getBounds(), {maxZoom: 18});
      layer.openPopup();
    });
    return d;
  };
  search.addTo(map);
  if (n) {
    map.fitBounds(S.bounds, {paddingTopLeft: [20, 20], paddingBottomRight: [20, 170]});
  }
  window.wallscreenMap = {map: map, built: built, count: n, data: D};
})();
"""
