/* walkcomfort route map: one scheme x departure at a time, one colouring at a time.
 *
 * Data come from the JSON block #wc-data (written by walkcomfort.report.map). No user
 * text is ever written as markup: every label, popup and legend entry is set with
 * textContent. Leaflet puts only the tile attribution into the page as HTML, and that
 * is escaped before it gets here.
 */
(function () {
  "use strict";

  var D = JSON.parse(document.getElementById("wc-data").textContent);
  var cfg = D.cfg;
  var S = {scheme: null, dep: 0, colouring: "comfort", metric: "comfort",
           overlays: D.overlays || {}};
  var map = null, drawn = {routes: null, scene: null, streets: null, votes: null, errors: null};
  var ui = {};
  var NARROW = 640;

  function el(tag, cls, text) {
    var e = document.createElement(tag);
    if (cls) { e.className = cls; }
    if (text !== undefined && text !== null) { e.textContent = String(text); }
    return e;
  }
  function row(table, label, value) {
    var tr = el("tr");
    tr.appendChild(el("th", null, label));
    tr.appendChild(el("td", null, value));
    table.appendChild(tr);
  }
  function num(v, d, unit) {
    if (v === null || v === undefined) { return "\u2013"; }
    return v.toFixed(d) + (unit ? "\u00a0" + unit : "");
  }
  function signed(v, d, unit) {
    if (v === null || v === undefined) { return "\u2013"; }
    return (v > 0 ? "+" : (v < 0 ? "\u2212" : "")) + Math.abs(v).toFixed(d) + (unit ? "\u00a0" + unit : "");
  }
  function pct(v) { return (v === null || v === undefined) ? "\u2013" : Math.round(100 * v) + "\u00a0%"; }
  function className(i) { return i >= 0 ? cfg.comfort[i].label : "no prediction"; }

  // ------------------------------------------------------------------ state helpers
  function routes() { return D.routes; }
  function current() {
    var r = routes();
    if (!r || !r.combos[S.scheme]) { return null; }
    return r.combos[S.scheme][S.dep] || null;
  }
  function schemeLabel(name) {
    var i;
    for (i = 0; i < D.schemes.length; i++) { if (D.schemes[i].name === name) { return D.schemes[i].label; } }
    return name;
  }
  function isBase() { return S.scheme === "base"; }
  function diffOn() { return S.colouring === "difference" && !isBase(); }

  // keys of a colouring: [{label, colour}], and the class of point i
  function routeKeys() {
    if (S.colouring === "utci") { return cfg.utci; }
    if (S.colouring === "shade") { return cfg.shade; }
    if (diffOn()) { return cfg.diff[S.metric] || []; }
    return cfg.comfort;
  }
  function routeClass(d, i) {
    if (S.colouring === "utci") { return d.band[i]; }
    if (S.colouring === "shade") { return d.sbin[i]; }
    if (diffOn()) { return d.dk[S.metric] ? d.dk[S.metric][i] : -1; }
    return d.cls[i];
  }
  function keyColour(keys, k) { return (k === null || k === undefined || k < 0 || !keys[k]) ? cfg.missing : keys[k].colour; }
  function keyLabel(keys, k) { return (k === null || k === undefined || k < 0 || !keys[k]) ? "no value" : keys[k].label; }
  function isNone(k) { return diffOn() && k === cfg.none_index; }

  // ------------------------------------------------------------------ drawing
  function lineWeight() {
    var z = map ? map.getZoom() : 17;
    return z >= 17 ? 6 : (z >= 15 ? 4 : (z >= 13 ? 2.5 : 1.5));
  }
  function haloWeight(w) { return w >= 4 ? w + 3 : w + 1.5; }
  function restyle() {
    var w = lineWeight();
    ["routes", "streets"].forEach(function (k) {
      var g = drawn[k];
      if (!g) { return; }
      g.wcLines.forEach(function (l) { l.setStyle({weight: w}); });
      g.wcHalos.forEach(function (l) { l.setStyle({weight: haloWeight(w)}); });
    });
  }

  function nearestIndex(latlng, d, idx) {
    var best = idx[0], bestD = Infinity, k, dy, dx, c = Math.cos(latlng.lat * Math.PI / 180);
    for (k = 0; k < idx.length; k++) {
      dy = d.lat[idx[k]] - latlng.lat; dx = (d.lon[idx[k]] - latlng.lng) * c;
      if (dy * dy + dx * dx < bestD) { bestD = dy * dy + dx * dx; best = idx[k]; }
    }
    return best;
  }

  function walkSummary(box, s) {
    var st = el("table"), c;
    box.appendChild(el("div", "wc-sub", "Whole walk:"));
    if (s.walk_min !== null && s.walk_min !== undefined) {
      row(st, "Duration", num(s.walk_min, 0, "min") + (s.length_m !== null ? ", " + num(s.length_m, 0, "m") : ""));
    }
    if (s.exp_min_comfortable !== null && s.exp_min_comfortable !== undefined) {
      row(st, "Expected comfortable", num(s.exp_min_comfortable, 1, "min") + " (" + pct(s.exp_share_comfortable) + ")");
    }
    if (s.shade_share !== null && s.shade_share !== undefined) { row(st, "Sun blocked", pct(s.shade_share) + " of the sunlit walk"); }
    if (s.peak_utci_c !== null && s.peak_utci_c !== undefined) { row(st, "UTCI mean / peak", num(s.mean_utci_c, 1) + " / " + num(s.peak_utci_c, 1, "\u00b0C")); }
    if (s.heat_dose_cmin !== null && s.heat_dose_cmin !== undefined) { row(st, "Heat dose", num(s.heat_dose_cmin, 0, "\u00b0C\u00b7min")); }
    if (s.delta_exp_min_comfortable !== undefined && s.delta_exp_min_comfortable !== null) {
      c = s.delta_exp_min_comfortable_lo !== undefined && s.delta_exp_min_comfortable_lo !== null ?
        " (interval " + signed(s.delta_exp_min_comfortable_lo, 1) + " to " + signed(s.delta_exp_min_comfortable_hi, 1) + ")" : "";
      row(st, "Against the base", signed(s.delta_exp_min_comfortable, 1, "min") + " comfortable" + c);
      if (s.delta_heat_dose_cmin !== undefined) { row(st, "", signed(s.delta_heat_dose_cmin, 0, "\u00b0C\u00b7min") + " heat dose"); }
      if (s.within_model_error === true) { row(st, "", "within model error"); }
    }
    box.appendChild(st);
  }

  function routePopup(d, i) {
    var box = el("div", "wc-popup"), t = el("table"), k, r, ul, parts, s, dep = routes().deps[S.dep];
    box.appendChild(el("div", "wc-title", schemeLabel(S.scheme) + " \u00b7 departing " + dep.label));
    if (d.routes.length > 1 || d.routes[0]) { row(t, "Route", d.routes[d.route[i]]); }
    row(t, "When", dep.date + ", " + d.t[i] + " (" + D.tz + ")");
    if (d.dist[i] !== null) { row(t, "Distance walked", num(d.dist[i], 0, "m")); }
    row(t, "Most likely", className(d.cls[i]));
    for (k = 0; k < cfg.comfort.length; k++) {
      if (d.p[k][i] !== null) { row(t, "\u2003chance " + cfg.comfort[k].label.toLowerCase(), pct(d.p[k][i])); }
    }
    if (d.pet) {
      row(t, "PET", num(d.pet[i], 1, "\u00b0C") + (d.band[i] >= 0 ? " (" + cfg.utci[d.band[i]].name + ")" : ""));
      row(t, "UTCI", num(d.utci[i], 1, "\u00b0C"));
    } else {
      row(t, "UTCI", num(d.utci[i], 1, "\u00b0C") + (d.band[i] >= 0 ? " (" + cfg.utci[d.band[i]].name + ")" : ""));
    }
    row(t, "Mean radiant temperature", num(d.tmrt[i], 1, "\u00b0C"));
    if (d.tair[i] !== null) { row(t, "Air temperature", num(d.tair[i], 1, "\u00b0C")); }
    row(t, "Sun blocked", pct(d.shade[i]));
    if (d.d && d.d.comfort) {
      row(t, "Against the base", signed(d.d.comfort[i], 0, "points") + " chance comfortable, " +
          signed(-d.d.utci[i], 1, "\u00b0C") + " UTCI");
    }
    box.appendChild(t);
    r = d.r[i];
    if (r !== undefined && r >= 0) {
      box.appendChild(el("div", "wc-sub", "Why, in the model's terms:"));
      ul = el("ul");
      parts = d.reasons[r].split("; ");
      for (k = 0; k < parts.length; k++) { ul.appendChild(el("li", null, parts[k])); }
      box.appendChild(ul);
    }
    s = d.summ ? d.summ[d.route[i]] : null;
    if (s) { walkSummary(box, s); }
    return box;
  }

  function runsOf(d) {
    var n = d.lat.length, runs = [], cur = null, k, key;
    for (k = 0; k + 1 < n; k++) {
      if (d.route[k + 1] !== d.route[k]) { cur = null; continue; }
      key = routeClass(d, k);
      if (cur && cur.key === key && cur.idx[cur.idx.length - 1] === k) { cur.idx.push(k + 1); }
      else { cur = {key: key, idx: [k, k + 1]}; runs.push(cur); }
    }
    for (k = 0; k < n; k++) {   // a route of a single point still shows
      if ((k === 0 || d.route[k - 1] !== d.route[k]) && (k + 1 === n || d.route[k + 1] !== d.route[k])) {
        runs.push({key: routeClass(d, k), idx: [k], single: true});
      }
    }
    return runs;
  }

  function drawRoutes() {
    var d = current(), group = L.featureGroup(), keys = routeKeys(), w = lineWeight();
    group.wcLines = []; group.wcHalos = [];
    if (!d) { return group; }
    runsOf(d).forEach(function (run) {
      var pts = run.idx.map(function (i) { return [d.lat[i], d.lon[i]]; });
      var colour = keyColour(keys, run.key), line, none = isNone(run.key);
      var cls = "wc-seg wc-seg-" + (diffOn() ? "diff" : S.colouring) + " wc-k" + run.key + (none ? " wc-none" : "");
      if (run.single) {
        line = L.circleMarker(pts[0], {radius: 6, color: cfg.halo, weight: 2, fillColor: colour, fillOpacity: 1, className: cls});
      } else {
        group.wcHalos.push(L.polyline(pts, {color: cfg.halo, weight: haloWeight(w), opacity: 0.55, interactive: false,
                                            lineCap: "round", lineJoin: "round"}).addTo(group));
        line = L.polyline(pts, {color: colour, weight: w, opacity: 1, lineCap: none ? "butt" : "round", lineJoin: "round",
                                dashArray: none ? "6 5" : null, className: cls});
        group.wcLines.push(line);
      }
      line.bindTooltip(el("span", null, keyLabel(keys, run.key)), {sticky: true});
      line.on("click", function (e) {
        var i = nearestIndex(e.latlng, d, run.idx);
        L.popup({maxWidth: 320}).setLatLng([d.lat[i], d.lon[i]]).setContent(routePopup(d, i)).openOn(map);
      });
      line.addTo(group);
    });
    return group;
  }

  function scenePopup(f) {
    var box = el("div", "wc-popup"), t = el("table");
    var edits = {existing: "as in the scene", add: "added by the scheme", modify: "changed by the scheme",
                 remove: "removed by the scheme"};
    box.appendChild(el("div", "wc-title", f.k.charAt(0).toUpperCase() + f.k.slice(1)));
    row(t, "Id", f.id || "\u2013");
    row(t, "Edit", edits[f.e] || f.e);
    if (f.h !== null) { row(t, f.k === "canopy" ? "Underside" : "Height", num(f.h, 1, "m")); }
    if (f.tr !== null) { row(t, "Light let through", pct(f.tr)); }
    box.appendChild(t);
    return box;
  }

  function drawScene() {
    var group = L.featureGroup(), feats = D.scenes[S.scheme] || D.scenes[""] || D.scenes.base || [];
    feats.forEach(function (f) {
      var edit = cfg.edits[f.e] || cfg.edits.existing, colour = cfg.scene[f.k] || cfg.missing;
      var style = {color: edit.outline, weight: edit.weight, dashArray: edit.dashArray, fillColor: colour,
                   fillOpacity: edit.fillOpacity, opacity: f.e === "remove" ? 0.7 : 1, pane: "wcScene",
                   className: "wc-scene wc-scene-" + f.e};
      var shape = f.g === "c" ? L.circle(f.c, Object.assign({radius: f.rad}, style)) : L.polygon(f.c, style);
      shape.bindPopup(scenePopup(f));
      shape.addTo(group);
    });
    return group;
  }

  function streetKeys(s) {
    if (S.colouring === "utci") { return cfg.street_utci || cfg.utci; }
    if (S.colouring === "shade") { return cfg.shade; }
    if (diffOn() && s.change) { return cfg.street_diff[S.metric] || []; }
    return cfg.street_hours;
  }
  function streetClass(s, i) {
    if (S.colouring === "utci") { return s.k.utci[i]; }
    if (S.colouring === "shade") { return s.k.shade[i]; }
    if (diffOn() && s.change) { return s.dk[S.metric][i]; }
    return s.k.comfort[i];
  }

  function streetPopup(s, i) {
    var box = el("div", "wc-popup"), t = el("table"), v = s.v, h = function (c) { return num(v[c][i], 1, "h"); };
    box.appendChild(el("div", "wc-title", s.name[i] || s.id[i]));
    box.appendChild(el("div", null, schemeLabel(s.scheme) + " \u00b7 " + D.street_times));
    row(t, "Segment", s.id[i]);
    row(t, "Hours covered", h("hours_h"));
    row(t, "Expected comfortable", h("expected_comfortable_h") + " (sum of the chance of comfortable)");
    row(t, "Comfortable most likely", h("comfortable_h"));
    row(t, "UTCI above 32 \u00b0C", h("heat_stress_h"));
    row(t, "UTCI mean / max", num(v.mean_utci_c[i], 1) + " / " + num(v.max_utci_c[i], 1, "\u00b0C"));
    row(t, "Sun blocked (mean)", pct(v.mean_shade_frac[i]));
    box.appendChild(t);
    if (s.change) {
      var ct = el("table");
      box.appendChild(el("div", "wc-sub", "Against the base:"));
      row(ct, "Expected comfortable", signed(v.d_expected_comfortable_h[i], 2, "h"));
      row(ct, "UTCI above 32 \u00b0C", signed(v.d_heat_stress_h[i], 1, "h"));
      row(ct, "Mean UTCI", signed(v.d_mean_utci_c[i], 1, "\u00b0C"));
      box.appendChild(ct);
    }
    return box;
  }

  function drawStreets() {
    var group = L.featureGroup(), s = D.streets[S.scheme] || D.streets.base, keys, w = lineWeight();
    group.wcLines = []; group.wcHalos = [];
    if (!s) { return group; }
    keys = streetKeys(s);
    s.c.forEach(function (pts, i) {
      var k = streetClass(s, i), none = diffOn() && s.change && k === cfg.none_index;
      group.wcHalos.push(L.polyline(pts, {color: cfg.halo, weight: haloWeight(w), opacity: 0.55, interactive: false,
                                          lineCap: "round", pane: "wcNetwork"}).addTo(group));
      var line = L.polyline(pts, {color: keyColour(keys, k), weight: w, opacity: 1, lineCap: none ? "butt" : "round",
                                  dashArray: none ? "6 5" : null, pane: "wcNetwork",
                                  className: "wc-street wc-street-k" + k + (none ? " wc-none" : "")});
      line.bindTooltip(el("span", null, (s.name[i] || s.id[i]) + " \u2014 " + keyLabel(keys, k)), {sticky: true});
      line.bindPopup(function () { return streetPopup(s, i); }, {maxWidth: 320});
      group.wcLines.push(line);
      line.addTo(group);
    });
    return group;
  }

  function votePopup(d, i) {
    var v = d.votes, box = el("div", "wc-popup"), t = el("table"), k;
    box.appendChild(el("div", "wc-title", "Vote \u00b7 " + d.walk));
    if (d.participant) { row(t, "Participant", d.participant); }
    row(t, "When", v.t[i] + " (" + d.tz + ")");
    row(t, "Comfort vote", v.vote[i] >= 0 ? cfg.comfort[v.vote[i]].label : "\u2013");
    if (v.tsv[i] !== null) {
      row(t, "Thermal sensation", (v.tsv[i] > 0 ? "+" : "") + v.tsv[i] + " (" + (cfg.tsv[String(v.tsv[i])] || "?") + ")");
    }
    if (v.kind[i]) { row(t, "Kind", v.kind[i]); }
    if (v.pred[i] >= 0) {
      row(t, "Model", className(v.pred[i]) + (v.pred[i] === v.vote[i] ? " (agrees)" : " (disagrees)"));
      for (k = 0; k < cfg.comfort.length; k++) {
        if (v.p[k][i] !== null) { row(t, "\u2003chance " + cfg.comfort[k].label.toLowerCase(), pct(v.p[k][i])); }
      }
    }
    if (v.utci[i] !== null) { row(t, "UTCI", num(v.utci[i], 1, "\u00b0C")); }
    box.appendChild(t);
    if (v.note[i]) {
      box.appendChild(el("div", null, "Note:"));
      box.appendChild(el("div", "wc-note", v.note[i]));
    }
    return box;
  }

  function drawVotes() {
    var group = L.featureGroup();
    D.walks.forEach(function (d) {
      var v = d.votes, i;
      if (d.track.length > 1) {
        L.polyline(d.track, {color: "#555555", weight: 3, opacity: 0.8, dashArray: "4 4", className: "wc-track",
                             pane: "wcVotes"}).bindTooltip(el("span", null, "Track \u00b7 " + d.walk), {sticky: true}).addTo(group);
      }
      for (i = 0; i < v.lat.length; i++) {
        (function (i) {
          var fill = v.vote[i] >= 0 ? cfg.comfort[v.vote[i]].colour : cfg.missing;
          var ring = v.pred[i] >= 0 ? cfg.comfort[v.pred[i]].colour : cfg.halo;
          var m = L.circleMarker([v.lat[i], v.lon[i]], {radius: 7, color: ring, weight: 3, fillColor: fill,
                                                        fillOpacity: 1, className: "wc-vote", pane: "wcVotes"});
          m.bindTooltip(el("span", null, "Vote: " + (v.vote[i] >= 0 ? cfg.comfort[v.vote[i]].label : "sensation only") +
                           (v.pred[i] >= 0 ? " \u00b7 model: " + className(v.pred[i]) : "")));
          m.bindPopup(function () { return votePopup(d, i); }, {maxWidth: 320});
          m.addTo(group);
        })(i);
      }
    });
    return group;
  }

  function drawErrors() {
    var group = L.featureGroup(), d = D.errors;
    d.cells.forEach(function (c) {
      var box = el("div", "wc-popup"), t = el("table"), stops = cfg.errors;
      var colour = stops[Math.round(Math.max(0, Math.min(1, c.rate)) * (stops.length - 1))].colour;
      box.appendChild(el("div", "wc-title", "Model vs votes (" + d.cell_m + " m cell)"));
      row(t, "Votes", String(c.n));
      row(t, "Model disagrees", c.w + " (" + pct(c.rate) + ")");
      if (c.top) { row(t, "Most common", c.top); }
      box.appendChild(t);
      L.polygon(c.c, {color: "#2b1846", weight: 1, fillColor: colour, fillOpacity: Math.min(0.85, 0.3 + 0.1 * c.n),
                      className: "wc-error-cell", pane: "wcErrors"}).bindPopup(box).addTo(group);
    });
    return group;
  }

  function sitePopup(f) {
    var box = el("div", "wc-popup"), t = el("table");
    box.appendChild(el("div", "wc-title", f.r ? "Placement site no. " + f.r : "Runner-up site"));
    row(t, "Site", f.id || "\u2013");
    row(t, "Item", f.iv || "\u2013");
    if (f.g !== null) { row(t, f.r ? "Gain when added" : "Last gain it offered", num(f.g, 2, "") + " " + f.u); }
    box.appendChild(t);
    box.appendChild(el("div", "wc-caution", "Planning aid: soil, utilities, sight lines and local codes decide."));
    return box;
  }

  function drawSites() {
    var group = L.featureGroup(), colours = cfg.sites || {};
    (D.sites || []).filter(function (f) { return !f.r; }).forEach(function (f) {
      L.circleMarker(f.c, {radius: 5, color: colours.runner_up, weight: 1, fillColor: colours.runner_up,
                           fillOpacity: 0.5, className: "wc-site wc-site-runner"}).bindPopup(sitePopup(f)).addTo(group);
    });
    (D.sites || []).filter(function (f) { return f.r; }).forEach(function (f) {
      var icon = L.divIcon({className: "wc-site-rank", html: "", iconSize: [22, 22]});
      var m = L.marker(f.c, {icon: icon, keyboard: false, title: "site " + f.r});
      m.on("add", function () {
        var node = m.getElement();
        if (node) {
          node.textContent = String(f.r);
          node.style.background = colours.chosen;
          node.style.color = colours.chosen_text;
        }
      });
      m.bindPopup(sitePopup(f)).addTo(group);
    });
    return group;
  }

  var DRAW = {routes: drawRoutes, scene: drawScene, streets: drawStreets, votes: drawVotes, errors: drawErrors,
              sites: drawSites};
  function available(kind) {
    if (kind === "routes") { return !!routes(); }
    if (kind === "scene") { return !!D.scenes; }
    if (kind === "streets") { return !!D.streets; }
    if (kind === "votes") { return D.walks && D.walks.length > 0; }
    if (kind === "sites") { return !!(D.sites && D.sites.length); }
    return !!D.errors;
  }
  function wanted(kind) { return kind === "routes" ? available(kind) : (available(kind) && !!S.overlays[kind]); }

  function redraw() {
    map.closePopup();
    Object.keys(DRAW).forEach(function (kind) {
      if (drawn[kind]) { map.removeLayer(drawn[kind]); drawn[kind] = null; }
      if (wanted(kind)) { drawn[kind] = DRAW[kind]().addTo(map); }
    });
    refreshControls();
    refreshLegend();
    refreshStatus();
  }

  // ------------------------------------------------------------------ legend
  function key(colour, text, none, dot) {
    var k = el("div", "wc-key"), s = el("span", "wc-swatch" + (dot ? " wc-dot" : "") + (none ? " wc-swatch-none" : ""));
    s.style.background = colour;
    k.appendChild(s);
    k.appendChild(el("span", null, text));
    return k;
  }
  function section(kind, title, items) {
    var s = el("div", "wc-sec");
    s.setAttribute("data-kind", kind);
    s.appendChild(el("h4", null, title));
    items.forEach(function (it) { s.appendChild(it); });
    return s;
  }
  function usedBands() {
    var d = current(), seen = {};
    if (d) { d.band.forEach(function (b) { seen[b] = true; }); }
    if (D.streets && drawn.streets && !cfg.index) {  // with PET on the routes the streets keep their own UTCI scale
      Object.keys(D.streets).forEach(function (s) { D.streets[s].k.utci.forEach(function (b) { seen[b] = true; }); });
    }
    return seen;
  }

  function routeSection() {
    var keys = routeKeys(), m = cfg.measures[S.metric], title, items, bands;
    if (diffOn()) {
      title = "Routes: " + schemeLabel(S.scheme) + " minus the base \u2014 " + m.point;
    } else if (S.colouring === "utci") { title = "Routes: " + (cfg.index ? cfg.index.scale_title : "UTCI assessment scale"); }
    else if (S.colouring === "shade") { title = "Routes: share of direct sun blocked"; }
    else { title = "Routes: most likely comfort"; }
    if (S.colouring === "utci") {
      bands = usedBands();
      items = cfg.utci.filter(function (x, i) { return bands[i]; }).map(function (x) {
        return key(x.colour, x.label + " (" + x.range + ")"); });
    } else {
      items = keys.map(function (x) { return key(x.colour, x.label, !!x.none && diffOn()); });
    }
    if (S.colouring === "difference" && isBase()) {
      items = [el("div", "wc-hint", "Pick a scheme other than the base to see its difference.")].concat(items);
    }
    return section("routes-" + (diffOn() ? "diff" : S.colouring), title, items);
  }

  function streetSection() {
    var s = D.streets[S.scheme] || D.streets.base, keys = streetKeys(s), m = cfg.measures[S.metric], title;
    if (diffOn() && s.change) { title = "Streets: change in " + m.street + " against the base"; }
    else if (S.colouring === "utci") { title = "Streets: UTCI band of the mean UTCI"; }
    else if (S.colouring === "shade") { title = "Streets: mean share of direct sun blocked"; }
    else { title = "Streets: expected comfortable hours"; }
    var used = {};
    if (S.colouring === "utci") { s.k.utci.forEach(function (b) { used[b] = true; }); }
    return section("streets", title, keys.filter(function (x, i) { return S.colouring !== "utci" || used[i]; })
      .map(function (x) { return key(x.colour, x.label + (x.range ? " (" + x.range + ")" : ""), !!x.none); })
      .concat([el("div", "wc-caution", "Covers " + D.street_times + ". " + cfg.network_note)]));
  }

  function refreshLegend() {
    var box = ui.legendBody, c = cfg;
    if (!box) { return; }
    while (box.firstChild) { box.removeChild(box.firstChild); }
    if (drawn.routes) { box.appendChild(routeSection()); }
    if (drawn.streets) { box.appendChild(streetSection()); }
    if (drawn.votes) {
      box.appendChild(section("votes", "Comfort votes", c.comfort.map(function (x) { return key(x.colour, x.label, false, true); })
        .concat([el("div", null, "fill = vote, ring = model's class")])));
    }
    if (drawn.errors) {
      box.appendChild(section("errors", c.errors_title, c.errors.map(function (x) { return key(x.colour, x.label); })
        .concat([el("div", "wc-caution", c.errors_note)])));
    }
    if (drawn.sites) {
      box.appendChild(section("sites", "Placement sites", [key(cfg.sites.chosen, "chosen, numbered in the order picked"),
        key(cfg.sites.runner_up, "runner-up"), el("div", "wc-caution", "A planning aid, not a design.")]));
    }
    if (drawn.scene) {
      box.appendChild(section("scene", "Scene", [key(c.scene.building, "building"), key(c.scene.tree, "tree crown"),
        key(c.scene.canopy, "canopy"), el("div", null, c.edit_legend)]));
    }
  }

  // ------------------------------------------------------------------ controls
  function option(select, value, text) {
    var o = el("option", null, text);
    o.value = value;
    select.appendChild(o);
    return o;
  }
  function labelled(parent, text, input) {
    var lab = el("label", "wc-field");
    lab.appendChild(el("span", "wc-field-name", text));
    lab.appendChild(input);
    parent.appendChild(lab);
    return lab;
  }

  function buildControls(body) {
    var r = routes(), g;
    ui.scheme = el("select", "wc-scheme");
    D.schemes.forEach(function (s) { option(ui.scheme, s.name, s.label); });
    ui.scheme.addEventListener("change", function () { S.scheme = ui.scheme.value; redraw(); });
    labelled(body, "Scheme", ui.scheme);
    if (r) {
      var depBox = el("div", "wc-dep");
      ui.prev = el("button", "wc-step", "\u2039");
      ui.prev.type = "button";
      ui.prev.setAttribute("aria-label", "earlier departure");
      ui.dep = el("input", "wc-dep-range");
      ui.dep.type = "range"; ui.dep.min = "0"; ui.dep.max = String(r.deps.length - 1); ui.dep.step = "1";
      ui.next = el("button", "wc-step", "\u203a");
      ui.next.type = "button";
      ui.next.setAttribute("aria-label", "later departure");
      ui.depLabel = el("output", "wc-dep-label");
      [ui.prev, ui.dep, ui.next, ui.depLabel].forEach(function (x) { depBox.appendChild(x); });
      labelled(body, "Departure", depBox);
      ui.dep.addEventListener("input", function () { S.dep = +ui.dep.value; redraw(); });
      ui.prev.addEventListener("click", function () { if (S.dep > 0) { S.dep -= 1; redraw(); } });
      ui.next.addEventListener("click", function () { if (S.dep < r.deps.length - 1) { S.dep += 1; redraw(); } });
    }
    if (r || D.streets) {
      g = el("fieldset", "wc-colourings");
      g.appendChild(el("legend", null, "Colour by"));
      ui.colourings = {};
      [["comfort", "Predicted comfort"], ["utci", cfg.index ? cfg.index.band_label : "UTCI band"], ["shade", "Shade"],
       ["difference", "Difference from base"]]
        .forEach(function (c) {
          var lab = el("label", "wc-radio"), inp = el("input");
          inp.type = "radio"; inp.name = "wc-colouring"; inp.value = c[0];
          inp.addEventListener("change", function () { if (inp.checked) { S.colouring = c[0]; redraw(); } });
          lab.appendChild(inp); lab.appendChild(el("span", null, c[1]));
          g.appendChild(lab);
          ui.colourings[c[0]] = inp;
        });
      body.appendChild(g);
      ui.metric = el("select", "wc-metric");
      ["comfort", "heat", "utci"].forEach(function (m) { option(ui.metric, m, cfg.measures[m].title); });
      ui.metric.addEventListener("change", function () { S.metric = ui.metric.value; redraw(); });
      ui.metricField = labelled(body, "Difference in", ui.metric);
    }
    g = el("fieldset", "wc-overlays");
    g.appendChild(el("legend", null, "Also show"));
    ui.overlays = {};
    [["scene", "Buildings and trees"], ["sites", "Placement sites"], ["streets", "Street network"],
     ["votes", "Recorded votes"], ["errors", "Model errors"]].forEach(function (o) {
      if (!available(o[0])) { return; }
      var lab = el("label", "wc-check"), inp = el("input");
      inp.type = "checkbox"; inp.value = o[0];
      inp.addEventListener("change", function () { S.overlays[o[0]] = inp.checked; redraw(); });
      lab.appendChild(inp); lab.appendChild(el("span", null, o[1]));
      g.appendChild(lab);
      ui.overlays[o[0]] = inp;
    });
    if (Object.keys(ui.overlays).length) { body.appendChild(g); }
  }

  function refreshControls() {
    var r = routes();
    if (ui.scheme) { ui.scheme.value = S.scheme; }
    if (r && ui.dep) {
      ui.dep.value = String(S.dep);
      ui.depLabel.textContent = r.deps[S.dep].label;
      ui.prev.disabled = S.dep <= 0;
      ui.next.disabled = S.dep >= r.deps.length - 1;
    }
    if (ui.colourings) {
      ui.colourings[S.colouring].checked = true;
      ui.metric.value = S.metric;
      ui.metricField.hidden = S.colouring !== "difference";
    }
    Object.keys(ui.overlays || {}).forEach(function (k) { ui.overlays[k].checked = !!S.overlays[k]; });
  }

  function refreshStatus() {
    var r = routes(), names = {comfort: "predicted comfort", utci: cfg.index ? cfg.index.band_label : "UTCI band",
                               shade: "shade"}, text;
    if (!ui.status) { return; }
    if (!r) {
      ui.status.textContent = "Showing: " + schemeLabel(S.scheme) + (D.streets ? " \u00b7 " + (diffOn() ?
        "difference from the base in " + cfg.measures[S.metric].short : names[S.colouring] || "the base") : "");
      return;
    }
    text = "Showing: " + schemeLabel(S.scheme) + " \u00b7 departing " + r.deps[S.dep].label + " \u00b7 ";
    text += diffOn() ? "difference from the base in " + cfg.measures[S.metric].short :
      (S.colouring === "difference" ? "the base (no difference to show)" : names[S.colouring]);
    ui.status.textContent = text;
  }

  // ------------------------------------------------------------------ panels
  function foldable(cls, heading, startFolded) {
    var box = el("section", "wc-box " + cls), head = el("button", "wc-fold"), body = el("div", "wc-body");
    head.type = "button";
    head.appendChild(el("span", "wc-fold-title", heading));
    head.appendChild(el("span", "wc-fold-mark", ""));
    head.setAttribute("aria-expanded", startFolded ? "false" : "true");
    if (startFolded) { box.classList.add("wc-folded"); }
    head.addEventListener("click", function () {
      var folded = box.classList.toggle("wc-folded");
      head.setAttribute("aria-expanded", folded ? "false" : "true");
    });
    box.appendChild(head);
    box.appendChild(body);
    L.DomEvent.disableClickPropagation(box);
    L.DomEvent.disableScrollPropagation(box);
    return {box: box, body: body};
  }

  function titleBlock(body) {
    var c = D.context || {}, t = el("table", "wc-context");
    // what is shown stays readable with the block folded (phones)
    ui.status = el("div", "wc-status");
    body.parentNode.insertBefore(ui.status, body);
    [["Site", c.site], ["Date", c.date], ["Weather", c.weather], ["Design day", c.design_day],
     ["Walker", c.walker], ["Model", c.model]].forEach(function (p) { if (p[1]) { row(t, p[0], p[1]); } });
    body.appendChild(t);
    if (c.opened) { body.appendChild(el("div", "wc-opened", c.opened)); }
    body.appendChild(el("div", "wc-caution", c.caveat));
  }

  function control(position, make) {
    var C = L.Control.extend({options: {position: position}, onAdd: make});
    return new C().addTo(map);
  }

  // a view named in the address (#scheme=..&dep=..&colouring=..&metric=..&panels=legend), e.g. for a snapshot
  function fromAddress(r) {
    var q = new URLSearchParams((window.location.hash || "").replace(/^#/, "")), dep = q.get("dep");
    if (q.get("scheme") && D.schemes.some(function (s) { return s.name === q.get("scheme"); })) { S.scheme = q.get("scheme"); }
    if (r && dep !== null && /^[0-9]+$/.test(dep) && +dep < r.deps.length) { S.dep = +dep; }
    if (["comfort", "utci", "shade", "difference"].indexOf(q.get("colouring")) >= 0) { S.colouring = q.get("colouring"); }
    if (cfg.measures[q.get("metric")] && ["comfort", "heat", "utci"].indexOf(q.get("metric")) >= 0) { S.metric = q.get("metric"); }
    if (q.get("panels") === "legend") { document.documentElement.classList.add("wc-snapshot"); }
  }

  function start() {
    var r = routes(), narrow = window.innerWidth < NARROW, b = D.bounds;
    if (r) {
      S.scheme = r.open.scheme; S.dep = r.open.dep; S.colouring = r.open.colouring; S.metric = r.open.metric;
    } else if (D.open) {
      S.scheme = D.open.scheme; S.colouring = D.open.colouring; S.metric = D.open.metric;
    } else { S.scheme = D.schemes.length ? D.schemes[0].name : ""; }
    fromAddress(r);
    map = L.map("wc-map", {zoomControl: true, preferCanvas: false, zoomSnap: 0.25});
    window.walkcomfortMap = map;
    window.walkcomfortState = S;
    map.createPane("wcScene").style.zIndex = 350;
    map.createPane("wcNetwork").style.zIndex = 360;
    map.createPane("wcErrors").style.zIndex = 380;
    map.createPane("wcVotes").style.zIndex = 450;
    L.control.scale().addTo(map);
    if (D.tiles) {
      L.tileLayer(D.tiles.url, {attribution: D.tiles.attribution, maxZoom: D.tiles.max_zoom}).addTo(map);
    }
    map.attributionControl.setPrefix("Leaflet");
    control("topleft", function () {
      var p = foldable("wc-title-box", D.title, narrow);
      ui.title = p.box; titleBlock(p.body); return p.box;
    });
    control("topright", function () {
      var p = foldable("wc-controls", "Scheme, time and colour", narrow);
      ui.controls = p.box; buildControls(p.body); return p.box;
    });
    control("bottomright", function () {
      var p = foldable("wc-legend", "Legend", narrow);
      ui.legend = p.box; ui.legendBody = p.body; return p.box;
    });
    if (b) { map.fitBounds(b, {maxZoom: 18}); } else { map.setView([0, 0], 2); }  // a view before any layer
    redraw();
    if (b) {
      // keep the data clear of the panels where the window is wide enough for both
      var snap = document.documentElement.classList.contains("wc-snapshot");
      var right = snap ? ui.legend.offsetWidth : ui.controls.offsetWidth;
      var wide = !narrow && map.getSize().x > 1.8 * (ui.title.offsetWidth + right);
      map.fitBounds(b, {paddingTopLeft: [wide ? ui.title.offsetWidth + 20 : 24, 24],
                        paddingBottomRight: [wide ? right + 20 : 24, 24], maxZoom: 18});
    } else { map.setView([0, 0], 2); }
    map.on("zoomend", restyle);
    restyle();
    // the printed map is narrower (the panels move beside it): fit the data to it again
    function refit() { map.invalidateSize(); if (b) { map.fitBounds(b, {padding: [12, 12], maxZoom: 18}); } }
    window.addEventListener("beforeprint", refit);
    if (window.matchMedia) { window.matchMedia("print").addEventListener("change", refit); }
    document.documentElement.setAttribute("data-walkcomfort-ready", "1");
  }

  if (typeof L === "undefined") {
    document.getElementById("wc-nolib").hidden = false;
    document.documentElement.setAttribute("data-walkcomfort-ready", "no-library");
    return;
  }
  start();
})();
