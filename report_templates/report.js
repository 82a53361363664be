"use strict";
// dedup audit report. Reads the JSON data block and draws the cluster list a page at a time.
// Cluster details and document texts are packed (deflate, base64) in inert script elements and
// inflated with the browser's own DecompressionStream only when a cluster or a pair is opened.
// Document text is only ever written with textContent / createTextNode, never as markup.
(function () {
  var data = JSON.parse(document.getElementById("audit-data").textContent);
  var names = data.documents;
  var PAGE = 25;          // clusters per page
  var ROWS = 50;          // table rows per page
  var GRAPH_MAX = 40;     // members beyond which a cluster is not drawn as a graph
  var PREVIEW = 160;      // characters of a folded passage shown on its line
  var ONLY_SHOWN = 900;   // characters of a one-side-only block shown before "show all"
  var MAX_EDITS = 400;    // word edits between two fixed points beyond which a stretch counts as rewritten whole
  var SAME_WORDS = 8;     // tokens alike in a row that make their own folded line (fewer join the difference around them)
  var STORE_KEY = "dedup-decisions:" + data.audit_id;
  var DECISIONS = ["confirmed-duplicate", "not-duplicate", "keep-both"];
  var DECISION_WORDS = { "confirmed-duplicate": "confirmed duplicate", "not-duplicate": "not a duplicate", "keep-both": "keep both" };
  var ROLE_ORDER = { "keeper": 0, "exact-copy": 1, "duplicate": 2, "linked-through": 3 };
  var state = { page: 0, text: "", sort: "impact", decided: "all", threshold: data.threshold, open: {}, tables: {}, reading: {} };
  var WORD = /[\p{L}\p{N}]+/gu;
  var uid = 0;

  // ---- small helpers ----
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
  function button(text, cls, onClick, attrs) {
    var b = el("button", Object.assign({ type: "button", cls: cls || "", text: text }, attrs || {}));
    b.addEventListener("click", onClick);
    return b;
  }
  function fmt(x) { return x === null || x === undefined ? "" : Number(x).toFixed(3); }
  function pct(x) { return Math.round(x * 100) + "%"; }
  function num(x) { return Number(x).toLocaleString("en"); }
  function words(n) { return num(n) + (n === 1 ? " word" : " words"); }
  function countWords(s) { var m = s.match(WORD); return m ? m.length : 0; }
  function nextId(prefix) { uid += 1; return prefix + "-" + uid; }

  // ---- packed blobs: inflated on first use, kept ----
  function inflate(n) {
    return new Promise(function (resolve) {
      if (typeof DecompressionStream === "undefined") throw new Error("this browser cannot unpack the report's texts (no DecompressionStream); open it in a current browser");
      var bin = atob(document.getElementById("blob-" + n).textContent);
      var bytes = new Uint8Array(bin.length);
      for (var i = 0; i < bin.length; i++) bytes[i] = bin.charCodeAt(i);
      var stream = new Blob([bytes]).stream().pipeThrough(new DecompressionStream("deflate"));
      resolve(new Response(stream).text());
    });
  }
  var parsed = {};
  function blobJson(n) {
    if (!parsed[n]) parsed[n] = inflate(n).then(JSON.parse);
    return parsed[n];
  }
  // A text blob: a header line [first document, piece size, [[code points, UTF-16 units of each
  // piece or null], ...]], then the texts in pieces taken in rounds (first piece of each, then
  // the second...). Rebuilt into document index -> text.
  var rebuilt = {};
  function blobTexts(n) {
    if (!rebuilt[n]) {
      rebuilt[n] = inflate(n).then(function (body) {
        var at = body.indexOf("\n"), head = JSON.parse(body.slice(0, at));
        var first = head[0], piece = head[1], layout = head[2];
        var parts = layout.map(function () { return []; }), pos = at + 1;
        for (var r = 0; ; r++) {
          var more = false;
          for (var j = 0; j < layout.length; j++) {
            var cp = layout[j][0];
            if (r * piece >= cp) continue;
            more = true;
            var units = layout[j][1] ? layout[j][1][r] : Math.min(piece, cp - r * piece);
            parts[j].push(body.slice(pos, pos + units));
            pos += units;
          }
          if (!more) break;
        }
        var texts = {};
        parts.forEach(function (p, j) { texts[first + j] = p.join(""); });
        return texts;
      });
    }
    return rebuilt[n];
  }
  // Documents whose cluster details are loaded: index -> [bytes, content_hash, characters, cut, text blob].
  var docMeta = {};
  function clusterDetail(c) {
    return blobJson(c[9]).then(function (list) {
      var detail = list[c[10]];
      detail.docs.forEach(function (d, k) { docMeta[c[3] + k] = d; });
      return detail;
    });
  }
  function docText(i) {
    return blobTexts(docMeta[i][4]).then(function (texts) { return texts[i]; });
  }
  function clusterOfDoc(i) {
    var lo = 0, hi = data.clusters.length - 1;
    while (lo < hi) {
      var mid = (lo + hi + 1) >> 1;
      if (data.clusters[mid][3] <= i) lo = mid; else hi = mid - 1;
    }
    return data.clusters[lo];
  }

  // ---- decisions (localStorage, keyed by audit id) ----
  var decisions = {};
  try { decisions = JSON.parse(window.localStorage.getItem(STORE_KEY) || "{}") || {}; } catch (e) { decisions = {}; }
  function saveDecisions() {
    try { window.localStorage.setItem(STORE_KEY, JSON.stringify(decisions)); } catch (e) { /* private mode: kept in memory */ }
    document.getElementById("decision-count").textContent = String(Object.keys(decisions).length);
  }
  function clusterKey(c) { return "cluster:" + c[0]; }
  function pairKey(a, b) { var x = names[a], y = names[b]; return "pair:" + (x < y ? x + "\u0000" + y : y + "\u0000" + x); }
  function docRef(i) { return { id: names[i], content_hash: docMeta[i] ? docMeta[i][1] : null }; }
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
    var name = "d-" + nextId("k");
    var comment = el("textarea", { placeholder: "comment (optional)", "aria-label": label + ": comment" });
    DECISIONS.forEach(function (value) {
      var input = el("input", { type: "radio", name: name, value: value });
      if (current.decision === value) input.checked = true;
      input.addEventListener("change", function () { setDecision(key, value, comment.value, subject); refreshBadges(); });
      fs.appendChild(el("label", {}, [input, " " + DECISION_WORDS[value]]));
    });
    comment.value = current.comment || "";
    comment.addEventListener("change", function () {
      var chosen = box.querySelector("input:checked");
      setDecision(key, chosen ? chosen.value : null, comment.value, subject);
      refreshBadges();
    });
    var clear = button("clear", "", function () {
      box.querySelectorAll("input").forEach(function (i) { i.checked = false; });
      comment.value = "";
      setDecision(key, null, "", subject);
      refreshBadges();
    }, { "aria-label": label + ": clear" });
    box.appendChild(fs); box.appendChild(comment); box.appendChild(clear);
    return box;
  }

  // ---- a table drawn a page at a time, sortable by its columns that have a sort key ----
  // opts: label, rows, columns [{label, sort(row), cell(row) -> node or text, num, desc}], memo
  // (kept between redraws: sort, desc, page, text), filter(row, text), rowClass(row).
  function pagedTable(opts) {
    var memo = opts.memo;
    var box = el("div", { cls: "paged" });
    var order = null;
    var tbody = el("tbody");
    var headRow = el("tr");
    var heads = opts.columns.map(function (col, k) {
      var th = el("th", { scope: "col", cls: col.num ? "num" : "" });
      if (col.sort) {
        th.appendChild(button(col.label, "sort", function () {
          if (memo.sort === k) memo.desc = !memo.desc; else { memo.sort = k; memo.desc = !!col.desc; }
          memo.page = 0; order = null; draw(true);
        }));
      } else th.textContent = col.label;
      headRow.appendChild(th);
      return th;
    });
    if (opts.filter && opts.rows.length > ROWS) {
      var find = el("input", { type: "search", autocomplete: "off", "aria-label": "Find in " + opts.label });
      find.value = memo.text || "";
      find.addEventListener("input", function () { memo.text = find.value; memo.page = 0; order = null; draw(false); });
      box.appendChild(el("div", { cls: "table-tools" }, [el("label", {}, ["Find ", find])]));
    }
    var table = el("table", { "aria-label": opts.label }, [el("thead", {}, [headRow]), tbody]);
    box.appendChild(el("div", { cls: "table-scroll" }, [table]));
    var info = el("span", { "aria-live": "polite" });
    var prev = button("Previous rows", "", function () { memo.page -= 1; draw(false); });
    var next = button("Next rows", "", function () { memo.page += 1; draw(false); });
    var pager = el("nav", { cls: "pager", "aria-label": opts.label + ": pages" }, [prev, info, next]);
    box.appendChild(pager);
    function sorted() {
      var text = (memo.text || "").toLowerCase();
      var rows = text ? opts.rows.filter(function (r) { return opts.filter(r, text); }) : opts.rows.slice();
      var col = opts.columns[memo.sort];
      if (!col || !col.sort) return rows;
      var keyed = rows.map(function (r, i) { return [col.sort(r), i, r]; });
      var sign = memo.desc ? -1 : 1;
      keyed.sort(function (x, y) {
        if (x[0] === y[0]) return x[1] - y[1];
        if (x[0] === null || x[0] === undefined) return 1;
        if (y[0] === null || y[0] === undefined) return -1;
        return (x[0] < y[0] ? -1 : 1) * sign;
      });
      return keyed.map(function (k) { return k[2]; });
    }
    function draw(focusSort) {
      if (!order) order = sorted();
      var pages = Math.max(1, Math.ceil(order.length / ROWS));
      memo.page = Math.max(0, Math.min(memo.page, pages - 1));
      tbody.textContent = "";
      order.slice(memo.page * ROWS, (memo.page + 1) * ROWS).forEach(function (r) {
        var tr = el("tr", { cls: opts.rowClass ? opts.rowClass(r) : "" });
        opts.columns.forEach(function (col) {
          var v = col.cell(r);
          tr.appendChild(el("td", { cls: col.num ? "num" : "" }, [v === null || v === undefined ? "" : (typeof v === "object" ? v : String(v))]));
        });
        tbody.appendChild(tr);
      });
      heads.forEach(function (th, k) {
        if (opts.columns[k].sort) th.setAttribute("aria-sort", memo.sort === k ? (memo.desc ? "descending" : "ascending") : "none");
      });
      var from = order.length ? memo.page * ROWS + 1 : 0;
      info.textContent = "rows " + num(from) + "–" + num(Math.min(order.length, (memo.page + 1) * ROWS)) + " of " + num(order.length);
      prev.disabled = memo.page === 0;
      next.disabled = memo.page >= pages - 1;
      pager.hidden = order.length <= ROWS && !memo.text;
      if (focusSort && heads[memo.sort]) heads[memo.sort].querySelector("button").focus();
    }
    draw(false);
    return box;
  }

  // ---- cluster graph (small clusters): documents as nodes, pairs as edges ----
  function clusterGraph(c, detail) {
    var n = c[1], first = c[3];
    var size = 220, r = 80, cx = size / 2, cy = size / 2;
    var svg = svgEl("svg", { viewBox: "0 0 " + size + " " + size, width: size, height: size, role: "img",
      "aria-label": "Graph of cluster " + c[0] + ": " + n + " documents, " + detail.pairs.length + " pairs" });
    var title = svgEl("title"); title.textContent = "Cluster " + c[0] + ": thicker lines are more similar pairs; the ringed node is the keeper";
    svg.appendChild(title);
    function at(i) {
      var k = i - first, angle = -Math.PI / 2 + (2 * Math.PI * k) / n;
      return n === 1 ? [cx, cy] : [cx + r * Math.cos(angle), cy + r * Math.sin(angle)];
    }
    detail.pairs.forEach(function (p) {
      var w = 1 + 6 * Math.max(0, ((p[3] === null ? 1 : p[3]) - data.threshold) / Math.max(1e-9, 1 - data.threshold));
      var a = at(p[0]), b = at(p[1]);
      var line = svgEl("line", { x1: a[0], y1: a[1], x2: b[0], y2: b[1], stroke: p[2] === "exact" ? "#2f5d7c" : "#8c9aa5",
        "stroke-width": w.toFixed(1), "stroke-linecap": "round" });
      if (p[3] !== null && p[3] < state.threshold) line.setAttribute("stroke-opacity", "0.15");
      var t = svgEl("title"); t.textContent = names[p[0]] + " ↔ " + names[p[1]] + ": " + fmt(p[3]);
      line.appendChild(t);
      svg.appendChild(line);
    });
    detail.members.forEach(function (m, k) {
      var p = at(first + k), keeper = k === 0;
      var node = svgEl("circle", { cx: p[0], cy: p[1], r: keeper ? 9 : 6,
        fill: m[0] === "linked-through" ? "#ffffff" : (keeper ? "#ffffff" : "#2f5d7c"),
        stroke: "#1f2a33", "stroke-width": keeper ? 3 : 1, "stroke-dasharray": m[0] === "linked-through" ? "2 2" : "none" });
      var t = svgEl("title"); t.textContent = names[first + k] + " (" + m[0] + ")";
      node.appendChild(t);
      svg.appendChild(node);
      var label = svgEl("text", { x: p[0], y: p[1] - 11, "font-size": "10", "text-anchor": "middle", fill: "#1f2a33" });
      label.textContent = String(k + 1);
      svg.appendChild(label);
    });
    return el("figure", { cls: "graph" }, [svg, el("figcaption", { cls: "aid", text: "Numbers follow the # column. Ringed: keeper. Dashed: linked through another member." })]);
  }

  // ---- one cluster: members and pairs as paged tables, a pair read on demand ----
  function memberScore(m) { return m[5] === null ? 1 : m[5]; }
  function memberTable(c, detail, openPair) {
    var first = c[3];
    var rows = detail.members.map(function (m, k) { return k; });
    function m(k) { return detail.members[k]; }
    var memo = state.tables[c[0] + ":members"] || (state.tables[c[0] + ":members"] = { sort: 0, desc: false, page: 0, text: "" });
    var columns = [
      { label: "#", num: true, sort: function (k) { return k; }, cell: function (k) { return k + 1; } },
      { label: "Document", sort: function (k) { return names[first + k]; }, cell: function (k) { return el("code", { text: names[first + k] }); } },
      { label: "Role", sort: function (k) { return ROLE_ORDER[m(k)[0]] === undefined ? 9 : ROLE_ORDER[m(k)[0]]; }, cell: function (k) {
        var cell = el("span", { cls: "role-" + m(k)[0], text: m(k)[0] });
        if (m(k)[6] >= 0) return el("span", {}, [cell, el("span", { cls: "reason" }, [" via ", el("code", { text: names[m(k)[6]] })])]);
        return cell;
      } },
      { label: "Size (bytes)", num: true, desc: true, sort: function (k) { return detail.docs[k][0]; }, cell: function (k) { return num(detail.docs[k][0]); } },
      { label: "Score", num: true, desc: true, sort: function (k) { return m(k)[5]; }, cell: function (k) { return fmt(m(k)[5]); } },
      { label: "Jaccard", num: true, desc: true, sort: function (k) { return m(k)[1]; }, cell: function (k) { return fmt(m(k)[1]); } },
      { label: "In keeper", num: true, desc: true, sort: function (k) { return m(k)[2]; }, cell: function (k) { return fmt(m(k)[2]); } },
      { label: "Keeper in it", num: true, desc: true, sort: function (k) { return m(k)[3]; }, cell: function (k) { return fmt(m(k)[3]); } },
      { label: "Cosine", num: true, desc: true, sort: function (k) { return m(k)[4]; }, cell: function (k) { return fmt(m(k)[4]); } },
      { label: "Proposed action", sort: function (k) { return m(k)[7]; }, cell: function (k) {
        return el("span", {}, [el("strong", { text: m(k)[7] }), el("span", { cls: "reason", text: m(k)[8] })]);
      } },
      { label: "Read", cell: function (k) {
        if (k === 0 || m(k)[9] < 0) return "";
        return button("Read with keeper", "evidence-open", function () { openPair(m(k)[9], first + k); },
          { "aria-label": "Read " + names[first + k] + " with the keeper" });
      } },
    ];
    return pagedTable({ label: "members of " + c[0], rows: rows, columns: columns, memo: memo,
      filter: function (k, text) { return names[first + k].toLowerCase().indexOf(text) >= 0; },
      rowClass: function (k) { return k > 0 && memberScore(m(k)) < state.threshold ? "below" : ""; } });
  }
  function pairTable(c, detail, openPair) {
    var rows = detail.pairs.map(function (p, k) { return k; });
    function p(k) { return detail.pairs[k]; }
    var memo = state.tables[c[0] + ":pairs"] || (state.tables[c[0] + ":pairs"] = { sort: 3, desc: true, page: 0, text: "" });
    function count(k) { return p(k)[6] === null ? null : p(k)[6].length / 7; }
    var columns = [
      { label: "A", sort: function (k) { return names[p(k)[0]]; }, cell: function (k) { return el("code", { text: names[p(k)[0]] }); } },
      { label: "B", sort: function (k) { return names[p(k)[1]]; }, cell: function (k) { return el("code", { text: names[p(k)[1]] }); } },
      { label: "Kind", sort: function (k) { return p(k)[2]; }, cell: function (k) { return p(k)[2]; } },
      { label: "Score", num: true, desc: true, sort: function (k) { return p(k)[3]; }, cell: function (k) { return fmt(p(k)[3]); } },
      { label: "A covered", num: true, desc: true, sort: function (k) { return p(k)[4]; }, cell: function (k) { return p(k)[4] === null ? "" : pct(p(k)[4]); } },
      { label: "B covered", num: true, desc: true, sort: function (k) { return p(k)[5]; }, cell: function (k) { return p(k)[5] === null ? "" : pct(p(k)[5]); } },
      { label: "Whole texts", num: true, desc: true, sort: function (k) { return p(k)[7]; }, cell: function (k) { return p(k)[7] === null || p(k)[7] === undefined ? "" : fmt(p(k)[7]); } },
      { label: "Passages", num: true, desc: true, sort: count, cell: function (k) { return count(k) === null ? "" : count(k); } },
      { label: "Read", cell: function (k) {
        return button("Read", "evidence-open", function () { openPair(k); }, { "aria-label": "Read " + names[p(k)[0]] + " with " + names[p(k)[1]] });
      } },
    ];
    return pagedTable({ label: "pairs of " + c[0], rows: rows, columns: columns, memo: memo,
      filter: function (k, text) { return (names[p(k)[0]] + " " + names[p(k)[1]]).toLowerCase().indexOf(text) >= 0; },
      rowClass: function (k) { return p(k)[3] !== null && p(k)[3] < state.threshold ? "below" : ""; } });
  }
  function pairsSection(c, detail, openPair) {
    var n = detail.pairs.length, memoKey = c[0] + ":pairs-shown";
    var main = el("div", { cls: "pairs-main" }, [el("h4", { text: "Pairs (" + num(n) + ")" }),
      el("p", { cls: "aid", text: "Every member's pair with the keeper, and the cluster's other verified pairs" +
        (data.passages.other_pairs_left_out ? " (some clusters' other pairs are left out of this report; pairs.csv lists them all)" : "") + "." })]);
    var slot = el("div");
    function label() { return "List the " + num(n) + (n === 1 ? " pair" : " pairs"); }
    function show(open) {
      slot.textContent = "";
      if (open) slot.appendChild(pairTable(c, detail, openPair));
      toggle.setAttribute("aria-expanded", String(open));
      toggle.textContent = open ? "Hide the pairs" : label();
    }
    var toggle = button(label(), "", function () { state.tables[memoKey] = !state.tables[memoKey]; show(state.tables[memoKey]); },
      { "aria-expanded": "false" });
    main.appendChild(toggle);
    main.appendChild(slot);
    if (state.tables[memoKey]) show(true);
    var box = el("div", { cls: "pairs" });
    if (c[1] <= GRAPH_MAX) box.appendChild(clusterGraph(c, detail));
    box.appendChild(main);
    return box;
  }
  function fillCluster(body, c, detail) {
    body.textContent = "";
    body.removeAttribute("aria-busy");
    var readingSlot = el("div", { cls: "reading-slot" });
    function openPair(k, aDoc) {
      state.reading[c[0]] = [k, aDoc];
      readingSlot.textContent = "";
      var view = readingView(c, detail, k, aDoc, function () { delete state.reading[c[0]]; readingSlot.textContent = ""; });
      readingSlot.appendChild(view);
      view.scrollIntoView({ block: "start" });
      view.querySelector("h4").focus();
    }
    var keeper = names[c[3]];
    body.appendChild(el("p", { cls: "aid" }, [num(c[1]) + " documents. Scores are each member's against the keeper ",
      el("code", { text: keeper }), " (" + data.measure + " decides)."]));
    body.appendChild(el("div", { cls: "members" }, [el("h4", { text: "Members (" + num(c[1]) + ")" }), memberTable(c, detail, openPair)]));
    body.appendChild(pairsSection(c, detail, openPair));
    body.appendChild(decisionControls(clusterKey(c), { kind: "cluster", cluster_id: c[0], documents: detail.members.map(function (m, k) { return docRef(c[3] + k); }) }, "Decision on this cluster"));
    body.appendChild(readingSlot);
    var again = state.reading[c[0]];
    if (again) readingSlot.appendChild(readingView(c, detail, again[0], again[1], function () { delete state.reading[c[0]]; readingSlot.textContent = ""; }));
  }
  function clusterBody(c) {
    var body = el("div", { cls: "cluster-body", id: "body-" + c[0], "aria-busy": "true" }, [el("p", { cls: "aid", text: "Unpacking this cluster…" })]);
    clusterDetail(c).then(function (detail) { fillCluster(body, c, detail); }, function (err) {
      body.textContent = "";
      body.appendChild(el("p", { cls: "warning", text: "This cluster could not be unpacked: " + err.message }));
    });
    return body;
  }

  // ---- reading a pair: the two texts walked in order ----
  // Passages arrive as code point offsets; the browser indexes UTF-16 units.
  function unitMap(text) {
    if (!/[\uD800-\uDFFF]/.test(text)) return null;
    var map = [];
    for (var i = 0; i < text.length; i++) {
      map.push(i);
      var c = text.charCodeAt(i);
      if (c >= 0xD800 && c <= 0xDBFF && i + 1 < text.length) {
        var d = text.charCodeAt(i + 1);
        if (d >= 0xDC00 && d <= 0xDFFF) i += 1;
      }
    }
    map.push(text.length);
    return map;
  }
  function toUnits(map, cp, length) { return map ? map[Math.min(cp, map.length - 1)] : Math.min(cp, length); }
  // The pair's passages as objects, A first: {as, ae, bs, be, sim, moved}.
  function passagesOf(flat, flip, ta, tb) {
    var ma = unitMap(ta), mb = unitMap(tb), out = [];
    for (var i = 0; i + 6 < flat.length; i += 7) {
      var a0 = flat[i], a1 = flat[i + 1], b0 = flat[i + 2], b1 = flat[i + 3];
      if (flip) { var t0 = a0, t1 = a1; a0 = b0; a1 = b1; b0 = t0; b1 = t1; }
      out.push({ as: toUnits(ma, a0, ta.length), ae: toUnits(ma, a1, ta.length), bs: toUnits(mb, b0, tb.length), be: toUnits(mb, b1, tb.length),
                 sim: flat[i + 5] / 1000, moved: flat[i + 6] === 1 });
    }
    return out;
  }

  // ---- word differences inside a passage ----
  // Tokens: a word (or run of punctuation) with the spaces after it. Compared on their letters
  // and digits, case folded, as the audit compares words.
  function tokenize(s, base) {
    var out = { text: [], start: [], key: [] }, re = /\s+|[^\s]+\s*/g, m;
    while ((m = re.exec(s)) !== null) {
      out.text.push(m[0]);
      out.start.push(base + m.index);
      var k = m[0].normalize("NFKC").toLowerCase().replace(/[^\p{L}\p{N}]+/gu, "");
      out.key.push(k || m[0].trim());
    }
    return out;
  }
  // Myers' O(ND) difference of x and y; null beyond MAX_EDITS edits.
  function myers(x, y) {
    var n = x.length, m = y.length, max = Math.min(MAX_EDITS, n + m), off = max + 1;
    var v = new Int32Array(2 * max + 3), trace = [];
    for (var d = 0; d <= max; d++) {
      trace.push(v.slice(off - d - 1, off + d + 2));
      for (var k = -d; k <= d; k += 2) {
        var i = (k === -d || (k !== d && v[off + k - 1] < v[off + k + 1])) ? v[off + k + 1] : v[off + k - 1] + 1;
        var j = i - k;
        while (i < n && j < m && x[i] === y[j]) { i++; j++; }
        v[off + k] = i;
        if (i >= n && j >= m) return myersPath(trace, n, m);
      }
    }
    return null;
  }
  function myersPath(trace, n, m) {
    // trace[d] holds v[-d-1 .. d+1] as it was before step d.
    var ops = [], i = n, j = m;
    for (var d = trace.length - 1; d >= 0; d--) {
      var v = trace[d], at = function (k) { return v[k + d + 1]; }, k = i - j;
      var pk = (k === -d || (k !== d && at(k - 1) < at(k + 1))) ? k + 1 : k - 1;
      var pi = d === 0 ? 0 : at(pk), pj = pi - pk;
      while (i > pi && j > pj) { ops.push(["=", i - 1, j - 1]); i--; j--; }
      if (d > 0) { if (i === pi) ops.push(["b", j - 1]); else ops.push(["a", i - 1]); }
      i = pi; j = pj;
    }
    return ops.reverse();
  }
  // Tokens found once in each range, paired, the longest run of pairs in the same order in
  // both (patience sorting): fixed points that split a long difference into short ones.
  function anchors(x, x0, x1, y, y0, y1) {
    var count = new Map(), i, j;
    for (i = x0; i < x1; i++) { var c = count.get(x[i]); count.set(x[i], c ? [c[0] + 1, c[1], i] : [1, 0, i]); }
    var pairs = [];
    for (j = y0; j < y1; j++) { var e = count.get(y[j]); if (e) { e[1] += 1; e[3] = j; } }
    count.forEach(function (e) { if (e[0] === 1 && e[1] === 1) pairs.push([e[2], e[3]]); });
    pairs.sort(function (p, q) { return p[0] - q[0]; });
    var tails = [], back = new Array(pairs.length);
    pairs.forEach(function (p, n) {
      var lo = 0, hi = tails.length;
      while (lo < hi) { var mid = (lo + hi) >> 1; if (pairs[tails[mid]][1] < p[1]) lo = mid + 1; else hi = mid; }
      back[n] = lo > 0 ? tails[lo - 1] : -1;
      tails[lo] = n;
    });
    var out = [];
    for (var t = tails.length ? tails[tails.length - 1] : -1; t >= 0; t = back[t]) out.push(pairs[t]);
    return out.reverse();
  }
  function diffRange(x, x0, x1, y, y0, y1, ops, depth) {
    while (x0 < x1 && y0 < y1 && x[x0] === y[y0]) ops.push(["=", x0++, y0++]);
    var tail = [];
    while (x1 > x0 && y1 > y0 && x[x1 - 1] === y[y1 - 1]) tail.push(["=", --x1, --y1]);
    var i, j;
    if (x0 < x1 || y0 < y1) {
      var fixed = x0 < x1 && y0 < y1 && depth < 6 ? anchors(x, x0, x1, y, y0, y1) : [];
      if (fixed.length) {
        var px = x0, py = y0;
        fixed.forEach(function (f) { diffRange(x, px, f[0], y, py, f[1], ops, depth + 1); ops.push(["=", f[0], f[1]]); px = f[0] + 1; py = f[1] + 1; });
        diffRange(x, px, x1, y, py, y1, ops, depth + 1);
      } else {
        var path = myers(x.slice(x0, x1), y.slice(y0, y1));
        if (path) path.forEach(function (o) { ops.push(o[0] === "=" ? ["=", x0 + o[1], y0 + o[2]] : o[0] === "a" ? ["a", x0 + o[1]] : ["b", y0 + o[1]]); });
        else { for (i = x0; i < x1; i++) ops.push(["a", i]); for (j = y0; j < y1; j++) ops.push(["b", j]); }
      }
    }
    for (var t = tail.length - 1; t >= 0; t--) ops.push(tail[t]);
  }
  // A passage cut into stretches: "both" where the two texts run alike for SAME_WORDS tokens or
  // more, otherwise "reworded", "only" A or "only" B, each with its pieces ([op, A text, B text]).
  function segmentsOf(p, ta, tb) {
    var x = tokenize(ta.slice(p.as, p.ae), p.as), y = tokenize(tb.slice(p.bs, p.be), p.bs), ops = [];
    diffRange(x.key, 0, x.key.length, y.key, 0, y.key.length, ops, 0);
    var runs = [];
    ops.forEach(function (o) {
      var same = o[0] === "=", last = runs[runs.length - 1];
      if (last && last.same === same) last.ops.push(o); else runs.push({ same: same, ops: [o] });
    });
    // A short alike run next to a difference reads as part of it.
    if (runs.length > 1) runs.forEach(function (r) { if (r.same && r.ops.length < SAME_WORDS) r.same = false; });
    var merged = [];
    runs.forEach(function (r) {
      var last = merged[merged.length - 1];
      if (last && last.same === r.same) last.ops = last.ops.concat(r.ops); else merged.push({ same: r.same, ops: r.ops });
    });
    return merged.map(function (r) { return segment(r, x, y); });
  }
  function segment(r, x, y) {
    var s = { kind: "both", pieces: [], as: Infinity, ae: -1, bs: Infinity, be: -1, aWords: 0, bWords: 0, aOnly: 0, bOnly: 0 };
    r.ops.forEach(function (o) {
      var at = o[0] === "b" ? null : x.text[o[1]], bt = o[0] === "a" ? null : y.text[o[0] === "=" ? o[2] : o[1]];
      if (at !== null) { var i = o[1]; s.as = Math.min(s.as, x.start[i]); s.ae = Math.max(s.ae, x.start[i] + at.length); var na = countWords(at); s.aWords += na; if (o[0] === "a") s.aOnly += na; }
      if (bt !== null) { var j = o[0] === "=" ? o[2] : o[1]; s.bs = Math.min(s.bs, y.start[j]); s.be = Math.max(s.be, y.start[j] + bt.length); var nb = countWords(bt); s.bWords += nb; if (o[0] === "b") s.bOnly += nb; }
      var last = s.pieces[s.pieces.length - 1];
      if (last && last[0] === o[0]) { if (at !== null) last[1] += at; if (bt !== null) last[2] += bt; }
      else s.pieces.push([o[0], at || "", bt || ""]);
    });
    if (!r.same) s.kind = s.aOnly && s.bOnly ? "reworded" : s.aOnly ? "only-a" : s.bOnly ? "only-b" : "both";
    return s;
  }

  // The walk: main passages in order of A (demoted to moved if out of order in B), and between
  // two of them what only A has, then what only B has, with any moved passage in its place.
  function walk(ta, tb, passages) {
    var main = passages.filter(function (p) { return !p.moved; }).sort(function (x, y) { return x.as - y.as; });
    var chain = [], lastB = 0;
    main.forEach(function (p) { if (p.bs >= lastB) { chain.push(p); lastB = p.be; } else p.moved = true; });
    var moved = passages.filter(function (p) { return p.moved; });
    moved.forEach(function (p, i) { p.n = i + 1; });
    var movedA = moved.slice().sort(function (x, y) { return x.as - y.as; });
    var movedB = moved.slice().sort(function (x, y) { return x.bs - y.bs; });
    var blocks = [], posA = 0, posB = 0;
    function gap(side, text, from, to, list) {
      var pos = from;
      list.forEach(function (p) {
        var s = Math.max(side === "a" ? p.as : p.bs, pos), e = Math.min(side === "a" ? p.ae : p.be, to);
        if (e <= s) return;
        if (s > pos && countWords(text.slice(pos, s))) blocks.push({ kind: "only-" + side, start: pos, end: s });
        blocks.push({ kind: "moved", side: side, start: s, end: e, p: p });
        pos = e;
      });
      if (to > pos && countWords(text.slice(pos, to))) blocks.push({ kind: "only-" + side, start: pos, end: to });
    }
    chain.forEach(function (p, i) {
      gap("a", ta, posA, p.as, movedA);
      gap("b", tb, posB, p.bs, movedB);
      p.n = i + 1;
      segmentsOf(p, ta, tb).forEach(function (s) { s.p = p; blocks.push(s); });
      posA = Math.max(posA, p.ae); posB = Math.max(posB, p.be);
    });
    gap("a", ta, posA, ta.length, movedA);
    gap("b", tb, posB, tb.length, movedB);
    return { blocks: blocks, chain: chain, moved: moved };
  }

  function preview(s) {
    var t = s.replace(/\s+/g, " ").trim();
    return t.length > PREVIEW ? t.slice(0, PREVIEW) + "…" : t;
  }
  // The letter of a side; hidden from screen readers where the words next to it name the side already.
  function sideTag(side, hidden) {
    var tag = el("span", { cls: "side-tag side-" + side, text: side.toUpperCase() });
    if (hidden) tag.setAttribute("aria-hidden", "true");
    return tag;
  }
  function textBlock(s) { return el("div", { cls: "doc-text", text: s }); }
  // A long text shown in part, with a button for the rest.
  function shortened(s, words) {
    // The end of the sentence before (". ") and blank lines are not worth a line of their own.
    var shown = s.replace(/^[\s\p{P}]*\n/u, "").replace(/\s+$/, "");
    if (shown.length <= ONLY_SHOWN * 1.3) return [textBlock(shown)];
    var body = textBlock(shown.slice(0, ONLY_SHOWN) + "…");
    var more = button("Show all " + words, "more", function () { body.textContent = shown; more.remove(); });
    return [body, more];
  }
  // One side's wording of a stretch, the words only that side has marked (<mark>: read out as highlighted).
  function wording(side, pieces) {
    var box = el("div", { cls: "doc-text wording" });
    box.appendChild(el("span", { cls: "sr", text: (side === "a" ? "A" : "B") + "'s wording: " }));
    pieces.forEach(function (pc) {
      var text = side === "a" ? pc[1] : pc[2];
      if (!text) return;
      if (pc[0] === "=") box.appendChild(document.createTextNode(text));
      else box.appendChild(el("mark", { cls: "w-" + side, title: "only " + side.toUpperCase() + " has this", text: text }));
    });
    return box;
  }
  // A folded line that opens to its body; build() makes the body on first opening.
  function foldable(box, label, build) {
    var bodyId = nextId("run-body");
    var body = el("div", { cls: "run-body", id: bodyId, hidden: "" });
    var toggle = el("button", { type: "button", cls: "run-toggle", "aria-expanded": "false", "aria-controls": bodyId }, label);
    toggle.addEventListener("click", function () { setOpen(toggle.getAttribute("aria-expanded") !== "true"); });
    function setOpen(open) {
      if (open && !body.firstChild) body.appendChild(build());
      body.hidden = !open;
      toggle.setAttribute("aria-expanded", String(open));
    }
    box.setOpen = setOpen;
    box.appendChild(toggle);
    box.appendChild(body);
    return box;
  }
  function runBox(kind, side, id) {
    var attrs = { cls: "run run-" + kind + (side ? " run-" + side : ""), tabindex: "-1", "data-kind": kind };
    if (id) attrs.id = id;
    return el("div", attrs);
  }
  function bothBlock(s, ta) {
    var sa = ta.slice(s.as, s.ae);
    var box = runBox("both", null, s.id);
    var label = [el("span", { cls: "run-label", text: "In both" }), el("span", { cls: "run-size", text: words(s.aWords) }),
      el("span", { cls: "run-preview", text: preview(sa) })];
    return foldable(box, label, function () { return textBlock(sa); });
  }
  function editBlock(s) {
    var kind = s.kind, box = runBox(kind === "reworded" ? "reworded" : "only", kind === "only-a" ? "a" : kind === "only-b" ? "b" : null);
    var head = el("p", { cls: "run-head" });
    if (kind === "reworded") {
      head.appendChild(el("span", { cls: "run-label", text: "Reworded" }));
      head.appendChild(el("span", { cls: "run-size", text: "A " + words(s.aWords) + ", B " + words(s.bWords) }));
      box.appendChild(head);
      box.appendChild(el("div", { cls: "wordings" }, [
        el("div", { cls: "wording-row" }, [sideTag("a"), wording("a", s.pieces)]),
        el("div", { cls: "wording-row" }, [sideTag("b"), wording("b", s.pieces)]),
      ]));
      return box;
    }
    var side = kind === "only-a" ? "a" : "b";
    head.appendChild(sideTag(side, true));
    head.appendChild(el("span", { cls: "run-label", text: "Only in " + side.toUpperCase() }));
    head.appendChild(el("span", { cls: "run-size", text: words(side === "a" ? s.aOnly : s.bOnly) }));
    box.appendChild(head);
    box.appendChild(wording(side, s.pieces));
    return box;
  }
  function onlyBlock(b, text) {
    var side = b.kind === "only-a" ? "a" : "b", s = text.slice(b.start, b.end), n = countWords(s);
    var box = runBox("only", side);
    box.appendChild(el("p", { cls: "run-head" }, [sideTag(side, true), el("span", { cls: "run-label", text: "Only in " + side.toUpperCase() }), el("span", { cls: "run-size", text: words(n) })]));
    shortened(s, words(n)).forEach(function (node) { box.appendChild(node); });
    return box;
  }
  function movedBlock(b, text, ids) {
    var other = b.side === "a" ? "b" : "a", s = text.slice(b.start, b.end);
    var box = runBox("moved", b.side, ids.moved(b.p, b.side));
    var label = [sideTag(b.side, true), el("span", { cls: "run-label", text: "Moved" }),
      el("span", { cls: "run-size", text: words(countWords(s)) + " · " + b.side.toUpperCase() + " has it here, " + other.toUpperCase() + " in another place" }),
      el("span", { cls: "run-preview", text: preview(s) })];
    foldable(box, label, function () { return textBlock(s); });
    box.appendChild(button("Go to " + other.toUpperCase() + "'s place", "jump", function () {
      var target = document.getElementById(ids.moved(b.p, other));
      if (target) { target.scrollIntoView({ block: "center" }); target.focus(); }
    }, { "aria-label": "Go to where " + other.toUpperCase() + " has this moved passage" }));
    return box;
  }
  function walkSummary(w) {
    var n = { reworded: 0, "only-a": 0, "only-b": 0 };
    w.blocks.forEach(function (b) { if (n[b.kind] !== undefined) n[b.kind] += 1; });
    function say(k, one, many) { return k + " " + (k === 1 ? one : many); }
    return say(w.chain.length, "passage", "passages") + " in both, in the same order; " + say(n.reworded, "place", "places") + " reworded, " +
      say(n["only-a"], "place", "places") + " only A has, " + say(n["only-b"], "place", "places") + " only B has; " + say(w.moved.length, "passage", "passages") + " moved.";
  }
  // "A: 289 of its 306 words (94%) read word for word in B; 306 (100%) lie inside the passages they
  // share." Counted here, on the text shown: words inside passages, and of those the ones not
  // reworded or only on one side (a passage spans small edits, so the two counts differ).
  function coverageLine(side, text, w, i, other) {
    var inside = 0, alike = 0;
    w.chain.concat(w.moved).forEach(function (p) { inside += countWords(side === "a" ? text.slice(p.as, p.ae) : text.slice(p.bs, p.be)); });
    alike = inside;
    w.blocks.forEach(function (b) { if (b.pieces) alike -= side === "a" ? b.aOnly : b.bOnly; });
    var total = countWords(text), meta = docMeta[i];
    function share(n) { return total ? " (" + pct(n / total) + ")" : ""; }
    var line = el("p", { cls: "coverage" }, [sideTag(side), " " + num(alike) + " of its " + words(total) + share(alike) +
      " read word for word in " + other.toUpperCase() + "; " + num(inside) + share(inside) + " lie inside the passages they share."]);
    if (meta[3]) line.appendChild(document.createTextNode(" This report holds its first " + num(data.text_limit) + " of " + num(meta[2]) + " characters; the rest is not shown."));
    return line;
  }
  // A thin bar per text: where in it the text runs alike in both (a click goes to that part of the walk).
  function minimap(side, text, w, ids) {
    var length = Math.max(1, text.length), spans = [];
    var svg = svgEl("svg", { viewBox: "0 0 1000 10", preserveAspectRatio: "none", "class": "minimap", role: "img" });
    svg.appendChild(svgEl("rect", { x: 0, y: 0, width: 1000, height: 10, fill: "#e3e7ea" }));
    function put(s, e, moved, target) {
      var x = (s / length) * 1000, width = Math.max(2, ((e - s) / length) * 1000);
      var rect = svgEl("rect", { x: x.toFixed(1), y: 0, width: width.toFixed(1), height: 10, fill: "#2f5d7c", "fill-opacity": moved ? "0.4" : "1" });
      if (target) rect.setAttribute("data-target", target);
      var t = svgEl("title"); t.textContent = (moved ? "moved passage, " : "alike in both, ") + pct(s / length) + "–" + pct(e / length) + " of " + side.toUpperCase();
      rect.appendChild(t);
      svg.appendChild(rect);
    }
    w.chain.forEach(function (p) { spans.push(pct((side === "a" ? p.as : p.bs) / length) + "–" + pct((side === "a" ? p.ae : p.be) / length)); });
    w.blocks.forEach(function (b) {
      if (b.kind === "both" && b.p) put(side === "a" ? b.as : b.bs, side === "a" ? b.ae : b.be, false, b.id);
    });
    w.moved.forEach(function (p) {
      put(side === "a" ? p.as : p.bs, side === "a" ? p.ae : p.be, true, ids.moved(p, side));
      spans.push(pct((side === "a" ? p.as : p.bs) / length) + "–" + pct((side === "a" ? p.ae : p.be) / length) + " (moved)");
    });
    svg.setAttribute("aria-label", "Where in " + side.toUpperCase() + " the shared passages lie: " + (spans.length ? spans.slice(0, 12).join(", ") + (spans.length > 12 ? " and " + (spans.length - 12) + " more" : "") : "nowhere"));
    svg.addEventListener("click", function (e) {
      var target = e.target.getAttribute && e.target.getAttribute("data-target");
      var block = target && document.getElementById(target);
      if (block) { block.scrollIntoView({ block: "center" }); block.focus(); }
    });
    return el("div", { cls: "minimap-row" }, [sideTag(side), svg]);
  }
  function readingTools(walkBox) {
    function runs() { return Array.prototype.slice.call(walkBox.querySelectorAll(".run")); }
    function step(dir) {
      var all = runs(), diffs = all.filter(function (r) { return r.getAttribute("data-kind") !== "both"; });
      if (!diffs.length) return;
      var here = document.activeElement && document.activeElement.closest ? document.activeElement.closest(".run") : null;
      var at = here ? all.indexOf(here) : -1, target;
      if (dir > 0) target = diffs.filter(function (r) { return all.indexOf(r) > at; })[0] || diffs[0];
      else target = diffs.filter(function (r) { return at < 0 || all.indexOf(r) < at; }).pop() || diffs[diffs.length - 1];
      target.scrollIntoView({ block: "center" });
      target.focus();
    }
    function openAll(open) { runs().forEach(function (r) { if (r.setOpen) r.setOpen(open); }); }
    return el("div", { cls: "reading-tools" }, [
      button("Previous difference", "", function () { step(-1); }),
      button("Next difference", "", function () { step(1); }),
      button("Open all passages", "", function () { openAll(true); }),
      button("Fold all passages", "", function () { openAll(false); }),
    ]);
  }
  // The last few walks, so that redrawing the list (the slider moves) does not diff a pair again.
  var walks = [];
  function walkOf(a, b, ta, tb, passages) {
    var key = a + ":" + b;
    for (var i = 0; i < walks.length; i++) if (walks[i].key === key) return walks[i].w;
    var w = walk(ta, tb, passages);
    walks.unshift({ key: key, w: w });
    walks.length = Math.min(walks.length, 4);
    return w;
  }
  function fillReading(slot, pr, flip, a, b, ta, tb) {
    var flat = pr[6], note = null, passages = [];
    if (flat === null) note = "This report has no passages for this pair; the two texts follow each other whole.";
    else passages = passagesOf(flat, flip, ta, tb);
    if (!passages.length && pr[2] === "exact") {
      passages = [{ as: 0, ae: ta.length, bs: 0, be: tb.length, sim: 1, moved: false }];
      note = "The two texts are the same after normalization (case, spacing and punctuation may differ).";
    } else if (flat !== null && !passages.length) {
      note = "No shared passage long enough to show was found: the score comes from short phrases spread through both texts.";
    }
    var w = walkOf(a, b, ta, tb, passages);
    var pre = nextId("rv");
    var ids = { moved: function (p, side) { return pre + "-m" + p.n + "-" + side; } };
    w.blocks.forEach(function (blk, k) { blk.id = pre + "-" + k; });
    slot.appendChild(coverageLine("a", ta, w, a, "b"));
    slot.appendChild(coverageLine("b", tb, w, b, "a"));
    slot.appendChild(el("div", { cls: "minimaps" }, [minimap("a", ta, w, ids), minimap("b", tb, w, ids)]));
    if (note) slot.appendChild(el("p", { cls: "aid note", text: note }));
    slot.appendChild(el("p", { cls: "aid walk-summary", text: walkSummary(w) }));
    var walkBox = el("div", { cls: "walk", role: "group", "aria-label": "A and B read in order" });
    slot.appendChild(readingTools(walkBox));
    w.blocks.forEach(function (blk) {
      if (blk.kind === "moved") walkBox.appendChild(movedBlock(blk, blk.side === "a" ? ta : tb, ids));
      else if (!blk.p) walkBox.appendChild(onlyBlock(blk, blk.kind === "only-a" ? ta : tb));
      else if (blk.kind === "both") walkBox.appendChild(bothBlock(blk, ta));
      else walkBox.appendChild(editBlock(blk));
    });
    if (!w.blocks.length) walkBox.appendChild(el("p", { cls: "aid", text: "Both texts are empty." }));
    slot.appendChild(walkBox);
  }
  function pairFacts(pr, flip) {
    if (pr[2] === "exact") return "Exact copy: the same text after normalization.";
    var facts = "Pair score " + fmt(pr[3]) + " (" + data.measure + ")";
    var side = flip ? { left: "right", right: "left" }[pr[8]] || pr[8] : pr[8];
    var out = { both: "both texts", left: "text A only", right: "text B only" }[side];
    if (out && pr[7] !== null && pr[7] !== undefined) {
      facts += ", with template lines left out of " + out + "; the whole texts have Jaccard " + fmt(pr[7]);
    }
    return facts + ".";
  }
  function readingView(c, detail, k, aDoc, close) {
    var pr = detail.pairs[k];
    var flip = aDoc !== undefined && aDoc !== null && aDoc === pr[1];
    var a = flip ? pr[1] : pr[0], b = flip ? pr[0] : pr[1];
    var headingId = nextId("reading");
    var box = el("section", { cls: "reading", "aria-labelledby": headingId });
    box.appendChild(el("div", { cls: "reading-head" }, [
      el("h4", { id: headingId, tabindex: "-1", text: "Reading two texts together" }),
      button("Close", "close", close, { "aria-label": "Close the reading of this pair" }),
    ]));
    box.appendChild(el("dl", { cls: "legend" }, [
      el("div", {}, [el("dt", {}, [sideTag("a")]), el("dd", {}, [el("code", { text: names[a] })])]),
      el("div", {}, [el("dt", {}, [sideTag("b")]), el("dd", {}, [el("code", { text: names[b] })])]),
    ]));
    box.appendChild(el("p", { cls: "aid", text: pairFacts(pr, flip) + " A shared passage is evidence to read, not a finding: quotations, templates and common phrasing are shared too." }));
    var slot = el("div", { "aria-busy": "true" }, [el("p", { cls: "aid", text: "Unpacking the two texts…" })]);
    box.appendChild(slot);
    Promise.all([docText(a), docText(b)]).then(function (t) {
      slot.textContent = "";
      slot.removeAttribute("aria-busy");
      fillReading(slot, pr, flip, a, b, t[0], t[1]);
    }, function (err) {
      slot.textContent = "";
      slot.appendChild(el("p", { cls: "warning", text: "The texts could not be unpacked: " + err.message }));
    });
    box.appendChild(decisionControls(pairKey(a, b), { kind: "pair", cluster_id: c[0], documents: [docRef(a), docRef(b)] }, "Decision on this pair"));
    return box;
  }

  // ---- the cluster list: filter, sort, page ----
  function clusterDecided(c) { return !!decisions[clusterKey(c)]; }
  function clusterCard(c) {
    var card = el("article", { cls: "cluster", id: "cluster-" + c[0] });
    var open = !!state.open[c[0]];
    var toggle = el("button", { type: "button", cls: "cluster-toggle", "aria-expanded": String(open), "aria-controls": "body-" + c[0] });
    toggle.appendChild(el("span", { cls: "cid", text: c[0] }));
    toggle.appendChild(el("span", { text: num(c[1]) + " documents · " + c[2] }));
    toggle.appendChild(el("span", { cls: "keeper" }, ["keep ", el("code", { text: names[c[3]] })]));
    toggle.appendChild(el("span", { text: "retire " + num(c[4]) + " (" + num(c[5]) + " bytes) · lowest similarity " + fmt(c[6]) }));
    var d = decisions[clusterKey(c)];
    toggle.appendChild(el("span", { cls: "badge" + (d ? " decided" : ""), "data-badge": c[0], text: d && d.decision ? DECISION_WORDS[d.decision] : "undecided" }));
    if (c[8]) {
      // A decision remembered by the index from an earlier review.
      var r = c[8];
      var said = "earlier review: " + r.status + (r.decision ? " (" + (DECISION_WORDS[r.decision] || r.decision) + ")" : "") +
        (r.comment ? " — " + r.comment : "") + (r.decided_at ? " · " + r.decided_at : "");
      toggle.appendChild(el("span", { cls: "badge decided", text: said }));
    }
    card.appendChild(el("h3", {}, [toggle]));
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
      var d = decisions[clusterKey({ 0: b.getAttribute("data-badge") })];
      b.textContent = d && d.decision ? DECISION_WORDS[d.decision] : "undecided";
      b.className = "badge" + (d ? " decided" : "");
    });
  }
  var lowerNames = null;
  function hasPath(c, text) {
    if (!lowerNames) lowerNames = names.map(function (n) { return n.toLowerCase(); });
    for (var i = c[3]; i < c[3] + c[1]; i++) if (lowerNames[i].indexOf(text) >= 0) return true;
    return false;
  }
  function visibleClusters() {
    var text = state.text.toLowerCase();
    var out = data.clusters.filter(function (c) {
      if (text && !hasPath(c, text)) return false;
      if (state.decided === "open" && clusterDecided(c)) return false;
      if (state.decided === "done" && !clusterDecided(c)) return false;
      return c[7] >= state.threshold;  // the slider hides clusters none of whose pairs reach it
    });
    function byId(a, b) { return a[0] < b[0] ? -1 : 1; }
    var sorters = {
      impact: null,
      size: function (a, b) { return b[1] - a[1] || byId(a, b); },
      low: function (a, b) { return a[6] - b[6] || byId(a, b); },
      high: function (a, b) { return b[6] - a[6] || byId(a, b); },
      id: byId,
    };
    if (sorters[state.sort]) out = out.slice().sort(sorters[state.sort]);
    return out;
  }
  function render() {
    var list = document.getElementById("cluster-list");
    var shown = visibleClusters();
    var pages = Math.max(1, Math.ceil(shown.length / PAGE));
    state.page = Math.max(0, Math.min(state.page, pages - 1));
    list.textContent = "";
    shown.slice(state.page * PAGE, (state.page + 1) * PAGE).forEach(function (c) { list.appendChild(clusterCard(c)); });
    document.getElementById("cluster-count").textContent = num(shown.length) + " of " + num(data.clusters.length) + " clusters shown";
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

  // Open the first cluster so the page shows results at once.
  if (data.clusters.length) state.open[data.clusters[0][0]] = true;
  saveDecisions();
  render();
  renderLedger();
  window.dedupReport = {
    exportDecisions: exportDecisions,
    // The text of a document as this report holds it (for checking the packing), by id.
    documentText: function (id) {
      var i = names.indexOf(id);
      if (i < 0) return Promise.resolve(null);
      return clusterDetail(clusterOfDoc(i)).then(function () { return docText(i); });
    },
  };
})();
