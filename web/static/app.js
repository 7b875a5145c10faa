// packwatch dashboard. Plain script, no build step. It receives typed
// messages on /ws (hello, history, snapshot, bus), keeps the latest
// snapshot and renders it; it never writes to a bus. Alarm acknowledgement
// and replay control are same-origin POSTs.
"use strict";
(function () {
  var root = document.documentElement;
  var $ = function (id) { return document.getElementById(id); };

  var STALE_MS = 2000; // no snapshot for this long: NOT LIVE
  var state = {
    snap: null, // latest snapshot
    lastAt: 0, // performance.now() when it arrived
    everLive: false,
    hello: null,
    packIdx: 0,
    hist: {}, // pack id -> {t, v, i, cmin, cmax, tmax}
    windowS: 600,
    ws: null,
    retry: 0,
    busOpen: false,
    lastMain: {}, // pack id -> previous main contactor reading
    lastPreRatio: {}, // pack id -> last load/pack ratio seen with main open
    preWarn: {}, // pack id -> warning text
    cellKey: "",
    charts: null,
    chartKey: "",
  };

  // ---------- formatting ----------
  function isNum(x) { return typeof x === "number" && isFinite(x); }
  function fmt(x, d, unit) {
    if (!isNum(x)) return "--";
    return x.toFixed(d) + (unit ? "\u2009" + unit : "");
  }
  function signed(x, d, unit) {
    if (!isNum(x)) return "--";
    return (x > 0 ? "+" : x < 0 ? "\u2212" : "") + Math.abs(x).toFixed(d) + (unit ? "\u2009" + unit : "");
  }
  function dur(s) {
    if (!isNum(s)) return "";
    s = Math.max(0, Math.round(s));
    if (s < 90) return s + " s";
    var m = Math.round(s / 60);
    if (m < 90) return m + " min";
    var h = Math.floor(m / 60);
    return h + " h " + (m % 60) + " min";
  }
  function clock(t) {
    if (!isNum(t)) return "--";
    var d = new Date(t * 1000);
    var p = function (n) { return (n < 10 ? "0" : "") + n; };
    return p(d.getHours()) + ":" + p(d.getMinutes()) + ":" + p(d.getSeconds());
  }
  function unitDigits(unit) {
    if (unit === "V") return 2;
    if (unit === "A" || unit === "\u00b0C" || unit === "%") return 1;
    return 2;
  }
  function el(tag, cls, text) {
    var e = document.createElement(tag);
    if (cls) e.className = cls;
    if (text !== undefined) e.textContent = text;
    return e;
  }
  function setText(id, t) { var e = $(id); if (e && e.textContent !== t) e.textContent = t; }
  var STATE_WORD = { ok: "\u2713 ok", warn: "! warn", trip: "\u2716 TRIP", fault: "\u2716 fault", stale: "stale", missing: "no data", nodata: "no data", invalid: "invalid" };
  var RANK = { ok: 0, nodata: 1, stale: 1, missing: 1, warn: 2, fault: 3, trip: 3 };

  // ---------- websocket ----------
  function connect() {
    var proto = location.protocol === "https:" ? "wss://" : "ws://";
    var ws = new WebSocket(proto + location.host + "/ws");
    state.ws = ws;
    ws.onopen = function () { state.retry = 0; if (state.busOpen) subscribeBus(true); };
    ws.onmessage = function (ev) {
      var m;
      try { m = JSON.parse(ev.data); } catch (e) { return; }
      if (m.type === "snapshot") onSnapshot(m.data);
      else if (m.type === "history") onHistory(m.data);
      else if (m.type === "hello") onHello(m.data);
      else if (m.type === "bus") renderBus(m.data);
    };
    ws.onclose = function () {
      state.ws = null;
      var wait = Math.min(10000, 500 * Math.pow(2, state.retry++));
      setTimeout(connect, wait);
    };
  }
  function subscribeBus(on) {
    if (state.ws && state.ws.readyState === 1) state.ws.send(JSON.stringify({ type: "subscribe", bus: on }));
  }
  function onHello(h) {
    state.hello = h;
    if (h.mode) root.setAttribute("data-mode", h.mode);
    $("replay").hidden = !h.replay;
    $("bus").hidden = !h.bus;
    if (h.replay && !state.replayEvents) loadReplayEvents();
  }

  // the recording's events as a timeline: a button each, which seeks there
  function loadReplayEvents() {
    state.replayEvents = true;
    fetch("/api/replay/events", { credentials: "same-origin" }).then(function (r) {
      return r.ok ? r.json() : null;
    }).then(function (d) {
      if (!d || !d.events || !d.events.length) return;
      var list = $("replay-events");
      list.textContent = "";
      d.events.forEach(function (e) {
        var li = el("li", "rev rev-" + e.kind);
        var b = el("button", "btn rev-go", dur(e.offset_s) || "0 s");
        b.type = "button";
        b.setAttribute("data-offset", String(e.offset_s));
        b.addEventListener("click", function () {
          $("replay-seek").value = Math.floor(e.offset_s);
          fetch("/api/replay/seek?offset_s=" + encodeURIComponent(e.offset_s), { method: "POST", credentials: "same-origin" });
        });
        li.appendChild(b);
        li.appendChild(el("span", "rev-kind", e.kind));
        li.appendChild(el("span", "rev-text", e.text));
        list.appendChild(li);
      });
      $("replay-events-h").hidden = false;
    }).catch(function () { state.replayEvents = false; });
  }

  // ---------- history and charts ----------
  function onHistory(h) {
    state.windowS = h.window_s || 600;
    state.hist = {};
    (h.packs || []).forEach(function (p) {
      state.hist[p.id] = {
        t: p.t.slice(), v: p.voltage_v.slice(), i: p.current_a.slice(),
        cmin: p.cell_min_v.slice(), cmax: p.cell_max_v.slice(), tmax: p.temp_max_c.slice(),
      };
    });
    state.chartKey = ""; // redraw from the fresh history
  }
  function pushHistory(s) {
    var t = s.data_t;
    if (!isNum(t)) return;
    s.packs.forEach(function (p) {
      var h = state.hist[p.id];
      if (!h) h = state.hist[p.id] = { t: [], v: [], i: [], cmin: [], cmax: [], tmax: [] };
      var n = h.t.length;
      if (n && t < h.t[n - 1]) { // data time went back (seek): start afresh
        h.t.length = h.v.length = h.i.length = h.cmin.length = h.cmax.length = h.tmax.length = 0;
      } else if (n && t === h.t[n - 1]) {
        return; // paused: nothing new
      }
      h.t.push(t); h.v.push(nz(p.voltage_v)); h.i.push(nz(p.current_a));
      h.cmin.push(nz(p.cell_stats.min_v)); h.cmax.push(nz(p.cell_stats.max_v)); h.tmax.push(nz(p.temp_stats.max_c));
      var cut = 0;
      while (cut < h.t.length && h.t[cut] < t - state.windowS) cut++;
      if (cut > 50) ["t", "v", "i", "cmin", "cmax", "tmax"].forEach(function (k) { h[k].splice(0, cut); });
    });
  }
  function nz(x) { return isNum(x) ? x : null; }
  function cssVar(name) { return getComputedStyle(root).getPropertyValue(name).trim(); }
  function makeCharts() {
    if (typeof uPlot === "undefined") return null;
    var axis = cssVar("--ink-2"), grid = cssVar("--rule");
    var mk = function (id, series) {
      var box = $(id);
      box.textContent = "";
      var w = Math.max(200, box.clientWidth);
      var opts = {
        width: w, height: 150, legend: { show: false }, cursor: { show: false },
        scales: { x: { time: true } },
        axes: [
          { stroke: axis, grid: { stroke: grid, width: 1 }, ticks: { stroke: grid } },
          { stroke: axis, grid: { stroke: grid, width: 1 }, ticks: { stroke: grid }, size: 56 },
        ],
        series: [{}].concat(series),
      };
      var u = new uPlot(opts, [[], []].concat(series.slice(1).map(function () { return []; })), box);
      return u;
    };
    var c = {
      v: mk("chart-v", [{ stroke: cssVar("--line-1"), width: 2 }]),
      i: mk("chart-i", [{ stroke: cssVar("--line-2"), width: 2 }]),
      c: mk("chart-c", [{ stroke: cssVar("--line-min"), width: 2 }, { stroke: cssVar("--line-max"), width: 2, dash: [6, 3] }]),
      t: mk("chart-t", [{ stroke: cssVar("--line-3"), width: 2 }]),
    };
    return c;
  }
  function drawCharts(p) {
    var key = p.id + "|" + root.getAttribute("data-theme");
    if (!state.charts || state.chartKey !== key) {
      if (state.charts) Object.keys(state.charts).forEach(function (k) { state.charts[k] && state.charts[k].destroy(); });
      state.charts = makeCharts();
      state.chartKey = key;
      state.chartAt = 0; // draw the new charts at once
    }
    var h = state.hist[p.id];
    if (!state.charts || !h) return;
    // Charts redraw at most twice a second: ten full redraws a second of
    // thousands of points would cost a phone more than the rest of the page.
    var now = performance.now();
    if (state.chartAt && now - state.chartAt < 500 && state.chartDrawnKey === key) return;
    state.chartAt = now;
    state.chartDrawnKey = key;
    state.charts.v.setData([h.t, h.v]);
    state.charts.i.setData([h.t, h.i]);
    state.charts.c.setData([h.t, h.cmin, h.cmax]);
    state.charts.t.setData([h.t, h.tmax]);
  }
  var resizeTimer = 0;
  window.addEventListener("resize", function () {
    clearTimeout(resizeTimer);
    resizeTimer = setTimeout(function () { state.chartKey = ""; if (state.snap) render(); }, 200);
  });

  // ---------- snapshot ----------
  // normalize fills the lists and objects a snapshot may carry as null
  // (Go marshals an empty slice as null), so the renderers need no checks.
  function normalize(s) {
    s.packs = s.packs || [];
    s.packs.forEach(function (p) {
      ["cells", "temps", "margins", "alarms", "values", "sources"].forEach(function (k) { p[k] = p[k] || []; });
      ["cell_stats", "temp_stats", "soc", "limits", "decode"].forEach(function (k) { p[k] = p[k] || {}; });
    });
    return s;
  }

  function onSnapshot(s) {
    state.snap = normalize(s);
    state.lastAt = performance.now();
    state.everLive = true;
    pushHistory(s);
    render();
    liveness();
  }

  function render() {
    var s = state.snap;
    if (!s) return;
    root.setAttribute("data-mode", s.mode || "live");
    var mode = s.mode || "live";
    var m = $("mode");
    m.hidden = mode === "live";
    m.textContent = mode === "replay" ? "REPLAY: RECORDED DATA" : mode === "simulated" ? "SIMULATED DATA" : "";
    if (state.packIdx >= s.packs.length) state.packIdx = 0;
    renderRecording(s.recording);
    renderPackTabs(s);
    var p = s.packs[state.packIdx];
    if (p) {
      renderCells(p);
      renderSOC(p);
      renderMargins(p);
      renderPrecharge(p);
      renderTemps(p);
      renderValues(p);
      renderSources(p);
      renderAlarms(s);
      drawCharts(p);
      setText("c-v", fmt(p.voltage_v, 1, "V"));
      setText("c-i", fmt(p.current_a, 1, "A"));
      setText("c-c", fmt(p.cell_stats.min_v, 3) + " / " + fmt(p.cell_stats.max_v, 3, "V"));
      setText("c-t", fmt(p.temp_stats.max_c, 1, "\u00b0C"));
      var pe = $("profile-error");
      pe.hidden = !p.profile_error;
      if (p.profile_error) pe.textContent = "Profile reload failed, still using the previous one: " + p.profile_error;
    }
    updateTitle();
    // data-seq last: tests read it once the page shows that snapshot.
    root.setAttribute("data-seq", String(s.seq));
    setText("seq", String(s.seq));
  }

  function worst(s) {
    var w = "ok";
    s.packs.forEach(function (p) {
      var st = p.state || "nodata";
      if ((RANK[st] || 0) > (RANK[w] || 0)) w = st;
    });
    return w;
  }

  // the session's recording: a small mark while it records, a loud banner
  // when it stopped (disk full, unwritable) while the live view goes on
  function renderRecording(r) {
    var b = $("rec-banner");
    if (!b) {
      b = el("p", "rec-banner");
      b.id = "rec-banner";
      b.setAttribute("role", "status");
      var caution = document.querySelector(".caution");
      caution.parentNode.insertBefore(b, caution.nextSibling);
    }
    b.hidden = !r;
    if (!r) return;
    var stopped = r.state !== "recording";
    b.className = "rec-banner" + (stopped ? " rec-stopped" : "");
    b.textContent = stopped
      ? "\u2716 RECORDING STOPPED: " + (r.error || "unknown reason") + ". The live view goes on; " + r.messages + " messages were saved in " + r.file + "."
      : "\u25cf REC " + r.file + " \u00b7 " + r.messages + " messages saved" + (r.dropped ? " \u00b7 " + r.dropped + " dropped" : "");
  }

  function renderPackTabs(s) {
    var nav = $("packs");
    var key = s.packs.map(function (p) { return p.id; }).join("|");
    if (nav.getAttribute("data-key") !== key) {
      nav.textContent = "";
      s.packs.forEach(function (p, i) {
        var b = el("button", "btn packtab");
        b.type = "button";
        b.appendChild(el("span", "pt-name"));
        b.appendChild(el("span", "pt-detail"));
        b.addEventListener("click", function () { state.packIdx = i; state.cellKey = ""; state.chartKey = ""; render(); });
        nav.appendChild(b);
      });
      nav.setAttribute("data-key", key);
    }
    var many = s.packs.length > 1;
    s.packs.forEach(function (p, i) {
      var b = nav.children[i];
      b.children[0].textContent = (p.name || p.id) + " \u00b7 " + (STATE_WORD[p.state] || p.state);
      // with several packs each tab is an overview tile: state of charge and
      // the nearest trip (margins come nearest first)
      var d = "";
      if (many) {
        var m = (p.margins || []).filter(function (x) { return isNum(x.margin); })[0];
        d = "SOC " + fmt(p.soc && p.soc.pct, 0, "%") + (m ? " \u00b7 nearest: " + m.label + (m.subject ? " (" + m.subject + ")" : "") + " " + fmt(m.margin, m.unit === "V" ? 3 : 1, m.unit) : "");
      }
      b.children[1].textContent = d;
      b.children[1].hidden = !many;
      b.className = "btn packtab st-" + p.state + (i === state.packIdx ? " sel" : "");
      b.setAttribute("aria-pressed", i === state.packIdx ? "true" : "false");
    });
  }

  // ---------- cells ----------
  function renderCells(p) {
    var L = p.limits, lo = L.cell_low_v, hi = L.cell_high_v, warn = L.warn_cell_v || 0;
    if (!(isNum(lo) && isNum(hi) && hi > lo)) { // no usable limits: scale to the cells seen
      lo = isNum(p.cell_stats.min_v) ? p.cell_stats.min_v - 0.1 : 0;
      hi = isNum(p.cell_stats.max_v) ? p.cell_stats.max_v + 0.1 : 5;
      warn = 0;
    }
    var span = hi - lo;
    var pos = function (v) { return Math.max(0, Math.min(100, (v - lo) / span * 100)); };
    var box = $("cell-bars");
    box.className = "cellbars" + (p.cells.length <= 16 ? " few" : p.cells.length > 120 ? " many" : "");
    var key = p.id + ":" + p.cells.length + ":" + lo + ":" + hi + ":" + warn;
    if (state.cellKey !== key) {
      box.textContent = "";
      p.cells.forEach(function (c) {
        var row = el("div", "cell");
        row.setAttribute("data-n", c.n);
        row.appendChild(el("span", "cn", String(c.n)));
        var tr = el("span", "track");
        var blo = el("span", "band band-lo"), bhi = el("span", "band band-hi");
        blo.style.width = pos(lo + warn) + "%";
        bhi.style.left = pos(hi - warn) + "%";
        bhi.style.right = "0";
        tr.appendChild(blo); tr.appendChild(bhi);
        tr.appendChild(el("span", "fill"));
        tr.appendChild(el("span", "avg"));
        row.appendChild(tr);
        row.appendChild(el("span", "cv"));
        row.appendChild(el("span", "tag"));
        box.appendChild(row);
      });
      state.cellKey = key;
    }
    renderScale(box, lo, hi, warn);
    var st = p.cell_stats;
    var avgPos = isNum(st.avg_v) ? pos(st.avg_v) + "%" : "";
    var rows = box.children;
    p.cells.forEach(function (c, i) {
      var row = rows[i];
      if (!row) return;
      var cs = c.state || "missing";
      var spread = p.cell_stats.min_cell !== p.cell_stats.max_cell;
      var isMin = c.is_min && spread, isMax = c.is_max && spread;
      var cls = "cell st-" + cs + (isMin ? " is-min" : "") + (isMax ? " is-max" : "") + (c.balancing ? " bal" : "");
      if (row.className !== cls) row.className = cls;
      var tr = row.children[1];
      var fill = tr.children[2], avg = tr.children[3];
      fill.style.width = isNum(c.v) ? pos(c.v) + "%" : "0";
      avg.style.left = avgPos;
      avg.hidden = !avgPos;
      row.children[2].textContent = isNum(c.v) ? c.v.toFixed(3) : "--";
      // Short text cues beside the colour: state word, then min/max arrow.
      var tag = [];
      if (cs === "warn") tag.push("!warn");
      if (cs === "trip") tag.push("\u2716TRIP");
      if (cs === "fault") tag.push("\u2716fault");
      if (cs === "stale") tag.push("stale " + dur(c.age_s));
      if (cs === "missing") tag.push("no data");
      var plain = tag.length === 0;
      if (isMax) tag.push(plain ? "\u25b2max" : "\u25b2");
      if (isMin) tag.push(plain ? "\u25bcmin" : "\u25bc");
      if (c.balancing) tag.push("\u21c4");
      row.children[3].textContent = tag.join(" ");
    });
    setText("cell-reporting", st.reporting + " of " + p.cells.length + " reporting");
    var dl = $("cell-stats");
    var items = [
      ["Min", fmt(st.min_v, 3, "V") + (st.min_cell ? " #" + st.min_cell : "")],
      ["Max", fmt(st.max_v, 3, "V") + (st.max_cell ? " #" + st.max_cell : "")],
      ["Average", fmt(st.avg_v, 3, "V")],
      ["Spread", isNum(st.spread_v) ? (st.spread_v * 1000).toFixed(0) + "\u2009mV" : "--"],
      ["Deviation", isNum(st.deviation_v) ? (st.deviation_v * 1000).toFixed(0) + "\u2009mV" + (st.deviation_cell ? " #" + st.deviation_cell : "") : "--"],
    ];
    if (dl.children.length !== items.length) {
      dl.textContent = "";
      items.forEach(function () { var d = el("div"); d.appendChild(el("dt")); d.appendChild(el("dd")); dl.appendChild(d); });
    }
    items.forEach(function (it, i) { dl.children[i].children[0].textContent = it[0]; dl.children[i].children[1].textContent = it[1]; });
  }

  // renderScale draws the limit scale above each column of bars.
  function renderScale(box, lo, hi, warn) {
    var tmpl = getComputedStyle(box).gridTemplateColumns;
    var cols = tmpl.split(" ").filter(Boolean).length || 1;
    var sc = $("cell-scale");
    if (sc.style.gridTemplateColumns !== tmpl) sc.style.gridTemplateColumns = tmpl; // same columns as the bars
    var key = cols + ":" + lo + ":" + hi + ":" + warn;
    if (sc.getAttribute("data-key") === key) return;
    sc.textContent = "";
    for (var i = 0; i < cols; i++) {
      var col = el("div", "scale-col");
      col.appendChild(el("span"));
      var t = el("span", "scale-track");
      t.appendChild(el("span", "tick t-lo", "\u2716 " + lo.toFixed(2) + "\u2009V"));
      t.appendChild(el("span", "tick t-hi", hi.toFixed(2) + "\u2009V \u2716"));
      col.appendChild(t);
      sc.appendChild(col);
    }
    sc.setAttribute("data-key", key);
  }

  // ---------- state of charge ----------
  var SOC_SRC = { bms: "reported by the BMS", counted: "counted by packwatch", uncertain: "counted, uncertain (gap or unknown start)", none: "not known" };
  function renderSOC(p) {
    var soc = p.soc;
    setText("soc-pct", isNum(soc.pct) ? soc.pct.toFixed(1) + "\u2009%" : "--\u2009%");
    setText("soc-src", "State of charge " + (SOC_SRC[soc.source] || soc.source || ""));
    var f = $("soc-fill");
    f.style.height = (isNum(soc.pct) ? Math.max(0, Math.min(100, soc.pct)) : 0) + "%";
    f.className = "gauge-fill src-" + (soc.source || "none");
    var word = p.current_word, I = p.current_a, flow;
    if (word === "charging") flow = "Charging " + fmt(Math.abs(I), 1, "A");
    else if (word === "discharging") flow = "Discharging " + fmt(Math.abs(I), 1, "A");
    else if (word === "rest") flow = "At rest" + (isNum(I) ? " (" + fmt(I, 1, "A") + ")" : "");
    else flow = "Current unknown";
    var fe = $("flow");
    fe.textContent = flow;
    fe.className = "flow w-" + (word || "none");
    setText("power", isNum(p.power_w) ? "Power " + signed(p.power_w / 1000, 2, "kW") + (p.power_w > 0 ? " in" : p.power_w < 0 ? " out" : "") : "Power --");
    var eta = "";
    if (word === "charging" && isNum(soc.time_to_full_s)) eta = "Full in " + dur(soc.time_to_full_s);
    else if (word === "discharging" && isNum(soc.time_to_empty_s)) eta = "Empty in " + dur(soc.time_to_empty_s);
    setText("eta", eta);
    setText("pack-v", fmt(p.voltage_v, 2, "V") + (p.voltage_source === "sum" ? " (sum of cells)" : ""));
    setText("ah", fmt(soc.ah_in, 2, "Ah") + " in / " + fmt(soc.ah_out, 2, "Ah") + " out");
    setText("wh", fmt(soc.wh_in / 1000, 3, "kWh") + " in / " + fmt(soc.wh_out / 1000, 3, "kWh") + " out");
    // Charger's own readings beside the pack's.
    var cv = val(p, "charger.voltage"), ci = val(p, "charger.current");
    var ch = $("charger");
    ch.hidden = !cv && !ci;
    if (!ch.hidden) {
      var rows = [];
      if (cv) rows.push(["Voltage", cv.value, p.voltage_v, "V", 2, cv]);
      if (ci) rows.push(["Current", ci.value, p.current_a, "A", 1, ci]);
      var tb = $("charger-rows");
      tb.textContent = "";
      rows.forEach(function (r) {
        var tr = el("tr");
        tr.appendChild(el("th", "", r[0]));
        tr.appendChild(el("td", "", fmt(r[1], r[4], r[3]) + staleNote(r[5])));
        if (r[5].state && r[5].state !== "ok") tr.className = "st-stale";
        tr.appendChild(el("td", "", fmt(r[2], r[4], r[3])));
        tr.appendChild(el("td", "", isNum(r[1]) && isNum(r[2]) ? signed(r[1] - r[2], r[4], r[3]) : "--"));
        tb.appendChild(tr);
      });
    }
  }
  // staleNote is " (stale 12 s)" for a value that is not fresh, else "".
  function staleNote(v) {
    if (!v || !v.state || v.state === "ok") return "";
    return " (" + (v.state === "stale" ? "stale " + dur(v.age_s) : STATE_WORD[v.state] || v.state) + ")";
  }
  function val(p, bind) {
    var vs = p.values || [];
    for (var i = 0; i < vs.length; i++) if (vs[i].bind === bind) return vs[i];
    return null;
  }

  // ---------- trip margins ----------
  function renderMargins(p) {
    var tb = $("margin-rows");
    var ms = p.margins || [];
    while (tb.children.length > ms.length) tb.removeChild(tb.lastChild);
    var heads = ["", "now", "trip at", "margin", "reached in"];
    while (tb.children.length < ms.length) {
      var tr = el("tr");
      for (var k = 0; k < 5; k++) {
        var c = el(k ? "td" : "th");
        if (k) c.setAttribute("data-label", heads[k]);
        tr.appendChild(c);
      }
      tb.appendChild(tr);
    }
    ms.forEach(function (m, i) {
      var tr = tb.children[i];
      var d = m.unit === "V" ? 3 : unitDigits(m.unit); // cell-level volts: millivolts matter
      tr.className = "st-" + m.state;
      tr.children[0].textContent = (m.state === "ok" ? "\u2713" : STATE_WORD[m.state] || m.state) + " " + m.label + (m.subject ? " (" + m.subject + ")" : "");
      tr.children[1].textContent = fmt(m.value, d, m.unit);
      tr.children[2].textContent = fmt(m.bound, d, m.unit);
      tr.children[3].textContent = isNum(m.margin) ? (m.margin < 0 ? "past by " + fmt(-m.margin, d, m.unit) : fmt(m.margin, d, m.unit)) : "--";
      tr.children[4].textContent = isNum(m.margin) && m.margin <= 0 ? "" : isNum(m.to_limit_s) ? "\u2248 " + dur(m.to_limit_s) : "no trend";
    });
  }

  // ---------- pre-charge ----------
  function renderPrecharge(p) {
    var link = val(p, "link.voltage");
    var sec = $("precharge");
    sec.hidden = !link;
    if (!link) return;
    var pre = val(p, "contactor.precharge"), main = val(p, "contactor.main");
    var mainOn = main && isNum(main.value) ? main.value !== 0 : null;
    var preOn = pre && isNum(pre.value) ? pre.value !== 0 : null;
    var ratio = isNum(link.value) && isNum(p.voltage_v) && p.voltage_v > 1 ? link.value / p.voltage_v : null;
    var pct = ratio === null ? null : ratio * 100;
    setText("pre-pct", pct === null ? "--" : pct.toFixed(0) + "\u2009%");
    $("pre-fill").style.width = (pct === null ? 0 : Math.max(0, Math.min(100, pct))) + "%";
    $("pre-fill").className = "pre-fill" + (pct !== null && pct < 90 ? " low" : "");
    var words = "Load side " + fmt(link.value, 1, "V") + staleNote(link) + " of pack " + fmt(p.voltage_v, 1, "V");
    if (preOn !== null) words += "; pre-charge " + (preOn ? "closed" : "open");
    if (mainOn !== null) words += "; main " + (mainOn ? "closed" : "open");
    setText("pre-text", words);
    // Warn when the main contactor closes while the load side is below 90 %
    // of pack voltage (common practice, no source).
    var prev = state.lastMain[p.id];
    if (mainOn === false && ratio !== null) state.lastPreRatio[p.id] = ratio;
    if (mainOn === true && prev === false) {
      var r = state.lastPreRatio[p.id];
      if (isNum(r) && r < 0.9) state.preWarn[p.id] = "Main contactor closed at " + (r * 100).toFixed(0) + "\u2009% pre-charge (below 90\u2009%) at " + clock(state.snap.data_t);
    }
    if (mainOn !== null) state.lastMain[p.id] = mainOn;
    var w = $("pre-warn");
    w.hidden = !state.preWarn[p.id];
    if (state.preWarn[p.id]) w.textContent = "! " + state.preWarn[p.id];
  }

  // ---------- temperatures ----------
  function renderTemps(p) {
    var box = $("temp-tiles");
    var ts = p.temps || [];
    if (box.children.length !== ts.length) {
      box.textContent = "";
      ts.forEach(function () {
        var t = el("div", "tile");
        t.appendChild(el("span", "tn"));
        t.appendChild(el("span", "tv"));
        t.appendChild(el("span", "ts"));
        box.appendChild(t);
      });
    }
    ts.forEach(function (t, i) {
      var tile = box.children[i];
      var st = t.state || "missing";
      tile.className = "tile st-" + st + (t.n === p.temp_stats.max_sensor ? " hottest" : "");
      tile.children[0].textContent = "T" + t.n + (t.role ? " " + t.role : "");
      tile.children[1].textContent = fmt(t.c, 1, "\u00b0C");
      var note = STATE_WORD[st] || st;
      if (st === "stale") note = "stale " + dur(t.age_s);
      if (t.n === p.temp_stats.max_sensor) note += " \u25b2hottest";
      tile.children[2].textContent = note;
    });
    var ts2 = p.temp_stats;
    setText("temp-sum", "min " + fmt(ts2.min_c, 1, "\u00b0C") + ", max " + fmt(ts2.max_c, 1, "\u00b0C") + (isNum(ts2.rise_c_per_min) ? ", rising " + ts2.rise_c_per_min.toFixed(1) + "\u2009\u00b0C/min" : ""));
  }

  // ---------- other values ----------
  function renderValues(p) {
    var tb = $("value-rows");
    var vs = (p.values || []).filter(function (v) {
      return !/^cell\[|^temp\[/.test(v.bind) && v.bind !== "pack.current" && v.bind !== "pack.voltage";
    });
    while (tb.children.length > vs.length) tb.removeChild(tb.lastChild);
    while (tb.children.length < vs.length) {
      var tr = el("tr");
      tr.appendChild(el("th")); tr.appendChild(el("td")); tr.appendChild(el("td"));
      tb.appendChild(tr);
    }
    vs.forEach(function (v, i) {
      var tr = tb.children[i];
      var st = v.state || "missing";
      tr.className = "st-" + st;
      tr.children[0].textContent = v.bind;
      var shown = v.text ? v.text : fmt(v.value, unitDigits(v.unit), v.unit);
      if (/^contactor\./.test(v.bind) && isNum(v.value)) shown = v.value ? "closed" : "open";
      tr.children[1].textContent = shown;
      tr.children[2].textContent = st === "ok" ? "" : st === "stale" ? "stale " + dur(v.age_s) : (STATE_WORD[st] || st);
    });
  }

  // ---------- sources ----------
  function renderSources(p) {
    var box = $("source-list");
    var ss = p.sources || [];
    if (box.children.length !== ss.length) {
      box.textContent = "";
      ss.forEach(function () {
        var d = el("div", "src");
        d.appendChild(el("div", "src-h"));
        d.appendChild(el("div", "src-n"));
        d.appendChild(el("div", "src-d"));
        box.appendChild(d);
      });
    }
    ss.forEach(function (s, i) {
      var d = box.children[i];
      var ok = s.state === "connected";
      d.className = "src " + (ok ? "st-ok" : "st-warn");
      d.children[0].textContent = (ok ? "\u2713 " : "\u2716 ") + s.name + " (" + s.kind + "): " + s.state + (s.reason ? ", " + s.reason : "");
      d.children[1].textContent = "last message " + (isNum(s.age_s) ? dur(s.age_s) + " ago" : "never") +
        " \u00b7 " + fmt(s.rate_hz, 0) + " msg/s \u00b7 " + s.messages + " msgs \u00b7 " + s.decode_errors + " decode errors \u00b7 " + s.unknown + " unknown" + (s.gaps ? " \u00b7 " + s.gaps + " gaps" : "");
      d.children[2].textContent = s.diagnosis || "";
      d.children[2].hidden = !s.diagnosis;
    });
  }

  // ---------- alarms ----------
  function renderAlarms(s) {
    var list = $("alarm-list");
    var all = [];
    s.packs.forEach(function (p) { (p.alarms || []).forEach(function (a) { all.push({ p: p, a: a }); }); });
    all.sort(function (x, y) {
      var ax = x.a.active && !x.a.acked ? 0 : 1, ay = y.a.active && !y.a.acked ? 0 : 1;
      if (ax !== ay) return ax - ay;
      var rx = RANK[x.a.level] || 0, ry = RANK[y.a.level] || 0;
      if (rx !== ry) return ry - rx;
      return y.a.since_t - x.a.since_t;
    });
    var key = all.map(function (x) { return x.p.id + x.a.id + x.a.active + x.a.acked + x.a.level; }).join(",");
    var sec = $("alarms");
    sec.setAttribute("data-count", String(all.length));
    setText("alarm-count", all.length ? String(all.length) : "");
    $("alarm-none").hidden = all.length > 0;
    if (list.getAttribute("data-key") !== key) {
      list.textContent = "";
      all.forEach(function (x) {
        var a = x.a;
        var li = el("li", "alarm lv-" + a.level + (a.active ? " active" : " cleared") + (a.acked ? " acked" : ""));
        li.setAttribute("data-alarm", x.p.id + "/" + a.id);
        li.appendChild(el("span", "al-lv", (a.level === "warn" ? "! WARN" : "\u2716 " + a.level.toUpperCase())));
        li.appendChild(el("span", "al-what", a.label + (a.subject ? " (" + a.subject + ")" : "") + (s.packs.length > 1 ? " \u00b7 " + (x.p.name || x.p.id) : "")));
        li.appendChild(el("span", "al-val", ""));
        li.appendChild(el("span", "al-when", "since " + clock(a.since_t) + (a.active ? "" : ", cleared") + (a.acked ? ", acknowledged" : "")));
        if (!a.acked) {
          var b = el("button", "btn ack", "Acknowledge");
          b.type = "button";
          b.addEventListener("click", function () { ack(x.p.id, a.id, b); });
          li.appendChild(b);
        }
        list.appendChild(li);
      });
      list.setAttribute("data-key", key);
    }
    all.forEach(function (x, i) {
      var li = list.children[i];
      if (!li) return;
      var unit = "";
      (x.p.margins || []).forEach(function (m) { if (m.limit === x.a.limit) unit = m.unit; });
      li.children[2].textContent = isNum(x.a.value) ? "value " + fmt(x.a.value, unit === "V" ? 3 : unitDigits(unit), unit) : "";
    });
    alarmSound(all);
  }
  function ack(pack, id, btn) {
    btn.disabled = true;
    btn.textContent = "Sending...";
    fetch("/api/packs/" + encodeURIComponent(pack) + "/alarms/" + id + "/ack", { method: "POST", credentials: "same-origin" })
      .then(function (r) { if (!r.ok) throw new Error(r.status); btn.textContent = "Acknowledged"; })
      .catch(function () { btn.disabled = false; btn.textContent = "Acknowledge (retry)"; });
  }

  // ---------- sound ----------
  var audio = { ctx: null, muted: false, next: 0 };
  function armSound() {
    if (audio.ctx) return;
    var AC = window.AudioContext || window.webkitAudioContext;
    if (!AC) return;
    try { audio.ctx = new AC(); } catch (e) { return; }
    soundButton();
  }
  function soundButton() {
    var b = $("sound");
    if (!audio.ctx) { b.textContent = "Sound not armed: tap"; b.className = "btn sound-off"; b.setAttribute("aria-pressed", "false"); return; }
    b.textContent = audio.muted ? "Sound muted: tap for on" : "Sound on: tap to mute";
    b.className = "btn " + (audio.muted ? "sound-muted" : "sound-on");
    b.setAttribute("aria-pressed", audio.muted ? "false" : "true");
  }
  document.addEventListener("pointerdown", armSound, { once: false, capture: true });
  document.addEventListener("keydown", armSound, { capture: true });
  $("sound").addEventListener("click", function () {
    if (!audio.ctx) { armSound(); return; }
    audio.muted = !audio.muted;
    soundButton();
  });
  function beep(freq, at, len) {
    var c = audio.ctx, o = c.createOscillator(), g = c.createGain();
    o.type = "square"; o.frequency.value = freq;
    g.gain.setValueAtTime(0.0001, at);
    g.gain.exponentialRampToValueAtTime(0.2, at + 0.01);
    g.gain.exponentialRampToValueAtTime(0.0001, at + len);
    o.connect(g); g.connect(c.destination);
    o.start(at); o.stop(at + len + 0.02);
  }
  function alarmSound(all) {
    var lvl = 0;
    all.forEach(function (x) { if (x.a.active && !x.a.acked) lvl = Math.max(lvl, x.a.level === "warn" ? 1 : 2); });
    if (!lvl || !audio.ctx || audio.muted || state.snap.mode !== "live" && state.snap.mode !== "simulated") return;
    var now = audio.ctx.currentTime;
    if (now < audio.next) return;
    if (audio.ctx.state === "suspended") audio.ctx.resume();
    if (lvl === 2) { beep(1200, now, 0.12); beep(900, now + 0.18, 0.12); beep(1200, now + 0.36, 0.12); audio.next = now + 1.5; }
    else { beep(700, now, 0.2); audio.next = now + 5; }
  }

  // ---------- title and liveness ----------
  function updateTitle() {
    var s = state.snap;
    var live = s && performance.now() - state.lastAt < STALE_MS;
    var w = s ? worst(s) : "nodata";
    root.setAttribute("data-state", w);
    var word = !s ? "CONNECTING" : !live ? "NOT LIVE" : w === "trip" ? "TRIP" : w === "fault" ? "FAULT" : w === "warn" ? "WARN" : w === "ok" ? "OK" : "NO DATA";
    var p = s && s.packs[state.packIdx];
    var t = word + " \u00b7 " + (p ? (p.name || p.id) : "packwatch") + (s && s.mode !== "live" ? " \u00b7 " + (s.mode === "replay" ? "replay" : "demo") : "") + " \u00b7 packwatch";
    if (document.title !== t) document.title = t;
  }
  function liveness() {
    var s = state.snap;
    var age = s ? performance.now() - state.lastAt : Infinity;
    var live = s && age < STALE_MS;
    root.setAttribute("data-live", live ? "yes" : "no");
    var nl = $("notlive");
    nl.hidden = !!live || (!state.everLive && !s);
    if (!live && s) setText("notlive-age", "data " + dur(age / 1000) + " old, last received " + clock(Date.now() / 1000 - age / 1000) + (state.ws ? "" : ", reconnecting..."));
    var lv = $("live");
    if (!s) { lv.textContent = state.ws && state.ws.readyState === 1 ? "WAITING FOR DATA" : "CONNECTING"; lv.className = "live wait"; }
    else if (live) { lv.textContent = "\u25cf LIVE " + clock(s.data_t); lv.className = "live on"; }
    else { lv.textContent = "NOT LIVE"; lv.className = "live off"; }
    if (s && s.mode === "replay" && live) lv.textContent = "\u25b6 REPLAY " + clock(s.data_t);
    if (s && s.mode === "simulated" && live) lv.textContent = "\u25cf DEMO " + clock(s.data_t);
    updateTitle();
  }
  setInterval(liveness, 250);

  // ---------- bus view ----------
  $("bus").addEventListener("toggle", function () {
    state.busOpen = $("bus").open;
    subscribeBus(state.busOpen);
  });
  function hex(id, ext) {
    var s = Number(id).toString(16).toUpperCase();
    var w = ext ? 8 : 3;
    while (s.length < w) s = "0" + s;
    return "0x" + s;
  }
  // renderBus shows pack.BusView: per source every CAN ID (id_hex, rate,
  // count, last data, decoded fields) or line pattern, bus load.
  function renderBus(b) {
    var body = $("bus-body");
    var srcs = (b && b.sources) || [];
    var frag = document.createDocumentFragment();
    if (!srcs.length) frag.appendChild(el("p", "quiet", "Nothing seen on any bus yet."));
    var multi = state.snap && state.snap.packs.length > 1;
    srcs.forEach(function (s) {
      var head = s.name + (s.kind ? " (" + s.kind + (s.device ? " " + s.device : "") + ")" : "") + (multi && s.pack ? " \u00b7 pack " + s.pack : "");
      frag.appendChild(el("h3", "", head));
      var facts = [];
      if (s.state) facts.push(s.state + (s.reason ? ": " + s.reason : ""));
      if (isNum(s.load_pct)) facts.push("bus load " + s.load_pct.toFixed(1) + "\u2009%" + (s.bitrate ? " of " + (s.bitrate / 1000) + "\u2009kbit/s" : ""));
      else if ((s.ids || []).length) facts.push("bus load unknown: give the source its bitrate in the profile");
      if (isNum(s.rate_hz)) facts.push(s.rate_hz.toFixed(0) + " msg/s");
      if (s.unknown) facts.push(s.unknown + " unknown");
      if (s.decode_errors) facts.push(s.decode_errors + " decode errors");
      if (s.error_frames) facts.push(s.error_frames + " error frames");
      frag.appendChild(el("p", "sub", facts.join(" \u00b7 ")));
      if (s.diagnosis) frag.appendChild(el("p", "src-d", s.diagnosis));
      var ids = s.ids || [];
      if (ids.length) {
        var wrap = el("div", "scroll-x");
        var t = el("table", "grid-table bus-table");
        var hd = el("thead"), hr = el("tr");
        ["ID", "Rate", "Count", "Last data", "Decoded"].forEach(function (x) { hr.appendChild(el("th", "", x)); });
        hd.appendChild(hr); t.appendChild(hd);
        var tb = el("tbody");
        ids.forEach(function (r) {
          var tr = el("tr", r.known ? "" : "unknown");
          var idText = r.id_hex || hex(r.id, r.extended);
          tr.appendChild(el("td", "mono", idText + (r.known ? "" : " ? unknown")));
          tr.appendChild(el("td", "", fmt(r.rate_hz, 1, "/s")));
          tr.appendChild(el("td", "", String(r.count === undefined ? "" : r.count)));
          tr.appendChild(el("td", "mono", (r.data || "").toUpperCase().replace(/(..)(?=.)/g, "$1 ") + (isNum(r.age_s) && r.age_s > 2 ? "  (" + dur(r.age_s) + " ago)" : "")));
          var dec = (r.fields || []).map(function (f) { return f.bind + " = " + (f.text || fmt(f.value, unitDigits(f.unit), f.unit)) + (f.state && f.state !== "ok" ? " [" + f.state + "]" : ""); }).join("; ");
          tr.appendChild(el("td", "", dec));
          tb.appendChild(tr);
        });
        t.appendChild(tb);
        wrap.appendChild(t);
        frag.appendChild(wrap);
      }
      var pats = s.patterns || [];
      if (pats.length) {
        var t2 = el("table", "grid-table bus-table");
        var h2 = el("thead"), r2 = el("tr");
        ["Line pattern", "Lines matched"].forEach(function (x) { r2.appendChild(el("th", "", x)); });
        h2.appendChild(r2); t2.appendChild(h2);
        var tb2 = el("tbody");
        pats.forEach(function (r) {
          var tr = el("tr", r.count ? "" : "unknown");
          tr.appendChild(el("td", "mono", r.pattern));
          tr.appendChild(el("td", "", String(r.count)));
          tb2.appendChild(tr);
        });
        t2.appendChild(tb2);
        frag.appendChild(t2);
      }
      if (s.last_line) frag.appendChild(el("p", "mono", "last line: " + s.last_line));
    });
    body.textContent = "";
    body.appendChild(frag);
  }

  // ---------- replay ----------
  Array.prototype.forEach.call(document.querySelectorAll("[data-replay]"), function (b) {
    b.addEventListener("click", function () {
      var a = b.getAttribute("data-replay"), q = "";
      if (a === "seek") q = "?offset_s=" + encodeURIComponent($("replay-seek").value || "0");
      fetch("/api/replay/" + a + q, { method: "POST", credentials: "same-origin" });
    });
  });
  $("replay-speed").addEventListener("change", function () {
    fetch("/api/replay/speed?x=" + encodeURIComponent(this.value), { method: "POST", credentials: "same-origin" });
  });

  // ---------- theme ----------
  function setTheme(t) {
    root.setAttribute("data-theme", t);
    $("theme").setAttribute("aria-pressed", t === "outdoor" ? "true" : "false");
    $("theme").textContent = t === "outdoor" ? "Indoor colours" : "Outdoor contrast";
    try { localStorage.setItem("packwatch.theme", t); } catch (e) { /* private mode */ }
    state.chartKey = "";
    if (state.snap) render();
  }
  $("theme").addEventListener("click", function () { setTheme(root.getAttribute("data-theme") === "outdoor" ? "indoor" : "outdoor"); });
  var saved = null;
  try { saved = localStorage.getItem("packwatch.theme"); } catch (e) { /* ignore */ }
  setTheme(saved === "outdoor" ? "outdoor" : "indoor");

  // The token came in the URL once; the cookie holds it now. Keep it out of
  // the address bar, history and screenshots.
  if (/[?&]token=/.test(location.search)) history.replaceState(null, "", location.pathname);

  connect();
  liveness();
})();
