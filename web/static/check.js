// packwatch pre-flight check panel. Builds itself inside <section id="check-panel">
// and talks to /api/check/ (check.Handler): run a check against the live pack,
// show the go / no-go banner with failing rules first, tick the checklist, add a
// note, save, and list the pack's saved results (printable, exportable as JSON).
// The check is an aid: the pack's own protection, the operator's procedures and
// the aircraft or vehicle documentation rule.
(function () {
  "use strict";
  var box = document.getElementById("check-panel");
  if (!box) return;
  var API = "/api/check";
  var st = { packs: [], pending: "", record: null, key: "" };

  function el(tag, cls, text) {
    var e = document.createElement(tag);
    if (cls) e.className = cls;
    if (text !== undefined) e.textContent = text;
    return e;
  }
  function req(method, path, body) {
    var opt = { method: method, headers: {}, credentials: "same-origin" };
    if (body !== undefined) {
      opt.headers["Content-Type"] = "application/json";
      opt.body = JSON.stringify(body);
    }
    return fetch(API + path, opt).then(function (r) {
      return r.json().then(function (j) {
        if (!r.ok) throw new Error(j.error || ("HTTP " + r.status));
        return j;
      });
    });
  }
  var RANK = { fail: 0, no_data: 1, not_checked: 2, pass: 3 };
  var WORD = { pass: "PASS", fail: "FAIL", no_data: "NO DATA", not_checked: "NOT CHECKED" };
  function sorted(rules) {
    return rules.map(function (r, i) { return [r, i]; }).sort(function (a, b) {
      return (RANK[a[0].status] - RANK[b[0].status]) || (a[1] - b[1]);
    }).map(function (x) { return x[0]; });
  }

  // Layout.
  box.classList.add("check");
  var h = el("h2", null, "Pre-flight check");
  h.id = "check-h";
  box.appendChild(h);
  box.appendChild(el("p", "check-caution", "An aid, not a clearance: the pack's own protection, your procedures and the aircraft or vehicle documentation rule."));
  var form = el("div", "check-form");
  var packSel = el("select"); packSel.id = "check-pack"; packSel.setAttribute("aria-label", "Pack");
  var secs = el("input"); secs.type = "number"; secs.min = "1"; secs.max = "120"; secs.value = "10"; secs.id = "check-seconds";
  secs.setAttribute("aria-label", "Seconds to watch");
  var op = el("input"); op.type = "text"; op.placeholder = "Operator"; op.id = "check-operator";
  op.setAttribute("aria-label", "Operator");
  try { op.value = localStorage.getItem("packwatch.operator") || ""; } catch (e) { /* storage off */ }
  var runBtn = el("button", "btn", "Run check"); runBtn.type = "button"; runBtn.id = "check-run";
  [packSel, secs, el("span", "sub", "s"), op, runBtn].forEach(function (x) { form.appendChild(x); });
  box.appendChild(form);
  var status = el("p", "check-status"); status.id = "check-status"; status.setAttribute("role", "status");
  box.appendChild(status);
  var result = el("div", "check-result"); result.id = "check-result"; result.hidden = true;
  box.appendChild(result);
  var hist = el("div", "check-history"); hist.id = "check-history";
  box.appendChild(hist);

  function loadPacks() {
    fetch("/api/state", { credentials: "same-origin" }).then(function (r) { return r.json(); }).then(function (s) {
      var ids = (s.packs || []).map(function (p) { return p.id; }).join("|");
      if (ids === st.packs.map(function (p) { return p.id; }).join("|")) return;
      st.packs = s.packs || [];
      packSel.textContent = "";
      st.packs.forEach(function (p) {
        var o = el("option", null, p.name + (p.serial ? " (" + p.serial + ")" : ""));
        o.value = p.id;
        packSel.appendChild(o);
      });
      var p = st.packs[0];
      if (p) { st.key = p.serial ? "serial:" + p.serial : "name:" + p.name; loadHistory(); }
    }).catch(function () { /* the page shows the connection state */ });
  }
  packSel.addEventListener("change", function () {
    var p = st.packs[packSel.selectedIndex];
    if (p) { st.key = p.serial ? "serial:" + p.serial : "name:" + p.name; loadHistory(); }
  });

  function banner(verdict) {
    var word = verdict === "go" ? "GO" : verdict === "no-go" ? "NO-GO" : "COULD NOT CHECK";
    var b = el("div", "check-banner check-" + verdict, word);
    b.id = "check-verdict";
    b.setAttribute("data-verdict", verdict);
    return b;
  }

  // preview: the verdict with the boxes as ticked now (the server decides on save).
  function preview() {
    var r = st.record;
    if (!r) return;
    var boxes = result.querySelectorAll("input.check-item");
    var ok = r.verdict !== "could-not-check" && r.rules.length > 0;
    r.rules.forEach(function (x) {
      if (x.id.indexOf("manual.") !== 0 && x.status !== "pass" && x.status !== "not_checked") ok = false;
    });
    boxes.forEach(function (b) { if (!b.checked) ok = false; });
    var v = r.verdict === "could-not-check" ? r.verdict : (ok ? "go" : "no-go");
    var old = document.getElementById("check-verdict");
    if (old) old.replaceWith(banner(v));
  }

  function showRecord(r, saved) {
    st.record = r;
    result.textContent = "";
    result.hidden = false;
    result.appendChild(banner(r.verdict));
    if (r.data && r.data.notice) result.appendChild(el("p", "check-notice", r.data.notice));
    var t = el("table", "grid-table check-rules");
    var hr = el("tr");
    ["Result", "Rule", "Measured", "Required", "Reason"].forEach(function (c) { hr.appendChild(el("th", null, c)); });
    var th = el("thead"); th.appendChild(hr); t.appendChild(th);
    var tb = el("tbody");
    sorted(r.rules.filter(function (x) { return x.id.indexOf("manual.") !== 0; })).forEach(function (x) {
      var tr = el("tr", "rule-" + x.status);
      tr.setAttribute("data-rule", x.id);
      tr.appendChild(el("td", "check-st", WORD[x.status] || x.status));
      tr.appendChild(el("td", null, x.label));
      tr.appendChild(el("td", null, x.measured));
      tr.appendChild(el("td", null, x.required + (x.default ? " *" : "")));
      tr.appendChild(el("td", null, x.reason));
      tb.appendChild(tr);
    });
    t.appendChild(tb);
    result.appendChild(t);
    result.appendChild(el("p", "sub", "* a default: the profile's [check] section does not set it."));

    var list = el("fieldset", "check-items");
    list.appendChild(el("legend", null, "Checklist (confirm by hand)"));
    (r.manual || []).forEach(function (text, i) {
      var lab = el("label");
      var cb = el("input", "check-item"); cb.type = "checkbox"; cb.value = String(i);
      var rule = r.rules.filter(function (x) { return x.id === "manual." + (i + 1); })[0];
      cb.checked = !!(rule && rule.status === "pass");
      cb.disabled = !!saved;
      cb.addEventListener("change", preview);
      lab.appendChild(cb);
      lab.appendChild(document.createTextNode(" " + text));
      list.appendChild(lab);
    });
    if (!(r.manual || []).length) list.appendChild(el("p", "quiet", "The profile lists no checklist items."));
    result.appendChild(list);
    var note = el("textarea"); note.id = "check-note"; note.placeholder = "Note"; note.value = r.note || ""; note.disabled = !!saved;
    note.setAttribute("aria-label", "Note");
    result.appendChild(note);
    var actions = el("div", "check-actions");
    if (saved) {
      actions.appendChild(el("span", "check-saved", "Saved: " + r.hash.slice(0, 12)));
      var pr = el("a", "btn", "Print"); pr.href = API + "/results/" + r.hash + "/print"; pr.target = "_blank"; pr.rel = "noopener";
      var js = el("a", "btn", "JSON"); js.href = API + "/results/" + r.hash + "?download=1";
      actions.appendChild(pr); actions.appendChild(js);
    } else {
      var save = el("button", "btn", "Save result"); save.type = "button"; save.id = "check-save";
      save.addEventListener("click", function () {
        var confirmed = [];
        result.querySelectorAll("input.check-item").forEach(function (b) { confirmed[Number(b.value)] = b.checked; });
        for (var i = 0; i < confirmed.length; i++) confirmed[i] = !!confirmed[i];
        save.disabled = true;
        req("POST", "/save", { pending: st.pending, confirmed: confirmed, operator: op.value, note: note.value })
          .then(function (rec) { status.textContent = "Result saved."; showRecord(rec, true); loadHistory(); })
          .catch(function (e) { status.textContent = "Not saved: " + e.message; save.disabled = false; });
      });
      actions.appendChild(save);
    }
    result.appendChild(actions);
    result.appendChild(el("p", "check-caution", r.caution));
    preview();
  }

  runBtn.addEventListener("click", function () {
    var id = packSel.value;
    if (!id) { status.textContent = "No pack to check."; return; }
    try { localStorage.setItem("packwatch.operator", op.value); } catch (e) { /* storage off */ }
    var n = Math.max(1, Math.min(120, Number(secs.value) || 10));
    runBtn.disabled = true;
    result.hidden = true;
    var left = n;
    status.textContent = "Watching the pack: " + left + " s";
    var tick = setInterval(function () { left = Math.max(0, left - 1); status.textContent = "Watching the pack: " + left + " s"; }, 1000);
    req("POST", "/run", { pack: id, seconds: n, operator: op.value }).then(function (res) {
      st.pending = res.pending;
      status.textContent = "Check done; tick the checklist, add a note, and save.";
      showRecord(res.record, false);
    }).catch(function (e) {
      status.textContent = "Check failed: " + e.message;
    }).then(function () { clearInterval(tick); runBtn.disabled = false; });
  });

  function loadHistory() {
    if (!st.key) return;
    req("GET", "/history?key=" + encodeURIComponent(st.key)).then(function (list) {
      hist.textContent = "";
      hist.appendChild(el("h3", null, "Saved checks of this pack"));
      if (!list.length) { hist.appendChild(el("p", "quiet", "None yet.")); return; }
      var t = el("table", "grid-table");
      var tb = el("tbody");
      list.forEach(function (s) {
        var tr = el("tr", "hist-" + s.verdict);
        tr.setAttribute("data-hash", s.hash);
        tr.appendChild(el("td", null, s.time));
        tr.appendChild(el("td", "check-st", s.verdict.toUpperCase()));
        tr.appendChild(el("td", null, s.operator || ""));
        tr.appendChild(el("td", null, s.mode));
        tr.appendChild(el("td", null, s.failing.join("; ")));
        var td = el("td");
        var a = el("a", null, "print"); a.href = API + "/results/" + s.hash + "/print"; a.target = "_blank"; a.rel = "noopener";
        var j = el("a", null, "JSON"); j.href = API + "/results/" + s.hash + "?download=1";
        td.appendChild(a); td.appendChild(document.createTextNode(" ")); td.appendChild(j);
        tr.appendChild(td);
        tb.appendChild(tr);
      });
      t.appendChild(tb);
      hist.appendChild(t);
    }).catch(function (e) { hist.textContent = "History not available: " + e.message; });
  }

  loadPacks();
  setInterval(loadPacks, 5000);
})();
