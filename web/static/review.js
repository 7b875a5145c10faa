// packwatch review page: the analysis of the recording being replayed
// (GET /api/review/report.json, the same JSON `packwatch report --json`
// prints), the per-second chart table (GET /api/review/series) and the
// recording's events (GET /api/replay/events). Recorded data only.
(function () {
  "use strict";
  var $ = function (id) { return document.getElementById(id); };
  var root = document.documentElement;
  var charts = { timeline: [], curve: [], ica: [] };
  var built = {};
  var report = null, series = null, events = null;

  function cssVar(n) { return getComputedStyle(root).getPropertyValue(n).trim() || "#888"; }
  var palette = ["#7cc6f0", "#f2b705", "#ff8a65", "#8fd3ff", "#ffcf70", "#b39ddb", "#80cbc4", "#e6ee9c", "#f48fb1", "#bcaaa4", "#90caf9", "#a5d6a7"];
  function color(k) { return palette[k % palette.length]; }

  function num(x, dec) { return (x === null || x === undefined || !isFinite(x)) ? "—" : Number(x).toFixed(dec); }
  function el(tag, text, cls) {
    var e = document.createElement(tag);
    if (text !== undefined && text !== null) e.textContent = text;
    if (cls) e.className = cls;
    return e;
  }
  function row(tbody, cells) {
    var tr = el("tr");
    cells.forEach(function (c) { tr.appendChild(el("td", c)); });
    tbody.appendChild(tr);
    return tr;
  }
  function getJSON(url) {
    return fetch(url, { credentials: "same-origin" }).then(function (r) {
      if (!r.ok) throw new Error(url + ": HTTP " + r.status + (r.status === 404 ? " (is packwatch running `replay FILE`?)" : ""));
      return r.json();
    });
  }
  function fail(msg) {
    var e = $("review-error");
    e.textContent = msg;
    e.hidden = false;
    root.dataset.state = "error";
  }
  function width(box) { return Math.max(320, box.clientWidth || box.parentNode.clientWidth || 800); }

  // ---- summary
  function summary(r) {
    $("review-title").textContent = "Review: " + (r.pack && r.pack.name ? r.pack.name : "recording") + (r.source ? " — " + r.source : "");
    $("sum-sub").textContent = (r.pack ? r.pack.cells + " cells, " : "") + num(r.duration_s, 0) + " s of recorded data, " + r.messages + " messages";
    var tb = $("summary");
    var rs = r.resistance || {};
    var pk = rs.pack || {};
    var lines = [
      ["Discharge capacity from full", num(r.discharge_capacity_ah, 2), "Ah", "discharge-ah"],
      ["Discharge energy", num(r.discharge_energy_wh, 0), "Wh", "discharge-wh"],
      ["Charge", num(r.charge_capacity_ah, 2), "Ah", "charge-ah"],
      ["Coulombic efficiency", num(r.coulombic_efficiency, 4), "", "ce"],
      ["Energy efficiency", num(r.energy_efficiency, 4), "", "ee"],
      ["Knee", r.knee_ah === null ? "—" : num(r.knee_ah, 1) + " Ah at " + num(r.knee_v_per_cell, 3), "V per cell", "knee"],
      ["Suggested cutoff", num(r.suggested_cutoff_v_per_cell, 3) + " V per cell (pack " + num(r.suggested_cutoff_pack_v, 2) + " V)", "", "cutoff"],
      ["Charge below the cutoff", num(r.ah_below_cutoff, 1), "Ah", "below"],
      ["Weakest cell", r.weakest_cell === null || r.weakest_cell === undefined ? "—" : "cell " + r.weakest_cell, "", "weakest"],
      ["Pack resistance, median of " + (rs.steps || 0) + " steps", num(pk.r0_mohm, 2) + " / " + num(pk.r1s_mohm, 2) + " / " + num(pk.r10s_mohm, 2), "mΩ (R0 / 1 s / 10 s)", "res-pack"],
      ["Outside the cells (interconnects)", num(rs.interconnect_r0_mohm, 2), "mΩ", "res-ic"],
    ];
    lines.forEach(function (l) {
      var tr = el("tr");
      tr.appendChild(el("th", l[0]));
      var td = el("td");
      var v = el("span", l[1], "num");
      v.id = l[3];
      td.appendChild(v);
      if (l[2]) td.appendChild(el("span", " " + l[2], "quiet"));
      tr.appendChild(td);
      tb.appendChild(tr);
    });
    if (r.cutoff_text) {
      var tr = el("tr");
      tr.appendChild(el("th", "Knee and cutoff"));
      tr.appendChild(el("td", r.cutoff_text));
      tb.appendChild(tr);
    }
    (r.warnings || []).forEach(function (w) { $("warnings").appendChild(el("li", "Note: " + w)); });
    if (r.safety) $("safety-text").textContent = r.safety;
  }

  // ---- charts
  function plot(box, title, xlabel, ylabel, data, series, opts) {
    var o = {
      title: title,
      width: width(box),
      height: 220,
      cursor: { drag: { x: true, y: false }, sync: opts && opts.sync ? { key: opts.sync } : undefined },
      scales: { x: { time: false } },
      axes: [
        { label: xlabel, stroke: cssVar("--ink-2"), grid: { stroke: cssVar("--rule") } },
        { label: ylabel, stroke: cssVar("--ink-2"), grid: { stroke: cssVar("--rule") } },
      ],
      series: [{ label: xlabel }].concat(series),
      hooks: opts && opts.hooks ? opts.hooks : {},
    };
    var div = el("div", null, "chart");
    box.appendChild(div);
    return new uPlot(o, data, div);
  }

  function timeline() {
    var box = $("timeline-charts");
    if (!series || !series.columns || series.columns.length === 0) { $("timeline-none").hidden = false; return; }
    var t = series.t_s;
    var byKey = {};
    series.columns.forEach(function (c) { byKey[c.key] = c; });
    var groups = [];
    if (byKey["pack.voltage"]) groups.push(["Pack voltage", "V", [byKey["pack.voltage"]]]);
    if (byKey["pack.current"]) groups.push(["Current (sign as the profile gives it)", "A", [byKey["pack.current"]]]);
    if (byKey["pack.soc"]) groups.push(["State of charge", "%", [byKey["pack.soc"]]]);
    if (byKey["cell.min"]) groups.push(["Lowest and highest cell", "V", [byKey["cell.min"], byKey["cell.max"]]]);
    var temps = series.columns.filter(function (c) { return c.unit === "°C"; });
    if (temps.length) groups.push(["Temperatures", "°C", temps]);
    var syncing = false;
    var hooks = {
      setScale: [function (u, key) {
        if (key !== "x" || syncing) return;
        syncing = true;
        charts.timeline.forEach(function (o) { if (o !== u) o.setScale("x", { min: u.scales.x.min, max: u.scales.x.max }); });
        syncing = false;
      }],
    };
    groups.forEach(function (g, gi) {
      var data = [t].concat(g[2].map(function (c) { return c.values; }));
      var ser = g[2].map(function (c, k) { return { label: c.label, stroke: color(gi + k * 3), width: 1.5, spanGaps: false }; });
      charts.timeline.push(plot(box, g[0], "s from the start", g[1], data, ser, { sync: "timeline", hooks: hooks }));
    });
  }

  function zoomTimeline(at) {
    if (!series || !series.t_s || !series.t_s.length) return;
    var t = series.t_s, span = Math.max(60, (t[t.length - 1] - t[0]) / 50);
    charts.timeline.forEach(function (u) { u.setScale("x", { min: at - span, max: at + span }); });
    showTab("timeline");
  }

  // an offset as the dashboard's replay panel words it, with the seconds of the charts' axis
  function when(s) {
    if (s === null || !isFinite(s)) return "—";
    if (s < 120) return num(s, 1) + " s";
    var h = Math.floor(s / 3600), m = Math.floor((s % 3600) / 60);
    return (h ? h + " h " : "") + m + " min (" + num(s, 0) + " s)";
  }

  function eventsList() {
    var ol = $("events");
    var evs = (events && events.events) || [];
    if (!evs.length) { $("events-none").hidden = false; return; }
    evs.forEach(function (e) {
      var li = el("li");
      var b = el("button", when(e.offset_s) + "  " + e.kind + ": " + e.text, "link-btn kind-" + e.kind);
      b.type = "button";
      b.addEventListener("click", function () { zoomTimeline(e.offset_s); });
      li.appendChild(b);
      ol.appendChild(li);
    });
  }

  // sorted copy of an x/y pair, for uPlot's ascending x
  function xy(xs, ys) {
    var idx = xs.map(function (_, i) { return i; }).filter(function (i) { return xs[i] !== null && isFinite(xs[i]); });
    idx.sort(function (a, b) { return xs[a] - xs[b]; });
    return [idx.map(function (i) { return xs[i]; }), idx.map(function (i) { return ys[i]; })];
  }
  function joined(box, title, xl, yl, pairs, labels) {
    if (!pairs.length) return null;
    var data = uPlot.join(pairs.map(function (p) { return xy(p[0], p[1]); }));
    var ser = labels.map(function (l, k) { return { label: l, stroke: color(k), width: 1.5, spanGaps: true }; });
    return plot(box, title, xl, yl, data, ser);
  }

  function runLabel(c) { return c.kind + " from " + num(c.from_s, 0) + " s, " + num(c.c_rate, 2) + " C"; }

  function curves() {
    var cs = report.curves || [];
    if (!cs.length) { $("curve-none").hidden = false; $("curve-cells-h").hidden = true; return; }
    var packs = cs.filter(function (c) { return c.label === "pack"; });
    var c1 = joined($("curve-pack"), "Pack voltage against charge", "Ah", "V", packs.map(function (c) { return [c.ah, c.v]; }), packs.map(runLabel));
    if (c1) charts.curve.push(c1);
    // the cells of the analysed discharge (from full), else of the first discharge
    var dis = cs.filter(function (c) { return c.kind === "discharge" && c.label !== "pack"; });
    var full = report.full_at_s;
    var from = dis.length ? dis[0].from_s : null;
    dis.forEach(function (c) { if (full !== null && Math.abs(c.from_s - full) < 1) from = c.from_s; });
    var cells = dis.filter(function (c) { return c.from_s === from; });
    if (!cells.length) { $("curve-cells-h").hidden = true; return; }
    var c2 = joined($("curve-cells"), "Cell voltage against charge, discharge from " + num(from, 0) + " s", "Ah", "V", cells.map(function (c) { return [c.ah, c.v]; }), cells.map(function (c) { return c.label; }));
    if (c2) charts.curve.push(c2);
  }

  function ica() {
    var xs = (report.ica || []).filter(function (r) { return r.v && r.v.length; });
    if (!xs.length) { $("ica-none").hidden = false; return; }
    var u = joined($("ica-chart"), "dQ/dV per cell", "V per cell", "Ah/V", xs.map(function (r) { return [r.v, r.dqdv_ah_per_v]; }), xs.map(runLabel));
    if (u) charts.ica.push(u);
    $("ica-method").textContent = xs[0].method || "";
    var tb = $("ica-peaks");
    (report.ica_peaks || []).forEach(function (p) { row(tb, [p.kind, num(p.run_from_s, 0), num(p.c_rate, 2), num(p.v, 3), num(p.height_ah_per_v, 0)]); });
  }

  function resistance() {
    var r = report;
    $("res-note").textContent = r.resistance_note || "";
    var tb = $("res-cells");
    var rs = r.resistance || {};
    (rs.cells || []).forEach(function (c) {
      var tr = row(tb, [String(c.cell), num(c.r0_mohm, 3), num(c.r1s_mohm, 3), num(c.r10s_mohm, 3), c.outlier ? "stands out" : ""]);
      if (c.outlier) tr.className = "outlier";
    });
    if (!rs.cells || !rs.cells.length) row(tb, ["—", "no step measured", "", "", ""]);
    var ps = r.pulses || [];
    var shown = Math.min(ps.length, 500);
    $("pulses-count").textContent = ps.length + " measured" + (ps.length > shown ? ", first " + shown + " listed (all in the HTML report)" : "") + "; " + ((r.pulses_rejected || []).length) + " not used";
    var tp = $("pulses");
    ps.slice(0, shown).forEach(function (p) {
      var tr = row(tp, [num(p.t_s, 1), num(p.delta_a, 1), num(p.r0_mohm, 2), num(p.r1s_mohm, 2), num(p.r10s_mohm, 2), num(p.soc_pct, 0), num(p.temp_c, 1), p.method]);
      tr.firstChild.className = "link";
      tr.firstChild.title = "show on the timeline";
      tr.firstChild.addEventListener("click", function () { zoomTimeline(p.t_s); });
    });
  }

  function bursts() {
    var bs = report.bursts || [];
    var shown = Math.min(bs.length, 500);
    $("bursts-count").textContent = bs.length ? "(" + bs.length + (bs.length > shown ? ", first " + shown + " listed" : "") + ")" : "(none)";
    var tb = $("bursts");
    bs.slice(0, shown).forEach(function (b) {
      var tr = row(tb, [num(b.t_s, 1), num(b.end_s - b.t_s, 1), num(b.peak_a, 0), num(b.ah, 2), num(b.sag_v, 2), num(b.min_cell_v, 3), b.min_cell ? String(b.min_cell) : "—", num(b.recovery_pack_v, 2)]);
      tr.firstChild.className = "link";
      tr.firstChild.title = "show on the timeline";
      tr.firstChild.addEventListener("click", function () { zoomTimeline(b.t_s); });
    });
  }

  // ---- tabs: a chart is built when its pane is first shown (uPlot needs the width)
  function showTab(name) {
    document.querySelectorAll(".review-tabs [data-tab]").forEach(function (b) {
      b.setAttribute("aria-selected", b.dataset.tab === name ? "true" : "false");
    });
    document.querySelectorAll(".review-pane").forEach(function (p) { p.hidden = p.id !== "tab-" + name; });
    if (!report || built[name]) return;
    built[name] = true;
    ({ timeline: function () { timeline(); eventsList(); }, curve: curves, ica: ica, resistance: resistance, bursts: bursts })[name]();
  }
  document.querySelectorAll(".review-tabs [data-tab]").forEach(function (b) {
    b.addEventListener("click", function () { showTab(b.dataset.tab); });
  });
  window.addEventListener("resize", function () {
    Object.keys(charts).forEach(function (k) {
      charts[k].forEach(function (u) { var w = width(u.root.parentNode.parentNode); if (w) u.setSize({ width: w, height: 220 }); });
    });
  });

  Promise.all([
    getJSON("/api/review/report.json"),
    getJSON("/api/review/series").catch(function () { return null; }),
    getJSON("/api/replay/events").catch(function () { return null; }),
  ]).then(function (res) {
    report = res[0]; series = res[1]; events = res[2];
    summary(report);
    $("review-loading").hidden = true;
    showTab("timeline");
    root.dataset.state = "ready";
  }).catch(function (e) {
    $("review-loading").hidden = true;
    fail("Could not load the analysis: " + e.message);
  });
})();
