// The risk map's own drawing code, inlined into map.html by screening/outputs/webmap.py.
// The script before this one sets window.wallscreenConfig = {map, data, settings}: the name
// of folium's map variable, the walls column-wise (map_data) and the legend settings.
// Register text is only ever assigned with textContent, never parsed as HTML.
(function () {
  var C = window.wallscreenConfig;
  if (typeof window.L === "undefined") { libraryMissing(C.settings.leaflet); return; }
  var map = window[C.map];
  var D = C.data;
  var S = C.settings;
  var n = D.id.length;
  var CASE_NAMES = {drained: "drained", blocked: "drains blocked", surveyed: "as surveyed"};
  var CHECK_NAMES = {middle_third: "middle third", bearing: "bearing", sliding: "sliding",
    overturning: "overturning", crack_middle_third: "crack: middle third", crack_sliding: "crack: sliding",
    crack_overturning: "crack: overturning", vertical_load: "uplift exceeds weight"};
  // the map opens on the first view: the priority bands
  var views = [["Priority band", "band"], ["Worst case", -1]];
  D.cases.forEach(function (c, k) { views.push(["Case: " + CASE_NAMES[c], k]); });
  // the probability view exists only when the run drew samples (method.md §13)
  if (D.pfCls) views.push(["Probability of failure", "pf"]);
  var renderer = S.canvas ? L.canvas({padding: 0.5}) : undefined;
  // the info box sits above the map's panes (popups included): while a popup is open it keeps only
  // its title and the caution, so that it never hides the popup's figures
  map.on("popupopen popupclose", function (ev) {
    var box = document.getElementById("ws-info");
    if (box) box.classList.toggle("ws-quiet", ev.type === "popupopen");
  });

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
    if (view === "pf") return S.pfColours[D.pfCls[i]];
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
    // the reason's clauses are codes into reasonText, joined as the reason line joins them
    d.appendChild(el("div", D.reason[i].map(function (c) { return D.reasonText[c]; }).join("; "), "reason"));
    var t = el("table"); var head = el("tr");
    ["case", "utilisation", "governing", "e [m] / B/6", "toe / allow. [kPa]", "FoS sl.", "FoS ot."]
      .forEach(function (x) { head.appendChild(el("th", x)); });
    t.appendChild(head);
    D.cases.forEach(function (c, k) {
      var r = el("tr");
      r.setAttribute("data-case", c);
      var gov = D.govNames[D.gov[k][i]];
      [CASE_NAMES[c], fmt(D.u[k][i], 2), govText(gov, k, i), fmt(D.e[k][i], 2) + " / " + fmt(D.b6[i], 2),
       toeText(k, i), fmt(D.fs[k][i], 2), fmt(D.fo[k][i], 2)]
        .forEach(function (x) { r.appendChild(el("td", x)); });
      t.appendChild(r);
    });
    d.appendChild(t);
    probabilityLine(d, i);
    ownerNotes(d, i);
    if (D.sheet[i]) {
      var a = el("a", "Calculation sheet"); a.href = D.sheet[i]; a.target = "_blank"; a.rel = "noopener";
      d.appendChild(a);
    }
    return d;
  }
  // the popup's words for the mechanics of old walls: the governing bed joint with its height,
  // a resultant at the toe in words (its toe pressure is absurd), the Annex D resistance
  function govText(gov, k, i) {
    var name = CHECK_NAMES[gov] || gov.replace(/_/g, " ");
    if (gov.indexOf("joint_") === 0 && D.jz && isFinite(D.jz[k][i])) {
      name = "bed joint at " + fmt(D.jz[k][i], 2) + " m: " + gov.slice(6).replace(/_/g, " ");
    }
    return name;
  }
  function toeText(k, i) {
    if (D.nearToe && D.nearToe[k][i]) return D.nearToeText;
    if (D.annexD && D.annexD[i]) return fmt(D.q[k][i], 0) + " / R " + fmt(D.R[k][i], 0) + " kN/m (Annex D)";
    return fmt(D.q[k][i], 0) + " / " + fmt(D.qa[i], 0);
  }
  // one line: the chance of failure per case, given the wall stands today, and what to measure next
  function probabilityLine(d, i) {
    if (!D.pf) return;
    var parts = D.cases.map(function (c, k) {
      var p = D.pf[k][i];
      return CASE_NAMES[c] + " " + (p === null || Number.isNaN(p) ? "–" : fmt(p, 3));
    });
    var text = "P(failure | stands today): " + parts.join(", ");
    if (D.mn[i]) text += "; measure next: " + D.mnText[D.mn[i]];
    d.appendChild(el("div", text, "ws-pf"));
  }
  function ownerNotes(d, i) {
    if (!D.notes) return;
    // codes into notesText, 0 the empty text
    D.notes.forEach(function (lines) { if (lines[i]) d.appendChild(el("div", D.notesText[lines[i]], "note")); });
  }
  function shape(i, st) {
    var pts = latlngs(i);
    return pts.length === 1 ? L.circleMarker(pts[0], st) : L.polyline(pts, st);
  }

  // ids are kept as written: W1 and w1 are two walls
  var index = {};
  for (var i = 0; i < n; i++) index[D.id[i]] = i;
  var folded = {};
  for (var j = 0; j < n; j++) {
    var key = D.id[j].toLowerCase();
    (folded[key] = folded[key] || []).push(D.id[j]);
  }
  // the wall a search means: its id exactly, else the one id equal ignoring case (never a guess)
  function findWall(text) {
    if (index[text] !== undefined) return {id: text};
    var same = folded[text.toLowerCase()] || [];
    if (same.length === 1) return {id: same[0]};
    if (same.length > 1) return {msg: same.length + " walls differ only by case (" + same.join(", ") +
      "): type the id exactly"};
    return {msg: "No wall with that id on the map"};
  }
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
      byId[D.id[i]] = layer;
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
      var i = index[id];
      if (i === undefined) return;
      var layer = shape(i, {color: S.overlayColour, weight: 11, opacity: 0.55, radius: 11, fillOpacity: 0.3});
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
    } else if (view === "pf") {
      d.appendChild(el("b", "Chance of failure, worst case, given the wall stands today"));
      S.pfColours.forEach(function (c, k) { var r = el("div"); var s = el("span", null, "sw");
        s.style.background = c; r.appendChild(s); r.appendChild(el("span", S.pfText[k]));
        d.appendChild(r); });
    } else {
      var which = view === -1 ? "worst of the three cases" : CASE_NAMES[D.cases[view]];
      d.appendChild(el("b", "Margin, " + which));
      S.colours.forEach(function (c, k) { var r = el("div"); var s = el("span", null, "sw");
        s.style.background = c; r.appendChild(s); r.appendChild(el("span", S.marginText[k]));
        d.appendChild(r); });
    }
    overlayLegend(d);
  };
  // one entry per overlay (e.g. the walls changed since the last run), drawn as on the map
  function overlayLegend(d) {
    Object.keys(S.extra).forEach(function (name) {
      var r = el("div", null, "ws-overlay"); var s = el("span", null, "sw halo");
      s.style.background = S.overlayColour; r.appendChild(s);
      r.appendChild(el("span", name + " (" + Object.keys(S.extra[name]).length + ", halo; switch on top right)"));
      d.appendChild(r);
    });
  }
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
      var found = findWall(input.value.trim());
      if (found.msg) { msg.textContent = found.msg; return; }
      msg.textContent = "";
      var layer = built[current[0]].byId[found.id];
      // no animation: the popup pans itself into view from where the map has arrived
      if (layer.getLatLng) map.setView(layer.getLatLng(), 18, {animate: false});
      else map.fitBounds(layer.getBounds(), {maxZoom: 18, animate: false});
      layer.openPopup();
    });
    return d;
  };
  search.addTo(map);
  if (n) {
    map.fitBounds(S.bounds, {paddingTopLeft: [20, 20], paddingBottomRight: [20, 170]});
  }
  window.wallscreenMap = {map: map, built: built, count: n, data: D};

  // Leaflet did not load (no internet, or the address blocked): say so in the page itself
  function libraryMissing(url) {
    var box = document.createElement("div");
    box.id = "ws-no-library";
    box.setAttribute("role", "alert");
    var lines = [
      "The map library (Leaflet) could not be loaded from " + url + ", so the walls cannot be drawn.",
      "This computer may be offline, or the address may be blocked. The walls are all in the workbook " +
        "(report.xlsx) and in walls.csv.",
      "To make a map that opens without the internet, write it again with Leaflet inlined: " +
        "wallscreen map RESULTS-FOLDER --map-assets-dir FOLDER, where FOLDER holds leaflet.js and " +
        "leaflet.css (the same option works with wallscreen run). The background tiles still need a " +
        "tile server (--map-tiles)."
    ];
    lines.forEach(function (t, k) {
      var p = document.createElement(k ? "p" : "b"); p.textContent = t; box.appendChild(p);
    });
    document.body.appendChild(box);
  }
})();
