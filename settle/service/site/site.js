/* settle site page: the drives' map, the points at or over a trigger, one point's readings, the back-analysed
 * values and the readings upload. Plain browser JavaScript, no build step; Leaflet is the only library and is
 * served from /static/vendor. Nothing here fetches from outside the site service.
 *
 * Settlement is positive downward [mm] everywhere on this page.
 *
 * Handles for tests and scripts:
 *   window.settleSite.points[id] = {status, latest_mm, date, drive, layer}   rebuilt at every drawing of the layers
 *   each point marker's SVG element carries data-point-id and data-status
 *   document.body.dataset.featuresLoaded = "true" once the layers are drawn (stays "true" while they are redrawn)
 *   document.body.dataset.layersDrawn = number of completed drawings; dataset.refitState = refit.state
 */
(function () {
  "use strict";

  var POLL_BUSY_MS = 3000;    // while a refit is queued or running
  var POLL_IDLE_MS = 60000;   // otherwise: other people post readings during the day
  var LAYER_NAMES = ["route", "buildings", "utilities", "settlement_lines", "readings"];
  var BUSY = {queued: true, running: true};
  var STATUS_RANK = {"red reached": 2, "amber reached": 1, "clear": 0};
  var FALLBACK_TRIGGER = {"clear": "#2767ad", "amber reached": "#f0a202", "red reached": "#b3124e"};

  var site = window.settleSite = {
    points: {},
    status: null,
    palette: null,
    selected: null,
    map: null,
    reload: function () { return refreshAll(); }
  };

  var groups = {};          // layer name -> L.LayerGroup currently on the map
  var faceGroup = null;
  var firstFit = true;
  var pollTimer = null;
  var lastSignature = null;  // what the drawn layers reflect, to redraw only when it changes
  var busyBefore = false;

  /* ---------- small helpers ---------- */

  function $(id) { return document.getElementById(id); }

  function el(tag, attrs, children) {
    var node = document.createElement(tag);
    if (attrs) {
      Object.keys(attrs).forEach(function (k) {
        if (k === "text") { node.textContent = attrs[k]; }
        else if (k === "class") { node.className = attrs[k]; }
        else { node.setAttribute(k, attrs[k]); }
      });
    }
    (children || []).forEach(function (c) { if (c) { node.appendChild(c); } });
    return node;
  }

  function svg(tag, attrs, text) {
    var node = document.createElementNS("http://www.w3.org/2000/svg", tag);
    Object.keys(attrs || {}).forEach(function (k) { node.setAttribute(k, attrs[k]); });
    if (text !== undefined) { node.textContent = text; }
    return node;
  }

  function getJSON(url) {
    return fetch(url, {cache: "no-store"}).then(function (r) {
      if (!r.ok) { throw new Error(url + " answered " + r.status); }
      return r.json();
    });
  }

  function num(v) { return typeof v === "number" && isFinite(v); }

  function fmt(v, digits) { return num(v) ? v.toFixed(digits) : "–"; }

  var MONTHS = ["Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec"];

  /* Dates are shown in UTC, as the readings files give them, so the office and the site read the same time. */
  function fmtDate(iso, withTime) {
    if (!iso) { return "–"; }
    var d = new Date(iso);
    if (isNaN(d.getTime())) { return String(iso); }
    var s = d.getUTCDate() + " " + MONTHS[d.getUTCMonth()] + " " + d.getUTCFullYear();
    if (withTime) {
      s += " " + String(d.getUTCHours()).padStart(2, "0") + ":" + String(d.getUTCMinutes()).padStart(2, "0") + " UTC";
    }
    return s;
  }

  function showLoadError(message) {
    var p = $("load-error");
    p.textContent = message;
    p.hidden = !message;
  }

  function triggerColour(status) {
    var t = (site.palette && site.palette.trigger) || FALLBACK_TRIGGER;
    return t[status] || "#777777";
  }

  /* ---------- header ---------- */

  function renderStatus(st) {
    site.status = st;
    document.title = (st.project || "settle") + ": site readings";
    $("project-name").textContent = st.project || "settle";
    $("readings-count").textContent = String(st.readings);
    $("last-reading").textContent = fmtDate(st.last_reading, true);
    var pts = st.points || {};
    $("point-counts").textContent = (pts["clear"] || 0) + " clear · " + (pts["amber reached"] || 0) + " amber · " +
      (pts["red reached"] || 0) + " red";
    var refit = st.refit || {state: "idle", message: ""};
    var rs = $("refit-state");
    rs.textContent = refit.state + (refit.state === "idle" && refit.message ? ": " + refit.message : "");
    rs.dataset.state = refit.state;
    document.body.dataset.refitState = refit.state;
    var note = $("refit-note");
    if (BUSY[refit.state]) {
      note.textContent = (refit.state === "queued" ? "Refit queued" : "Refit running") +
        (refit.state === "running" && refit.started_at ? " since " + fmtDate(refit.started_at, true) : "") +
        ". The map and values below are from the last completed fit and update when this one ends.";
      note.className = "refit-note busy";
      note.hidden = false;
    } else if (refit.state === "failed") {
      note.textContent = "The last refit failed" + (refit.message ? ": " + refit.message : "") +
        ". The values shown are from the last fit that completed.";
      note.className = "refit-note failed";
      note.hidden = false;
    } else {
      note.hidden = true;
    }
    $("caution").textContent = st.caution || "";
    renderFits(st);
    renderDownloads(st.downloads || {});
  }

  /* ---------- fitted values and changed forecasts ---------- */

  /* A fitted value with its 95 % interval as a table cell: the fit's own interval (Student's t with the points used,
     as the report gives it) when the server sends it, else ± 1.96 standard errors. */
  function intervalCell(value, se, ci, digits, emptyText) {
    if (!num(value)) { return el("td", {text: emptyText}); }
    var low, high;
    if (ci && num(ci[0]) && num(ci[1])) { low = ci[0]; high = ci[1]; }
    else if (num(se)) { low = value - 1.96 * se; high = value + 1.96 * se; }
    else { return el("td", null, [document.createTextNode(value.toFixed(digits)), el("span", {class: "range", text: "no standard error"})]); }
    var parts = [document.createTextNode(value.toFixed(digits)),
                 el("span", {class: "range", text: "95 %: " + low.toFixed(digits) + " to " + high.toFixed(digits)})];
    if (num(se)) { parts.push(el("span", {class: "range", text: "se " + se.toFixed(digits + 1)})); }
    return el("td", null, parts);
  }

  function renderFits(st) {
    var body = $("fits-body");
    body.textContent = "";
    (st.drives || []).forEach(function (d) {
      var vl = intervalCell(d.volume_loss_pct, d.volume_loss_pct_se, d.volume_loss_pct_ci95, 2, "not fitted yet");
      if (num(d.volume_loss_design_pct)) {  // the server may add the design value: shown for comparison
        vl.appendChild(el("span", {class: "range", text: "design " + d.volume_loss_design_pct.toFixed(2)}));
      }
      body.appendChild(el("tr", null, [
        el("th", {scope: "row"}, [document.createTextNode(d.drive),
          el("span", {class: "range", text: d.fitted_at ? "fitted " + fmtDate(d.fitted_at, true) : "no fit yet"})]),
        vl,
        intervalCell(d.trough_width_k, d.trough_width_k_se, d.trough_width_k_ci95, 2, "–")
      ]));
    });
    if (!(st.drives || []).length) {
      body.appendChild(el("tr", null, [el("td", {colspan: "3", text: "No drives."})]));
    }
    var changed = st.forecast_changed || [];
    var cbody = $("changed-body");
    cbody.textContent = "";
    changed.forEach(function (c) {
      cbody.appendChild(el("tr", null, [
        el("th", {scope: "row", text: c.asset}), el("td", {text: c.kind}),
        el("td", {text: c.design}), el("td", {text: c.forecast})
      ]));
    });
    $("changed-table").hidden = changed.length === 0;
    $("changed-empty").hidden = changed.length !== 0;
  }

  function renderDownloads(dl) {
    var any = false;
    [["geopackage", "download-gpkg"], ["report", "download-report"]].forEach(function (pair) {
      var li = $(pair[1]);
      var url = dl[pair[0]];
      li.hidden = !url;
      if (url) { li.querySelector("a").setAttribute("href", url); any = true; }
    });
    $("downloads").hidden = !any;
  }

  /* ---------- map ---------- */

  function makeMap() {
    var map = L.map("map", {zoomSnap: 0.25, minZoom: 3, maxZoom: 22, attributionControl: true});
    map.attributionControl.setPrefix(
      '<a href="https://leafletjs.com" title="A JavaScript library for interactive maps">Leaflet</a>');
    L.control.scale({metric: true, imperial: false, maxWidth: 160}).addTo(map);
    // Panes fix the drawing order whatever order the layers arrive in.
    [["buildings", 410], ["utilities", 420], ["contours", 430], ["route", 440], ["face", 450], ["points", 460]]
      .forEach(function (p) { map.createPane(p[0]).style.zIndex = p[1]; });
    map.setView([0, 0], 3);
    // The map's box changes when the legend, the refit note or the side panels change the layout; Leaflet only
    // follows window resizes by itself.
    if (window.ResizeObserver) {
      new ResizeObserver(function () { map.invalidateSize({pan: false}); }).observe($("map"));
    }
    site.map = map;
    return map;
  }

  function buildingStyle(feature) {
    var pal = site.palette;
    var cat = feature.properties.category;
    var assessed = num(cat) && cat >= 0 && cat < pal.damage.length;
    return {pane: "buildings", color: "#3c3c3c", weight: 0.8, fillOpacity: 0.85, dashArray: assessed ? null : "3 2",
            fillColor: assessed ? pal.damage[cat] : pal.not_assessed};
  }

  function utilityStyle(feature) {
    var pal = site.palette;
    var st = feature.properties.status;
    var rank = num(feature.properties.status_class) ? feature.properties.status_class : 0;
    return {pane: "utilities", color: (pal.utility_status || {})[st] || "#8c8c8c", weight: rank === 2 ? 4 : rank === 1 ? 3 : 2,
            opacity: 0.95};
  }

  function tipText(parts) { return parts.filter(function (p) { return p !== null && p !== ""; }).join("\n"); }

  function bindTip(layer, text) {
    layer.bindTooltip(el("div", {class: "tip", text: text}), {sticky: true, direction: "top"});
  }

  function drawLayers(data) {
    var pal = site.palette;
    var next = {};
    next.buildings = L.geoJSON(data.buildings, {
      style: buildingStyle, pane: "buildings",
      onEachFeature: function (f, layer) {
        var p = f.properties;
        bindTip(layer, tipText(["Building " + p.id, (p.category >= 0 ? "category " + p.category + ": " : "") + p.category_label]));
      }
    });
    next.utilities = L.geoJSON(data.utilities, {
      style: utilityStyle, pane: "utilities",
      onEachFeature: function (f, layer) { bindTip(layer, tipText(["Utility " + f.properties.id, f.properties.status])); }
    });
    next.settlement_lines = L.geoJSON(data.settlement_lines, {
      style: function () { return {pane: "contours", color: pal.contour, weight: 0.8, opacity: 0.9}; },
      onEachFeature: function (f, layer) { bindTip(layer, "settlement " + f.properties.level_mm + " mm"); }
    });
    next.route = L.geoJSON(data.route, {
      style: function () { return {pane: "route", color: pal.route, weight: 3.5, opacity: 1}; },
      onEachFeature: function (f, layer) { bindTip(layer, f.properties.name || f.properties.drive || "route"); }
    });
    var registry = {};
    var ordered = {type: "FeatureCollection", features: (data.readings.features || []).slice().sort(function (a, b) {
      return (STATUS_RANK[a.properties.trigger_status] || 0) - (STATUS_RANK[b.properties.trigger_status] || 0);
    })};  // worse points drawn last, on top of clear ones nearby
    next.readings = L.geoJSON(ordered, {
      pointToLayer: function (f, latlng) {
        var st = f.properties.trigger_status;
        var rank = STATUS_RANK[st] || 0;
        return L.circleMarker(latlng, {
          pane: "points", radius: 6 + rank, weight: rank === 2 ? 2.5 : 1.5, color: rank ? "#1a1a1a" : "#ffffff",
          fillColor: triggerColour(st), fillOpacity: 1, bubblingMouseEvents: false
        });
      },
      onEachFeature: function (f, layer) {
        var p = f.properties;
        bindTip(layer, tipText([p.point_id + " (" + p.trigger_status + ")", "latest " + fmt(p.latest_mm, 2) + " mm on " + fmtDate(p.date),
          "predicted " + fmt(p.predicted_mm, 2) + " mm, fitted " + fmt(p.fitted_mm, 2) + " mm"]));
        layer.on("click", function () { selectPoint(p.point_id); });
        registry[p.point_id] = {status: p.trigger_status, latest_mm: p.latest_mm, date: p.date, drive: p.drive,
                                predicted_mm: p.predicted_mm, fitted_mm: p.fitted_mm, layer: layer};
      }
    });
    var faces = L.layerGroup();
    ((site.status && site.status.drives) || []).forEach(function (d) {
      if (!num(d.face_lat) || !num(d.face_lon)) { return; }
      var diamond = el("span");
      diamond.style.background = pal.face;
      var icon = L.divIcon({className: "face-icon", html: diamond, iconSize: [16, 16], iconAnchor: [8, 8]});
      var m = L.marker([d.face_lat, d.face_lon], {icon: icon, pane: "face", keyboard: false,
                                                   title: "Face of " + d.drive});
      bindTip(m, tipText(["Face of " + d.drive, num(d.face_chainage_m) ? "chainage " + d.face_chainage_m.toFixed(1) + " m" : ""]));
      faces.addLayer(m);
    });

    // Swap the new layers in only when all are built, so the map never shows half a drawing.
    var map = site.map;
    LAYER_NAMES.forEach(function (n) { if (groups[n]) { map.removeLayer(groups[n]); } next[n].addTo(map); });
    if (faceGroup) { map.removeLayer(faceGroup); }
    faces.addTo(map);
    groups = next;
    faceGroup = faces;

    Object.keys(registry).forEach(function (id) {
      var node = registry[id].layer.getElement();
      if (node) {
        node.setAttribute("data-point-id", id);
        node.setAttribute("data-status", registry[id].status);
        node.setAttribute("tabindex", "0");
        node.setAttribute("role", "button");
        node.setAttribute("aria-label", "Point " + id + ", " + registry[id].status + ", latest " +
          fmt(registry[id].latest_mm, 2) + " mm");
        node.addEventListener("keydown", function (ev) {
          if (ev.key === "Enter" || ev.key === " ") { ev.preventDefault(); selectPoint(id); }
        });
      }
    });
    site.points = registry;

    if (firstFit) { fitView(); }
    renderAlerts(data.readings);
    if (site.selected && registry[site.selected]) { highlight(site.selected); loadPoint(site.selected); }
    document.body.dataset.featuresLoaded = "true";
    document.body.dataset.layersDrawn = String(Number(document.body.dataset.layersDrawn || 0) + 1);
  }

  function fitView() {
    site.map.invalidateSize({pan: false});
    var b = groups.route.getBounds();
    if (!b.isValid()) {
      b = L.latLngBounds([]);
      ["buildings", "utilities", "readings"].forEach(function (n) {
        var g = groups[n].getBounds();
        if (g.isValid()) { b.extend(g); }
      });
    }
    if (b.isValid()) {
      site.map.fitBounds(b, {padding: [30, 30], maxZoom: 19});
      firstFit = false;
    }
  }

  function renderLegend() {
    var pal = site.palette;
    var box = $("legend");
    box.textContent = "";
    function row(swatchClass, style, label) {
      var sw = el("span", {class: "sw " + swatchClass, "aria-hidden": "true"});
      Object.keys(style).forEach(function (k) { sw.style[k] = style[k]; });
      return el("li", null, [sw, el("span", {text: label})]);
    }
    function block(title, rows, cls) {
      return el("div", {class: "legend-block" + (cls ? " " + cls : "")}, [el("h3", {text: title}), el("ul", null, rows)]);
    }
    box.appendChild(block("Monitoring points", ["clear", "amber reached", "red reached"].map(function (s) {
      return row("dot", {background: triggerColour(s), borderColor: s === "clear" ? "#ffffff" : "#1a1a1a"}, s);
    })));
    var dmg = pal.damage.map(function (c, k) {
      return row("fill", {background: c}, k + " " + (pal.damage_words[k] || ""));
    });
    dmg.push(row("fill dashed", {background: pal.not_assessed}, "not assessed"));
    box.appendChild(block("Buildings: damage category", dmg, "damage"));
    box.appendChild(block("Utilities", Object.keys(pal.utility_status || {}).map(function (s) {
      return row("line", {background: pal.utility_status[s]}, s);
    })));
    box.appendChild(block("Lines", [
      row("line thick", {background: pal.route}, "route"),
      row("face", {background: pal.face}, "face of a drive"),
      row("line thin", {background: pal.contour}, "settlement contour")
    ]));
  }

  /* ---------- points at or over a trigger ---------- */

  function triggerLevelText(status) {
    var t = (site.status && site.status.trigger_levels_mm) || {};
    if (status === "red reached") { return "red " + fmt(t.red_mm, 1) + " mm"; }
    return "amber " + fmt(t.amber_mm, 1) + " mm";
  }

  function renderAlerts(readings) {
    var list = $("alerts");
    list.textContent = "";
    var over = (readings.features || []).map(function (f) { return f.properties; })
      .filter(function (p) { return STATUS_RANK[p.trigger_status] > 0; })
      .sort(function (a, b) {
        return (STATUS_RANK[b.trigger_status] - STATUS_RANK[a.trigger_status]) || ((b.latest_mm || 0) - (a.latest_mm || 0));
      });
    over.forEach(function (p) {
      var btn = el("button", {type: "button", class: "alert-item", "data-point-id": p.point_id,
                              "data-status": p.trigger_status}, [
        el("span", {class: "alert-dot", "aria-hidden": "true"}),
        el("span", {class: "alert-id", text: p.point_id}),
        el("span", {class: "alert-mm", text: fmt(p.latest_mm, 2) + " mm"}),
        el("span", {class: "alert-level", text: "≥ " + triggerLevelText(p.trigger_status)}),
        el("span", {class: "alert-date", text: fmtDate(p.date)})
      ]);
      btn.querySelector(".alert-dot").style.background = triggerColour(p.trigger_status);
      btn.setAttribute("aria-label", p.point_id + ": latest " + fmt(p.latest_mm, 2) + " mm on " + fmtDate(p.date) +
        ", at or over " + triggerLevelText(p.trigger_status));
      btn.addEventListener("click", function () { selectPoint(p.point_id, true); });
      list.appendChild(el("li", null, [btn]));
    });
    $("alerts-empty").hidden = over.length > 0;
    markSelectedInList();
  }

  function markSelectedInList() {
    Array.prototype.forEach.call(document.querySelectorAll(".alert-item"), function (b) {
      b.setAttribute("aria-pressed", String(b.dataset.pointId === site.selected));
    });
  }

  /* ---------- one point ---------- */

  function highlight(id) {
    Object.keys(site.points).forEach(function (k) {
      var node = site.points[k].layer.getElement();
      if (node) { node.classList.toggle("selected", k === id); }
    });
  }

  function selectPoint(id, pan) {
    site.selected = id;
    highlight(id);
    markSelectedInList();
    var entry = site.points[id];
    if (pan && entry && !site.map.getBounds().contains(entry.layer.getLatLng())) {
      site.map.panTo(entry.layer.getLatLng());
    }
    return loadPoint(id);
  }

  function loadPoint(id) {
    $("point-hint").hidden = true;
    $("point-detail").hidden = false;
    $("point-summary").textContent = "Loading " + id + "…";
    return getJSON("/api/points/" + encodeURIComponent(id)).then(function (pt) {
      if (site.selected !== id) { return; }
      var last = pt.readings.length ? pt.readings[pt.readings.length - 1] : null;
      var summary = $("point-summary");
      summary.textContent = "";
      summary.appendChild(el("strong", {text: pt.point_id}));
      summary.appendChild(document.createTextNode(" · " + pt.drive + " · "));
      var badge = el("span", {class: "badge", text: pt.trigger_status});
      badge.style.background = triggerColour(pt.trigger_status);
      badge.dataset.status = pt.trigger_status;
      summary.appendChild(badge);
      if (last) {
        summary.appendChild(document.createTextNode(" · latest " + fmt(last.settlement_mm, 2) + " mm on " +
          fmtDate(last.date) + (num(last.face_chainage_m) ? ", face at ch " + last.face_chainage_m.toFixed(1) + " m" : "")));
      }
      drawChart(pt);
    }).catch(function (err) {
      if (site.selected === id) { $("point-summary").textContent = "Could not load " + id + ": " + err.message; }
    });
  }

  function niceStep(span, target) {
    var raw = span / target;
    var mag = Math.pow(10, Math.floor(Math.log10(raw)));
    var r = raw / mag;
    return (r <= 1 ? 1 : r <= 2 ? 2 : r <= 2.5 ? 2.5 : r <= 5 ? 5 : 10) * mag;
  }

  /* Settlement against date. Settlement increases downward on the chart, as a trough is drawn. */
  function drawChart(pt) {
    var box = $("point-chart");
    box.textContent = "";
    var W = 400, H = 240, m = {l: 44, r: 52, t: 12, b: 28};
    var rows = pt.readings.map(function (r) {
      return {t: new Date(r.date).getTime(), s: r.settlement_mm, p: r.predicted_mm, f: r.fitted_mm, date: r.date};
    }).filter(function (r) { return isFinite(r.t); });
    var trig = (site.status && site.status.trigger_levels_mm) || {};
    var values = [0];
    rows.forEach(function (r) { [r.s, r.p, r.f].forEach(function (v) { if (num(v)) { values.push(v); } }); });
    [trig.amber_mm, trig.red_mm].forEach(function (v) { if (num(v)) { values.push(v); } });
    var lo = Math.min.apply(null, values), hi = Math.max.apply(null, values);
    var pad = Math.max((hi - lo) * 0.06, 0.2);
    lo -= pad; hi += pad;
    var t0 = rows.length ? rows[0].t : Date.now(), t1 = rows.length ? rows[rows.length - 1].t : t0;
    if (t1 - t0 < 864e5) { t0 -= 432e5; t1 += 432e5; }  // one day at least, so a single reading sits mid-chart
    var x = function (t) { return m.l + (t - t0) / (t1 - t0) * (W - m.l - m.r); };
    var y = function (s) { return m.t + (s - lo) / (hi - lo) * (H - m.t - m.b); };  // down positive

    var root = svg("svg", {viewBox: "0 0 " + W + " " + H, role: "img", class: "chart-svg",
                           "aria-label": "Settlement of " + pt.point_id + " over time: measured, predicted and fitted, " +
                             "with the amber and red trigger levels; settlement increases downward"});
    root.appendChild(svg("title", {}, "Settlement of " + pt.point_id + " [mm, positive downward]"));
    var gGrid = svg("g", {class: "grid"});
    var step = niceStep(hi - lo, 5);
    for (var v = Math.ceil(lo / step) * step; v <= hi + 1e-9; v += step) {
      var yy = y(v).toFixed(1);
      gGrid.appendChild(svg("line", {x1: m.l, x2: W - m.r, y1: yy, y2: yy, class: Math.abs(v) < 1e-9 ? "zero" : ""}));
      gGrid.appendChild(svg("text", {x: m.l - 5, y: yy, class: "ytick", dy: "0.32em"}, (Math.round(v * 100) / 100).toString()));
    }
    var dayStep = Math.max(1, Math.ceil((t1 - t0) / 864e5 / 5));
    var first = new Date(t0); first.setUTCHours(0, 0, 0, 0);
    for (var t = first.getTime(); t <= t1; t += dayStep * 864e5) {
      if (t < t0) { continue; }
      var xx = x(t).toFixed(1);
      gGrid.appendChild(svg("line", {x1: xx, x2: xx, y1: m.t, y2: H - m.b, class: "vgrid"}));
      var d = new Date(t);
      gGrid.appendChild(svg("text", {x: xx, y: H - m.b + 14, class: "xtick"}, d.getUTCDate() + " " + MONTHS[d.getUTCMonth()]));
    }
    gGrid.appendChild(svg("text", {x: 12, y: (m.t + H - m.b) / 2, class: "ylabel",
                                   transform: "rotate(-90 12 " + ((m.t + H - m.b) / 2) + ")"}, "settlement (mm), down ↓"));
    root.appendChild(gGrid);

    [["amber_mm", "amber reached", "amber"], ["red_mm", "red reached", "red"]].forEach(function (k) {
      if (!num(trig[k[0]])) { return; }
      var ty = y(trig[k[0]]).toFixed(1);
      root.appendChild(svg("line", {x1: m.l, x2: W - m.r, y1: ty, y2: ty, class: "trigger " + k[2],
                                    stroke: triggerColour(k[1])}));
      // labelled in the right margin, clear of the data
      root.appendChild(svg("text", {x: W - m.r + 4, y: ty, dy: "0.32em", class: "trigger-label"}, k[2] + " " + trig[k[0]]));
    });

    function path(key, cls) {
      var d = "", pen = false;
      rows.forEach(function (r) {
        if (!num(r[key])) { pen = false; return; }
        d += (pen ? "L" : "M") + x(r.t).toFixed(1) + " " + y(r[key]).toFixed(1);
        pen = true;
      });
      if (d) { root.appendChild(svg("path", {d: d, class: "series " + cls})); }
    }
    path("p", "predicted");
    path("f", "fitted");
    var gPts = svg("g", {class: "measured"});
    rows.forEach(function (r) {
      if (!num(r.s)) { return; }
      var c = svg("circle", {cx: x(r.t).toFixed(1), cy: y(r.s).toFixed(1), r: 3.2});
      c.appendChild(svg("title", {}, fmtDate(r.date, true) + ": measured " + r.s.toFixed(2) + " mm, predicted " +
        fmt(r.p, 2) + " mm, fitted " + fmt(r.f, 2) + " mm"));
      gPts.appendChild(c);
    });
    root.appendChild(gPts);
    box.appendChild(root);

    // The same numbers as a table, for screen readers and for copying.
    var table = el("table", {class: "readings-table"}, [
      el("thead", null, [el("tr", null, ["Date", "Measured (mm)", "Predicted (mm)", "Fitted (mm)", "Face ch (m)"]
        .map(function (h) { return el("th", {scope: "col", text: h}); }))]),
      el("tbody", null, pt.readings.slice().reverse().map(function (r) {
        return el("tr", null, [el("td", {text: fmtDate(r.date, true)}), el("td", {text: fmt(r.settlement_mm, 2)}),
          el("td", {text: fmt(r.predicted_mm, 2)}), el("td", {text: fmt(r.fitted_mm, 2)}), el("td", {text: fmt(r.face_chainage_m, 1)})]);
      }))
    ]);
    box.appendChild(el("details", {class: "readings-details"}, [el("summary", {text: "Readings as a table (" + pt.readings.length + ")"}), table]));
  }

  /* ---------- loading and polling ---------- */

  function signature(st) {
    return JSON.stringify([st.readings, st.last_reading, (st.refit || {}).finished_at,
      (st.drives || []).map(function (d) { return [d.fitted_at, d.face_chainage_m]; })]);
  }

  function loadLayers() {
    return Promise.all(LAYER_NAMES.map(function (n) { return getJSON("/api/layers/" + n + ".geojson"); }))
      .then(function (res) {
        var data = {};
        LAYER_NAMES.forEach(function (n, i) { data[n] = res[i]; });
        drawLayers(data);
      });
  }

  function refreshAll() {
    return getJSON("/api/status").then(function (st) {
      renderStatus(st);
      lastSignature = signature(st);
      busyBefore = !!BUSY[(st.refit || {}).state];
      return loadLayers();
    }).then(function () { showLoadError(""); schedulePoll(); })
      .catch(function (err) { showLoadError("Could not load the site data: " + err.message); schedulePoll(); });
  }

  function schedulePoll() {
    if (pollTimer) { clearTimeout(pollTimer); }
    var busy = site.status && BUSY[(site.status.refit || {}).state];
    pollTimer = setTimeout(poll, busy ? POLL_BUSY_MS : POLL_IDLE_MS);
  }

  /* While a refit is queued or running the status is asked every few seconds; when it ends (or anything else
   * changed: readings posted from elsewhere) the layers are drawn again. */
  function poll() {
    pollTimer = null;
    getJSON("/api/status").then(function (st) {
      renderStatus(st);
      var busy = !!BUSY[(st.refit || {}).state];
      var sig = signature(st);
      var redraw = (busyBefore && !busy) || (!busy && sig !== lastSignature);
      busyBefore = busy;
      if (redraw) {
        lastSignature = sig;
        return loadLayers();
      }
    }).then(function () { showLoadError(""); })
      .catch(function (err) { showLoadError("Could not refresh the site data: " + err.message); })
      .then(schedulePoll);
  }

  /* ---------- upload ---------- */

  function showUploadResult(kind, nodes) {
    var box = $("upload-result");
    box.textContent = "";
    box.className = "upload-result " + kind;
    box.dataset.outcome = kind;
    nodes.forEach(function (n) { box.appendChild(n); });
  }

  function onUpload(ev) {
    ev.preventDefault();
    var token = $("token").value.trim();
    var file = $("readings-file").files[0];
    if (!token) { showUploadResult("error", [el("p", {text: "Enter the site token."})]); $("token").focus(); return; }
    if (!file) { showUploadResult("error", [el("p", {text: "Choose a readings file (CSV)."})]); return; }
    var button = $("upload-button");
    button.disabled = true;
    showUploadResult("pending", [el("p", {text: "Posting " + file.name + "…"})]);
    file.text().then(function (text) {
      return fetch("/api/readings", {method: "POST", body: text,
                                     headers: {"Content-Type": "text/csv", "Authorization": "Bearer " + token}});
    }).then(function (resp) {
      return resp.json().catch(function () { return {error: "the service answered " + resp.status + " without JSON"}; })
        .then(function (body) { return {status: resp.status, body: body}; });
    }).then(function (r) {
      if (r.status === 201) {
        var b = r.body;
        var nodes = [el("p", {text: "Batch " + b.batch + ": kept " + b.kept + " reading" + (b.kept === 1 ? "" : "s") +
          (b.left_out && b.left_out.length ? ", left out " + b.left_out.length + "." : ".")})];
        if (b.left_out && b.left_out.length) {
          nodes.push(el("ul", {class: "left-out"}, b.left_out.map(function (l) {
            return el("li", {text: "line " + l.line + ": " + l.reason});
          })));
        }
        showUploadResult("ok", nodes);
        $("readings-file").value = "";
        return refreshAll();
      }
      var msg = (r.body && r.body.error) || ("the service answered " + r.status);
      var prefix = r.status === 401 ? "Not accepted (token): " : r.status === 413 ? "File too large: " :
        r.status === 422 ? "The file was not accepted: " : "Error " + r.status + ": ";
      var nodes2 = [el("p", {text: prefix + msg})];
      if (r.body && r.body.lines && r.body.lines.length) {
        nodes2.push(el("ul", {class: "left-out"}, r.body.lines.map(function (l) { return el("li", {text: l}); })));
      }
      showUploadResult("error", nodes2);
    }).catch(function (err) {
      showUploadResult("error", [el("p", {text: "Could not post the file: " + err.message})]);
    }).then(function () { button.disabled = false; });
  }

  /* ---------- start ---------- */

  function start() {
    document.body.dataset.featuresLoaded = "false";
    $("upload-form").addEventListener("submit", onUpload);
    makeMap();
    getJSON("/api/palette").then(function (pal) {
      site.palette = pal;
      renderLegend();
      return refreshAll();
    }).catch(function (err) { showLoadError("Could not load the site data: " + err.message); });
  }

  if (document.readyState === "loading") { document.addEventListener("DOMContentLoaded", start); } else { start(); }
})();
