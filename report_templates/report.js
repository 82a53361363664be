"use strict";
// dedup audit report. Reads the JSON data block and draws clusters a page at a time.
// Document text is only ever written with textContent / createTextNode, never as markup.
(function () {
  var data = JSON.parse(document.getElementById("audit-data").textContent);
  var docs = data.documents;
  var PAGE = 25;
  var STORE_KEY = "dedup-decisions:" + data.audit_id;
  var DECISIONS = ["confirmed-duplicate", "not-duplicate", "keep-both"];
  var DECISION_WORDS = { "confirmed-duplicate": "confirmed duplicate", "not-duplicate": "not a duplicate", "keep-both": "keep both" };
  var state = { page: 0, text: "", sort: "impact", decided: "all", threshold: data.threshold, open: {} };

  function el(tag, attrs, children) {
    var node = document.createElement(tag);
    if (attrs) {
      Object.keys(attrs).forEach(function (k) {
        if (k === "text") node.textContent = attrs[k];
        else if (k === "cls") node.className = attrs[k];
        else node.setAttribute(k, attrs[k]);
      });
    }
    (children || []).forEach(function (c) {
      node.appendChild(typeof c === "string" ? document.createTextNode(c) : c);
    });
    return node;
  }
  function svgEl(tag, attrs) {
    var node = document.createElementNS("http://www.w3.org/2000/svg", tag);
    Object.keys(attrs || {}).forEach(function (k) { node.setAttribute(k, attrs[k]); });
    return node;
  }
  function fmt(x) { return x === null || x === undefined ? "" : Number(x).toFixed(3); }
  function pct(x) { return Math.round(x * 100) + "%"; }

  // ---- decisions (localStorage, keyed by audit id) ----
  var decisions = {};
  try { decisions = JSON.parse(window.localStorage.getItem(STORE_KEY) || "{}") || {}; } catch (e) { decisions = {}; }
  function saveDecisions() {
    try { window.localStorage.setItem(STORE_KEY, JSON.stringify(decisions)); } catch (e) { /* private mode: kept in memory */ }
    document.getElementById("decision-count").textContent = String(Object.keys(decisions).length);
  }
  function clusterKey(c) { return "cluster:" + c[0]; }
  function pairKey(a, b) { return "pair:" + Math.min(a, b) + ":" + Math.max(a, b); }
  function docRef(i) { return { id: docs[i][0], content_hash: docs[i][3] }; }
  function setDecision(key, value, comment, subject) {
    if (!value && !comment) { delete decisions[key]; }
    else {
      decisions[key] = { decision: value || null, comment: comment || "", subject: subject, decided_at: new Date().toISOString() };
    }
    saveDecisions();
  }
  function exportDecisions() {
    var list = Object.keys(decisions).sort().map(function (key) {
      var d = decisions[key];
      return { kind: d.subject.kind, cluster_id: d.subject.cluster_id, documents: d.subject.documents,
               decision: d.decision, comment: d.comment, decided_at: d.decided_at };
    });
    return { schema: "dedup-review-decisions", schema_version: 1, audit_id: data.audit_id,
             exported_at: new Date().toISOString(), decisions: list };
  }

  function decisionControls(key, subject, label) {
    var current = decisions[key] || {};
    var box = el("div", { cls: "decide" });
    var fs = el("fieldset", {}, [el("legend", { text: label })]);
    var name = "d-" + key.replace(/[^a-z0-9]/gi, "-");
    DECISIONS.forEach(function (value) {
      var input = el("input", { type: "radio", name: name, value: value });
      if (current.decision === value) input.checked = true;
      input.addEventListener("change", function () { setDecision(key, value, comment.value, subject); refreshBadges(); });
      fs.appendChild(el("label", {}, [input, " " + DECISION_WORDS[value]]));
    });
    var clear = el("button", { type: "button", text: "clear" });
    var comment = el("textarea", { placeholder: "comment (optional)", "aria-label": label + ": comment" });
    comment.value = current.comment || "";
    comment.addEventListener("change", function () {
      var chosen = box.querySelector("input:checked");
      setDecision(key, chosen ? chosen.value : null, comment.value, subject);
      refreshBadges();
    });
    clear.addEventListener("click", function () {
      box.querySelectorAll("input").forEach(function (i) { i.checked = false; });
      comment.value = "";
      setDecision(key, null, "", subject);
      refreshBadges();
    });
    box.appendChild(fs); box.appendChild(comment); box.appendChild(clear);
    return box;
  }

  // ---- evidence: two texts side by side with shared passages marked ----
  function markedText(text, passages, differencesOnly) {
    var pre = el("div", { cls: "doc-text" + (differencesOnly ? " differences" : ""), tabindex: "0" });
    var pos = 0;
    passages.forEach(function (p) {
      if (p[0] > pos) pre.appendChild(document.createTextNode(text.slice(pos, p[0])));
      var mark = el("mark", { title: "shared passage " + p[2] });
      if (p[2] > 0) mark.appendChild(el("sup", { text: String(p[2]) }));
      mark.appendChild(document.createTextNode(text.slice(p[0], p[1])));
      pre.appendChild(mark);
      pos = p[1];
    });
    if (pos < text.length) pre.appendChild(document.createTextNode(text.slice(pos)));
    return pre;
  }
  function evidenceView(a, b, clusterId) {
    var lo = Math.min(a, b), hi = Math.max(a, b);
    var ev = data.evidence[lo + ":" + hi];
    var box = el("section", { cls: "evidence", "aria-label": "evidence" });
    box.appendChild(el("h4", { text: "Evidence: " + docs[a][0] + "  ↔  " + docs[b][0] }));
    if (!ev) {
      box.appendChild(el("p", { cls: "aid", text: "Evidence for this pair was not included in the report (too many pairs); compare the files directly." }));
      return box;
    }
    var left = a === lo ? 0 : 1;
    var parts = [[a, ev[left], ev[2 + left]], [b, ev[1 - left], ev[3 - left]]];
    var toggle = el("label", { cls: "aid" });
    var check = el("input", { type: "checkbox" });
    toggle.appendChild(check);
    toggle.appendChild(document.createTextNode(" show only what each text has that the other lacks"));
    box.appendChild(toggle);
    var grid = el("div", { cls: "side-by-side" });
    var texts = [];
    parts.forEach(function (p) {
      var text = data.texts[p[0]] || "";
      var side = el("div", { cls: "side" });
      side.appendChild(el("h5", {}, [el("code", { text: docs[p[0]][0] })]));
      side.appendChild(el("p", { cls: "coverage", text: pct(p[2]) + " of its words are in shared passages; " + pct(1 - p[2]) + " only here." +
        (text.length >= data.text_limit ? " (text cut at " + data.text_limit + " characters)" : "") }));
      var view = markedText(text, p[1], false);
      texts.push(view);
      side.appendChild(view);
      grid.appendChild(side);
    });
    check.addEventListener("change", function () { texts.forEach(function (t) { t.classList.toggle("differences", check.checked); }); });
    box.appendChild(grid);
    box.appendChild(decisionControls(pairKey(a, b), { kind: "pair", cluster_id: clusterId, documents: [docRef(a), docRef(b)] }, "Decision on this pair"));
    return box;
  }

  // ---- cluster graph: documents as nodes, verified pairs as edges ----
  function clusterGraph(c) {
    var members = c[7], edges = c[8], keeper = c[3];
    var size = 220, r = 80, cx = size / 2, cy = size / 2;
    var svg = svgEl("svg", { viewBox: "0 0 " + size + " " + size, width: size, height: size, role: "img",
      "aria-label": "Graph of cluster " + c[0] + ": " + members.length + " documents, " + edges.length + " verified pairs" });
    var title = svgEl("title"); title.textContent = "Cluster " + c[0] + ": thicker lines are more similar pairs; the ringed node is the keeper";
    svg.appendChild(title);
    var at = {};
    members.forEach(function (m, k) {
      var angle = -Math.PI / 2 + (2 * Math.PI * k) / members.length;
      at[m[0]] = members.length === 1 ? [cx, cy] : [cx + r * Math.cos(angle), cy + r * Math.sin(angle)];
    });
    members.forEach(function (m) {
      if (m[1] === "exact-copy") edges = edges.concat([[m[0], keeper, 1.0, "exact"]]);
    });
    edges.forEach(function (e) {
      if (!at[e[0]] || !at[e[1]]) return;
      var w = 1 + 6 * Math.max(0, (e[2] - data.threshold) / Math.max(1e-9, 1 - data.threshold));
      var line = svgEl("line", { x1: at[e[0]][0], y1: at[e[0]][1], x2: at[e[1]][0], y2: at[e[1]][1],
        stroke: e[3] === "exact" ? "#2f5d7c" : "#7fa3b8", "stroke-width": w.toFixed(1), "stroke-linecap": "round" });
      if (e[2] < state.threshold) line.setAttribute("stroke-opacity", "0.15");
      var t = svgEl("title"); t.textContent = docs[e[0]][0] + " ↔ " + docs[e[1]][0] + ": " + fmt(e[2]);
      line.appendChild(t);
      svg.appendChild(line);
    });
    members.forEach(function (m, k) {
      var p = at[m[0]];
      var node = svgEl("circle", { cx: p[0], cy: p[1], r: m[0] === keeper ? 9 : 6,
        fill: m[1] === "linked-through" ? "#c98a3d" : (m[0] === keeper ? "#ffffff" : "#2f5d7c"),
        stroke: "#1f2a33", "stroke-width": m[0] === keeper ? 3 : 1 });
      var t = svgEl("title"); t.textContent = docs[m[0]][0] + " (" + m[1] + ")";
      node.appendChild(t);
      svg.appendChild(node);
      var label = svgEl("text", { x: p[0], y: p[1] - 11, "font-size": "10", "text-anchor": "middle", fill: "#1f2a33" });
      label.textContent = String(k + 1);
      svg.appendChild(label);
    });
    var box = el("figure", { cls: "graph" }, [svg]);
    box.appendChild(el("figcaption", { cls: "aid", text: "Numbers follow the table rows. Ringed: keeper. Orange: linked through another member." }));
    return box;
  }

  // ---- one cluster ----
  function memberScore(m) { return m[6] === null ? 1 : m[6]; }
  function clusterBody(c) {
    var body = el("div", { cls: "cluster-body", id: "body-" + c[0] });
    var layout = el("div", { cls: "cluster-layout" });
    layout.appendChild(clusterGraph(c));
    var tableBox = el("div", { cls: "members" });
    var table = el("table");
    var head = el("tr");
    ["#", "Document", "Role", "Jaccard", "In keeper", "Keeper in it", "Cosine", "Proposed action", ""].forEach(function (h) {
      head.appendChild(el("th", { scope: "col", text: h }));
    });
    table.appendChild(el("thead", {}, [head]));
    var tbody = el("tbody");
    var evidenceSlot = el("div");
    c[7].forEach(function (m, k) {
      var row = el("tr");
      if (m[0] !== c[3] && memberScore(m) < state.threshold) row.className = "below";
      row.appendChild(el("td", { cls: "num", text: String(k + 1) }));
      row.appendChild(el("td", {}, [el("code", { text: docs[m[0]][0] })]));
      var role = el("td", { cls: "role-" + m[1], text: m[1] });
      if (m[7] >= 0) role.appendChild(el("div", { cls: "reason" }, ["via ", el("code", { text: docs[m[7]][0] })]));
      row.appendChild(role);
      [m[2], m[3], m[4], m[5]].forEach(function (v) { row.appendChild(el("td", { cls: "num", text: fmt(v) })); });
      var action = el("td", {}, [el("strong", { text: m[8] })]);
      action.appendChild(el("div", { cls: "reason", text: m[9] }));
      row.appendChild(action);
      var cell = el("td");
      if (m[0] !== c[3]) {
        var button = el("button", { type: "button", cls: "evidence-open", text: "Evidence vs keeper" });
        button.addEventListener("click", function () {
          evidenceSlot.textContent = "";
          evidenceSlot.appendChild(evidenceView(m[0], c[3], c[0]));
          evidenceSlot.querySelector(".doc-text").focus();
        });
        cell.appendChild(button);
      }
      row.appendChild(cell);
      tbody.appendChild(row);
    });
    table.appendChild(tbody);
    tableBox.appendChild(table);
    var pairs = c[8].filter(function (e) { return e[0] !== c[3] && e[1] !== c[3]; });
    if (pairs.length) {
      var list = el("p", { cls: "aid" }, ["Other verified pairs: "]);
      pairs.forEach(function (e) {
        if (e[2] < state.threshold) return;
        var b = el("button", { type: "button", cls: "evidence-open", text: docs[e[0]][0] + " ↔ " + docs[e[1]][0] + " (" + fmt(e[2]) + ")" });
        b.addEventListener("click", function () { evidenceSlot.textContent = ""; evidenceSlot.appendChild(evidenceView(e[0], e[1], c[0])); });
        list.appendChild(b); list.appendChild(document.createTextNode(" "));
      });
      tableBox.appendChild(list);
    }
    layout.appendChild(tableBox);
    body.appendChild(layout);
    body.appendChild(decisionControls(clusterKey(c), { kind: "cluster", cluster_id: c[0], documents: c[7].map(function (m) { return docRef(m[0]); }) }, "Decision on this cluster"));
    body.appendChild(evidenceSlot);
    return body;
  }
  function clusterDecided(c) {
    if (decisions[clusterKey(c)]) return true;
    return false;
  }
  function clusterCard(c) {
    var card = el("article", { cls: "cluster", id: "cluster-" + c[0] });
    var open = !!state.open[c[0]];
    var toggle = el("button", { type: "button", cls: "cluster-toggle", "aria-expanded": String(open), "aria-controls": "body-" + c[0] });
    toggle.appendChild(el("span", { cls: "cid", text: c[0] }));
    toggle.appendChild(el("span", { text: c[1] + " documents · " + c[2] }));
    toggle.appendChild(el("span", { cls: "keeper" }, ["keep ", el("code", { text: docs[c[3]][0] })]));
    toggle.appendChild(el("span", { text: "retire " + c[4] + " (" + c[5].toLocaleString("en") + " bytes) · lowest similarity " + fmt(c[6]) }));
    var d = decisions[clusterKey(c)];
    toggle.appendChild(el("span", { cls: "badge" + (d ? " decided" : ""), "data-badge": c[0], text: d && d.decision ? DECISION_WORDS[d.decision] : "undecided" }));
    if (c[9]) {
      // A decision remembered by the index from an earlier review.
      var r = c[9];
      var words = "earlier review: " + r.status + (r.decision ? " (" + (DECISION_WORDS[r.decision] || r.decision) + ")" : "") +
        (r.comment ? " — " + r.comment : "") + (r.decided_at ? " · " + r.decided_at : "");
      toggle.appendChild(el("span", { cls: "badge decided", text: words }));
    }
    var heading = el("h3", {}, [toggle]);
    card.appendChild(heading);
    if (open) card.appendChild(clusterBody(c));
    toggle.addEventListener("click", function () {
      state.open[c[0]] = !state.open[c[0]];
      var fresh = clusterCard(c);
      card.replaceWith(fresh);
      fresh.querySelector(".cluster-toggle").focus();
    });
    return card;
  }
  function refreshBadges() {
    document.querySelectorAll("[data-badge]").forEach(function (b) {
      var c = { 0: b.getAttribute("data-badge") };
      var d = decisions[clusterKey(c)];
      b.textContent = d && d.decision ? DECISION_WORDS[d.decision] : "undecided";
      b.className = "badge" + (d ? " decided" : "");
    });
  }

  // ---- the list: filter, sort, page ----
  function visibleClusters() {
    var text = state.text.toLowerCase();
    var out = data.clusters.filter(function (c) {
      if (text && !c[7].some(function (m) { return docs[m[0]][0].toLowerCase().indexOf(text) >= 0; })) return false;
      if (state.decided === "open" && clusterDecided(c)) return false;
      if (state.decided === "done" && !clusterDecided(c)) return false;
      // The slider hides clusters none of whose pairs reach it.
      var best = Math.max.apply(null, c[7].map(function (m) { return m[0] === c[3] ? 0 : memberScore(m); }).concat(c[8].map(function (e) { return e[2]; })));
      return best >= state.threshold;
    });
    var sorters = {
      impact: null,
      size: function (a, b) { return b[1] - a[1] || (a[0] < b[0] ? -1 : 1); },
      low: function (a, b) { return a[6] - b[6] || (a[0] < b[0] ? -1 : 1); },
      high: function (a, b) { return b[6] - a[6] || (a[0] < b[0] ? -1 : 1); },
      id: function (a, b) { return a[0] < b[0] ? -1 : 1; },
    };
    if (sorters[state.sort]) out = out.slice().sort(sorters[state.sort]);
    return out;
  }
  function render() {
    var list = document.getElementById("cluster-list");
    var shown = visibleClusters();
    var pages = Math.max(1, Math.ceil(shown.length / PAGE));
    state.page = Math.min(state.page, pages - 1);
    list.textContent = "";
    shown.slice(state.page * PAGE, (state.page + 1) * PAGE).forEach(function (c) { list.appendChild(clusterCard(c)); });
    document.getElementById("cluster-count").textContent = shown.length + " of " + data.clusters.length + " clusters shown";
    document.getElementById("page-info").textContent = "page " + (state.page + 1) + " of " + pages;
    document.getElementById("prev-page").disabled = state.page === 0;
    document.getElementById("next-page").disabled = state.page >= pages - 1;
  }
  function renderLedger() {
    var rows = document.getElementById("ledger-rows");
    var text = document.getElementById("ledger-filter").value.toLowerCase();
    var status = document.getElementById("ledger-status").value;
    rows.textContent = "";
    var shown = data.skipped.filter(function (e) {
      return (!status || e[2] === status) && (!text || (e[0] + " " + e[1] + " " + e[3]).toLowerCase().indexOf(text) >= 0);
    });
    shown.slice(0, 2000).forEach(function (e) {
      rows.appendChild(el("tr", {}, [el("td", {}, [el("code", { text: e[0] })]), el("td", { text: e[1] }), el("td", { text: e[2] }), el("td", { text: e[3] })]));
    });
    document.getElementById("ledger-count").textContent = shown.length + " of " + data.skipped.length + " entries" + (shown.length > 2000 ? " (first 2,000 listed)" : "");
  }

  document.getElementById("filter-text").addEventListener("input", function (e) { state.text = e.target.value; state.page = 0; render(); });
  document.getElementById("sort").addEventListener("change", function (e) { state.sort = e.target.value; state.page = 0; render(); });
  document.getElementById("decided").addEventListener("change", function (e) { state.decided = e.target.value; state.page = 0; render(); });
  document.getElementById("threshold").addEventListener("input", function (e) {
    state.threshold = Number(e.target.value);
    document.getElementById("threshold-value").textContent = state.threshold.toFixed(2);
    render();
  });
  document.getElementById("prev-page").addEventListener("click", function () { state.page -= 1; render(); });
  document.getElementById("next-page").addEventListener("click", function () { state.page += 1; render(); });
  document.getElementById("ledger-filter").addEventListener("input", renderLedger);
  document.getElementById("ledger-status").addEventListener("change", renderLedger);
  document.getElementById("export-decisions").addEventListener("click", function () {
    var text = JSON.stringify(exportDecisions(), null, 2);
    var area = document.getElementById("decisions-json");
    area.hidden = false;
    area.value = text;
    try {
      var link = el("a", { download: "decisions-" + data.audit_id + ".json" });
      link.href = URL.createObjectURL(new Blob([text], { type: "application/json" }));
      document.body.appendChild(link); link.click(); link.remove();
    } catch (e) { /* the text box still holds the export */ }
  });
  document.getElementById("clear-decisions").addEventListener("click", function () {
    if (window.confirm("Forget all decisions made in this browser for this audit?")) { decisions = {}; saveDecisions(); render(); }
  });

  // Open the first clusters so the page shows results at once.
  data.clusters.slice(0, 3).forEach(function (c) { state.open[c[0]] = true; });
  saveDecisions();
  render();
  renderLedger();
  window.dedupReport = { exportDecisions: exportDecisions };
})();
