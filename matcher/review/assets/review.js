// matcher review page: our own small script. Builds the page from GET /api/peaks and sends
// decisions to POST /api/decisions with the session token in the X-Review-Token header.
// All text goes in through textContent (never as markup).
(function () {
  "use strict";
  var TOKEN = document.querySelector('meta[name="review-token"]').content;
  var CAN_ADD = document.querySelector('meta[name="review-can-add"]').content === "yes";
  var state = { peaks: [], shown: [], sel: 0, pick: 0, summary: null };
  var EVIDENCE_WORDS = { index: "retention index", mol_ion: "molecular ion", ions: "key ions",
                         hit: "spectral-search name", spectrum: "spectrum similarity",
                         second: "index on the second column" };

  function el(tag, attrs, kids) {
    var e = document.createElement(tag);
    if (attrs) { Object.keys(attrs).forEach(function (k) {
      if (k === "text") { e.textContent = attrs[k]; } else if (k === "cls") { e.className = attrs[k]; }
      else { e.setAttribute(k, attrs[k]); } }); }
    (kids || []).forEach(function (c) { if (c) { e.appendChild(typeof c === "string" ? document.createTextNode(c) : c); } });
    return e;
  }
  function num(v, d) { return (v === null || v === undefined || v === "") ? "–" : Number(v).toFixed(d); }
  function keyOf(p) { return p.run + "\u0000" + p.peak; }
  function statusOf(p) { return p.decision ? p.decision.decision : "open"; }
  var STATUS_WORDS = { open: "to do", accept: "accepted", reject: "rejected", unsure: "unsure" };

  function say(text, bad) {
    var s = document.getElementById("status");
    s.textContent = text; s.className = "status show" + (bad ? " bad" : "");
    clearTimeout(say.t); say.t = setTimeout(function () { s.className = "status"; }, bad ? 6000 : 2500);
  }

  function api(method, path, body) {
    var opts = { method: method, headers: { "X-Review-Token": TOKEN }, credentials: "omit", cache: "no-store" };
    if (body !== undefined) { opts.headers["Content-Type"] = "application/json"; opts.body = JSON.stringify(body); }
    return fetch(path, opts).then(function (r) {
      return r.json().then(function (j) { if (!r.ok) { throw new Error(j.error || j.message || ("HTTP " + r.status)); } return j; });
    });
  }

  function evidenceWords(v) {
    if (v === null || v === undefined) { return "not given"; }
    if (v === 0) { return "no effect (hint absent or silent)"; }
    if (v >= 2) { return "strongly for"; } if (v >= 0.5) { return "for"; } if (v > -0.5) { return "about neutral"; }
    if (v > -2) { return "against"; } return "strongly against";
  }

  function tally() {
    var c = { open: 0, accept: 0, reject: 0, unsure: 0 };
    state.peaks.forEach(function (p) { c[statusOf(p)] += 1; });
    document.getElementById("tally").textContent = state.peaks.length + " peaks: " + c.open + " to do, " + c.accept +
      " accepted, " + c.reject + " rejected, " + c.unsure + " unsure";
  }

  function fillFlags() {
    var seen = {};
    state.peaks.forEach(function (p) { p.flags.forEach(function (f) { seen[f] = 1; });
      p.candidates.forEach(function (c) { (c.flags || []).forEach(function (f) { seen[f] = 1; }); }); });
    var sel = document.getElementById("f-flag");
    Object.keys(seen).sort().forEach(function (f) { sel.appendChild(el("option", { value: f, text: f })); });
  }

  function filtered() {
    var st = document.getElementById("f-status").value, fl = document.getElementById("f-flag").value,
        rv = document.getElementById("f-review").checked;
    return state.peaks.filter(function (p) {
      if (st && statusOf(p) !== st) { return false; }
      if (rv && !p.needs_review) { return false; }
      if (fl) { var top = p.candidates[0]; var flags = p.flags.concat(top ? top.flags : []);
        if (flags.indexOf(fl) < 0) { return false; } }
      return true;
    });
  }

  function order(list) {  // peaks marked for review and not yet decided first, then file order
    return list.map(function (p, i) { return [p, i]; }).sort(function (a, b) {
      var ka = (statusOf(a[0]) === "open" && a[0].needs_review) ? 0 : 1,
          kb = (statusOf(b[0]) === "open" && b[0].needs_review) ? 0 : 1;
      return ka - kb || a[1] - b[1]; }).map(function (x) { return x[0]; });
  }

  function drawList(keepKey) {
    state.shown = order(filtered());
    var ol = document.getElementById("peaks"); ol.textContent = "";
    state.shown.forEach(function (p, i) {
      var top = p.candidates[0], s = statusOf(p);
      var li = el("li", { "data-peak": p.peak, "data-run": p.run, "data-status": s }, [
        el("span", { text: (p.needs_review ? "● " : "") + p.peak, cls: p.needs_review ? "mark" : "" }),
        el("span", { cls: "ri", text: num(p.ri, 1) }),
        el("span", { cls: "nm", text: p.decision && p.decision.name ? p.decision.name : (top ? top.name : "no candidate") }),
        el("span", { cls: "st st-" + s, text: STATUS_WORDS[s] })]);
      li.addEventListener("click", function () { select(i); });
      ol.appendChild(li);
    });
    if (keepKey) { var j = state.shown.map(keyOf).indexOf(keepKey); state.sel = j >= 0 ? j : Math.min(state.sel, state.shown.length - 1); }
    select(Math.max(0, Math.min(state.sel, state.shown.length - 1)), true);
  }

  function parseSpectrum(s) {
    if (!s) { return null; }
    if (Array.isArray(s)) { return s.map(function (x) { return [Number(x[0]), Number(x[1])]; }); }
    if (typeof s === "string") { return s.trim().split(/\s+/).map(function (t) { var q = t.split(":"); return [Number(q[0]), Number(q[1])]; })
      .filter(function (x) { return isFinite(x[0]) && isFinite(x[1]); }); }
    return null;
  }

  function spectrumSvg(top, bottom) {  // unknown above the axis, candidate below
    var NS = "http://www.w3.org/2000/svg", W = 520, H = 200, mid = H / 2;
    var all = (top || []).concat(bottom || []);
    var lo = Math.min.apply(null, all.map(function (x) { return x[0]; })) - 5,
        hi = Math.max.apply(null, all.map(function (x) { return x[0]; })) + 5;
    var svg = document.createElementNS(NS, "svg");
    svg.setAttribute("class", "spec"); svg.setAttribute("width", W); svg.setAttribute("height", H);
    svg.setAttribute("role", "img"); svg.setAttribute("aria-label", "spectra: the peak above, the candidate below");
    function sticks(list, sign, colour) {
      var m = Math.max.apply(null, list.map(function (x) { return x[1]; })) || 1;
      list.forEach(function (x) { var l = document.createElementNS(NS, "line"), px = 10 + (x[0] - lo) / (hi - lo) * (W - 20);
        l.setAttribute("x1", px); l.setAttribute("x2", px); l.setAttribute("y1", mid);
        l.setAttribute("y2", mid - sign * (x[1] / m) * (mid - 8)); l.setAttribute("stroke", colour); svg.appendChild(l); });
    }
    var ax = document.createElementNS(NS, "line"); ax.setAttribute("x1", 0); ax.setAttribute("x2", W);
    ax.setAttribute("y1", mid); ax.setAttribute("y2", mid); ax.setAttribute("stroke", "#999"); svg.appendChild(ax);
    if (top) { sticks(top, 1, "#1d232b"); } if (bottom) { sticks(bottom, -1, "#3a6ea5"); }
    return svg;
  }

  function drawDetail() {
    var d = document.getElementById("detail"); d.textContent = "";
    var p = state.shown[state.sel];
    if (!p) { d.appendChild(el("p", { cls: "hint", text: "No peak matches the filters." })); return; }
    d.appendChild(el("h2", { text: "Peak " + p.peak + " · run " + p.run + " · index " + num(p.ri, 1) +
      (p.ri_measured !== null && p.ri_measured !== p.ri ? " (measured " + num(p.ri_measured, 1) + ")" : "") }));
    var facts = [];
    if (p.rt !== null) { facts.push("time " + num(p.rt, 3) + " min"); }
    if (p.mol_ion !== null) { facts.push("molecular ion " + num(p.mol_ion, 0)); }
    var hitScore = p.hit_score !== undefined ? p.hit_score : p.hit_match;
    if (p.hit) { facts.push("spectral search named " + p.hit + (hitScore !== null && hitScore !== undefined ? " (" + num(hitScore, 0) + ")" : "")); }
    if (p.not_in_library !== null) { facts.push("not in the library: " + num(p.not_in_library, 3)); }
    if (p.second_peak !== undefined) {  // a two-column result: the peak of the second run paired with this one
      facts.push(p.second_peak ? "paired with peak " + p.second_peak + " of the second column at index " + num(p.second_ri, 1) +
        (p.second_pair_probability !== null && p.second_pair_probability !== undefined ? " (pair probability " + num(p.second_pair_probability, 2) + ")" : "")
        : "no partner on the second column"); }
    if (p.ladder) { var L = p.ladder;
      facts.push(L.outside ? "outside the ladder (" + (L.below ? "after " + L.below.name : "before " + L.above.name) + ")"
        : "between " + L.below.name + " (" + num(L.below.index, 0) + ") and " + L.above.name + " (" + num(L.above.index, 0) + ")"); }
    d.appendChild(el("p", { text: facts.join(" · ") }));
    var fl = el("p", {}, ["peak flags: "]);
    p.flags.forEach(function (f) { fl.appendChild(el("span", { cls: "flag" + (f === "review" ? " flag-review" : ""), text: f })); });
    if (!p.flags.length) { fl.appendChild(el("span", { text: "none" })); }
    d.appendChild(fl);

    d.appendChild(el("h3", { text: "Candidates" }));
    if (!p.candidates.length) { d.appendChild(el("p", { cls: "hint", text: "Nothing in the library inside the window." })); }
    else {
      var two = p.candidates.some(function (c) { return c.second_library_ri !== undefined; });
      var heads = ["#", "name", "probability", "ΔRI", "library index"].concat(two ? ["second ΔRI"] : []).concat(["flags", "evidence"]);
      var t = el("table", { id: "cands" }, [el("tr", {}, heads.map(function (h) { return el("th", { text: h }); }))]);
      p.candidates.forEach(function (c, i) {
        var ev = el("td", { cls: "words" });
        Object.keys(c.evidence || {}).forEach(function (k) {
          var v = c.evidence[k];
          ev.appendChild(el("div", { text: (EVIDENCE_WORDS[k] || k) + ": " + evidenceWords(v) + " (" + num(v, 2) + ")" }));
        });
        if (c.spectrum_similarity !== undefined && c.spectrum_similarity !== null) {
          ev.appendChild(el("div", { text: "spectra alike: " + num(c.spectrum_similarity, 2) + " of 1" }));
        }
        var fcell = el("td");
        (c.flags || []).forEach(function (f) { fcell.appendChild(el("span", { cls: "flag" + (f === "review" ? " flag-review" : ""), text: f })); });
        var tr = el("tr", { cls: i === state.pick ? "picked" : "", "data-rank": String(c.rank) }, [
          el("td", { cls: "num", text: String(i + 1) }), el("td", { text: c.name }), el("td", { cls: "num", text: num(c.probability, 3) }),
          el("td", { cls: "num", text: num(c.delta_ri, 2) }), el("td", { cls: "num", text: num(c.library_ri, 1) }),
          two ? el("td", { cls: "num", text: num(c.second_delta_ri, 2) }) : null, fcell, ev]);
        tr.addEventListener("click", function () { state.pick = i; drawDetail(); });
        t.appendChild(tr);
      });
      d.appendChild(t);
    }

    d.appendChild(el("h3", { text: "Spectra" }));
    var c0 = p.candidates[state.pick] || {};
    var su = parseSpectrum(p.spectrum), sc = parseSpectrum(c0.spectrum);
    if (su || sc) { d.appendChild(spectrumSvg(su, sc)); d.appendChild(el("p", { cls: "words", text: "above: this peak; below: " + (c0.name || "candidate") + (sc ? "" : " (no spectrum in the library)") })); }
    else { d.appendChild(el("p", { cls: "hint", text: "This result holds no spectra." })); }

    d.appendChild(el("h3", { text: "Other peaks that may be the same compound" }));
    if (!p.competing.length) { d.appendChild(el("p", { cls: "hint", text: "None: no other peak of the run lists these candidates." })); }
    else { var ul = el("ul");
      p.competing.forEach(function (x) { ul.appendChild(el("li", { text: x.name + " — peak " + x.peak + " (probability there " + num(x.probability, 3) + ")" })); });
      d.appendChild(ul); }

    var box = el("div", { cls: "decide" });
    box.appendChild(el("p", { cls: "now", id: "current", text: p.decision ? ("Decided: " + STATUS_WORDS[p.decision.decision] +
      (p.decision.name ? " " + p.decision.name : "") + " by " + p.decision.reviewer + " at " + p.decision.time +
      (p.decision.standard ? " · confirmed with an authentic standard" : "")) : "Not decided yet." }));
    var note = el("textarea", { id: "note", placeholder: "note (kept with the decision)", "aria-label": "note" });
    note.value = p.decision ? (p.decision.note || "") : "";
    var std = el("input", { type: "checkbox", id: "standard" }); std.checked = !!(p.decision && p.decision.standard);
    var pickName = el("input", { type: "text", id: "name", "aria-label": "compound accepted",
      value: (p.candidates[state.pick] || {}).name || (p.decision && p.decision.name) || "" });
    box.appendChild(el("label", {}, ["Accept as ", pickName]));
    box.appendChild(el("div", {}, [note]));
    box.appendChild(el("label", {}, [std, " confirmed with an authentic standard run under our validated method (only then can it go into the library; the note becomes the library entry's source, so name the standard and lot there)"]));
    var bA = el("button", { id: "b-accept", text: "Accept (a)" }), bR = el("button", { id: "b-reject", text: "Reject all (r)" }),
        bU = el("button", { id: "b-unsure", text: "Unsure (u)" });
    bA.addEventListener("click", function () { decide("accept"); });
    bR.addEventListener("click", function () { decide("reject"); });
    bU.addEventListener("click", function () { decide("unsure"); });
    box.appendChild(el("div", {}, [bA, bR, bU]));
    box.appendChild(el("p", { cls: "words", text: "Accepting is a putative annotation, not a confirmation." }));
    if (p.added) { box.appendChild(el("p", { cls: "added", text: "Added to the house library: " + p.added.name + " (observation " + p.added.observation + ")" })); }
    else if (CAN_ADD && p.decision && p.decision.decision === "accept" && p.decision.standard) {
      var bL = el("button", { id: "b-library", text: "Add to the house library" });
      bL.addEventListener("click", addToLibrary); box.appendChild(bL);
    }
    d.appendChild(box);
  }

  function select(i, keepPick) {
    if (!state.shown.length) { state.sel = 0; drawDetail(); return; }
    var prev = state.sel; state.sel = Math.max(0, Math.min(i, state.shown.length - 1));
    if (!keepPick || prev !== state.sel) {  // start on the candidate accepted before, else the first
      var cur = state.shown[state.sel], names = cur.candidates.map(function (c) { return c.name; });
      var j = cur.decision && cur.decision.name ? names.indexOf(cur.decision.name) : -1;
      state.pick = j >= 0 ? j : 0;
    }
    var items = document.querySelectorAll("#peaks li");
    items.forEach(function (li, j) { li.className = j === state.sel ? "sel" : ""; });
    if (items[state.sel]) { items[state.sel].scrollIntoView({ block: "nearest" }); }
    drawDetail();
  }

  function decide(kind) {
    var p = state.shown[state.sel]; if (!p) { return; }
    var body = { run: p.run, peak: p.peak, decision: kind, note: document.getElementById("note").value };
    if (kind === "accept") {
      body.name = document.getElementById("name").value.trim();
      if (!body.name) { say("Pick a candidate (1–9) or type the compound first.", true); return; }
      body.standard = document.getElementById("standard").checked;
    }
    api("POST", "/api/decisions", body).then(function (j) {
      p.decision = j.decision; say("Recorded: peak " + p.peak + " " + STATUS_WORDS[kind]);
      tally(); var k = keyOf(p); drawList(k);
      if (kind !== "accept" || !j.decision.standard) { var n = state.shown.map(keyOf).indexOf(k); if (n >= 0 && n + 1 < state.shown.length) { select(n + 1); } }
    }).catch(function (e) { say(e.message, true); });
  }

  function addToLibrary() {
    var p = state.shown[state.sel];
    api("POST", "/api/library", { run: p.run, peak: p.peak }).then(function (j) {
      say(j.message); return reload(keyOf(p));
    }).catch(function (e) { say(e.message, true); });
  }

  function reload(keep) {
    return api("GET", "/api/peaks").then(function (j) {
      state.peaks = j.peaks; state.summary = j.summary; tally(); drawList(keep);
    });
  }

  document.addEventListener("keydown", function (e) {
    if (e.ctrlKey || e.metaKey || e.altKey) { return; }
    var t = e.target, typing = t && (t.tagName === "TEXTAREA" || t.tagName === "SELECT" ||
      (t.tagName === "INPUT" && t.type !== "checkbox"));
    if (typing) { if (e.key === "Escape") { e.target.blur(); } return; }
    var p = state.shown[state.sel];
    if (e.key === "j" || e.key === "ArrowDown") { select(state.sel + 1); e.preventDefault(); }
    else if (e.key === "k" || e.key === "ArrowUp") { select(state.sel - 1); e.preventDefault(); }
    else if (/^[1-9]$/.test(e.key) && p && Number(e.key) <= p.candidates.length) { state.pick = Number(e.key) - 1; drawDetail(); }
    else if (e.key === "a") { decide("accept"); } else if (e.key === "r") { decide("reject"); }
    else if (e.key === "u") { decide("unsure"); }
    else if (e.key === "n") { var n = document.getElementById("note"); if (n) { n.focus(); e.preventDefault(); } }
  });
  ["f-status", "f-flag", "f-review"].forEach(function (id) {
    document.getElementById(id).addEventListener("change", function (e) {
      var p = state.shown[state.sel]; drawList(p ? keyOf(p) : null); e.target.blur(); });
  });

  // back to this tab: show what another tab or reviewer decided meanwhile (a note being written is kept)
  document.addEventListener("visibilitychange", function () {
    if (document.visibilityState !== "visible") { return; }
    var p = state.shown[state.sel], n = document.getElementById("note");
    var saved = p && p.decision ? (p.decision.note || "") : "";
    if (n && n.value !== saved) { return; }
    reload(p ? keyOf(p) : null).catch(function () {});
  });

  reload(null).then(fillFlags).catch(function (e) { say("Could not load the peaks: " + e.message, true); });
}());
