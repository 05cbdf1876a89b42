(function () {
  "use strict";
  // The product index (searched, filtered, sorted here) and each product's
  // detail, drawn from its JSON record only when it is opened. Every text
  // from the data goes into the page as textContent, never as markup.
  var NS = "http://www.w3.org/2000/svg";
  var PAGE = 100;
  var F = { WARNINGS: 1, NOT_FIT: 2, LARGE_BIAS: 4, PINNED: 8, NOT_BACKTESTED: 16, ATTENTION: 32 };
  var C = { ink: "#1f2933", muted: "#5f6b7a", grid: "#e4e7eb", reported: "#9aa0a6", cleaned: "#1b5e8c",
    adjusted: "#e69f00", filled: "#cc79a7", outlier: "#d55e00", fc: "#007a5e" };
  var MONTHS = ["Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec"];

  function el(tag, attrs, text) {
    var e = document.createElement(tag);
    if (attrs) { Object.keys(attrs).forEach(function (k) { e.setAttribute(k, attrs[k]); }); }
    if (text !== undefined && text !== null) { e.textContent = text; }
    return e;
  }
  function fmtQ(v) {
    if (v === null || v === undefined || !isFinite(v)) { return ""; }
    var a = Math.abs(v);
    if (a < 10 && Math.abs(v - Math.round(v)) > 1e-9) {
      return String(Math.round(v * 100) / 100);
    }
    return Math.round(v).toLocaleString("en-US");
  }
  function pct(v) { return v === null || v === undefined ? "" : v.toFixed(1) + "%"; }
  function spct(v) {
    if (v === null || v === undefined) { return ""; }
    if (Math.abs(v) < 0.05) { return "0.0%"; }
    return (v > 0 ? "+" : "") + v.toFixed(1) + "%";
  }
  function pill(cls, text) { return el("span", { "class": "pill " + cls }, text); }

  // ---- sorting of a table built here ------------------------------------
  function sortable(table, onSort) {
    var heads = table.tHead.rows[0].cells;
    Array.prototype.forEach.call(heads, function (th, col) {
      var b = el("button", { type: "button" }, th.textContent);
      th.textContent = "";
      th.appendChild(b);
      b.addEventListener("click", function () {
        var up = th.getAttribute("aria-sort") !== "ascending";
        Array.prototype.forEach.call(heads, function (h) { h.removeAttribute("aria-sort"); });
        th.setAttribute("aria-sort", up ? "ascending" : "descending");
        onSort(col, up, th.classList.contains("num"));
      });
    });
  }
  function cmp(x, y, up) {
    if (x === null && y === null) { return 0; }
    if (x === null) { return 1; }
    if (y === null) { return -1; }
    var c = x < y ? -1 : (x > y ? 1 : 0);
    return up ? c : -c;
  }
  function table(columns, rows, rowClass) {
    var wrap = el("div", { "class": "table-wrap" });
    var t = el("table", { "class": "sortable" });
    var tr = el("tr");
    columns.forEach(function (c) {
      tr.appendChild(el("th", c[1] ? { scope: "col", "class": "num" } : { scope: "col" }, c[0]));
    });
    t.appendChild(el("thead")).appendChild(tr);
    var body = t.appendChild(el("tbody"));
    function fill(list) {
      body.textContent = "";
      list.forEach(function (r) {
        var row = el("tr", rowClass && rowClass(r) ? { "class": rowClass(r) } : null);
        r.forEach(function (v, k) {
          row.appendChild(el("td", columns[k] && columns[k][1] ? { "class": "num" } : null, v));
        });
        body.appendChild(row);
      });
    }
    fill(rows);
    sortable(t, function (col, up, numeric) {
      var key = function (r) {
        var v = r[col];
        if (v === "") { return null; }
        if (numeric) { var n = parseFloat(String(v).replace(/,/g, "")); return isNaN(n) ? null : n; }
        return String(v).toLowerCase();
      };
      fill(rows.slice().sort(function (a, b) { return cmp(key(a), key(b), up); }));
    });
    wrap.appendChild(t);
    return wrap;
  }

  // ---- the chart ----------------------------------------------------------
  function svg(tag, attrs, text) {
    var e = document.createElementNS(NS, tag);
    Object.keys(attrs || {}).forEach(function (k) { e.setAttribute(k, attrs[k]); });
    if (text !== undefined) { e.textContent = text; }
    return e;
  }
  function niceStep(max) {
    var raw = max / 5, p = Math.pow(10, Math.floor(Math.log10(raw))), m = raw / p;
    return (m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10) * p;
  }
  function monthName(c, off) {
    var i = c.y * 12 + (c.m - 1) + off;
    return MONTHS[((i % 12) + 12) % 12] + " " + Math.floor(i / 12);
  }
  function panel(root, c, box, x0, x1, ymax) {
    // box: [left, top, width, height]; returns the scales.
    var step = niceStep(ymax || 1), top = Math.ceil((ymax || 1) / step) * step;
    var sx = function (o) { return box[0] + (o - x0) / Math.max(1, x1 - x0) * box[2]; };
    var sy = function (v) { return box[1] + box[3] - v / top * box[3]; };
    for (var v = 0; v <= top + step / 2; v += step) {
      root.appendChild(svg("line", { x1: box[0], x2: box[0] + box[2], y1: sy(v), y2: sy(v), stroke: C.grid }));
      root.appendChild(svg("text", { x: box[0] - 6, y: sy(v) + 4, "text-anchor": "end", "font-size": 12, fill: C.muted }, fmtQ(v)));
    }
    var span = x1 - x0, every = span > 48 ? 12 : (span > 18 ? 6 : 3);
    for (var o = Math.ceil(x0); o <= x1; o++) {
      var mi = ((c.y * 12 + c.m - 1 + o) % 12 + 12) % 12;
      if (mi % every === 0) {
        root.appendChild(svg("line", { x1: sx(o), x2: sx(o), y1: box[1], y2: box[1] + box[3], stroke: C.grid }));
        root.appendChild(svg("text", { x: sx(o), y: box[1] + box[3] + 16, "text-anchor": "middle", "font-size": 12, fill: C.muted }, monthName(c, o)));
      }
    }
    root.appendChild(svg("rect", { x: box[0], y: box[1], width: box[2], height: box[3], fill: "none", stroke: C.muted }));
    return { x: sx, y: sy };
  }
  function line(root, pts, colour, width, extra) {
    // pts: [x, y] pairs, null breaks the line.
    var d = "", pen = false;
    pts.forEach(function (p) {
      if (!p) { pen = false; return; }
      d += (pen ? "L" : "M") + p[0].toFixed(1) + " " + p[1].toFixed(1);
      pen = true;
    });
    if (d) {
      var a = { d: d, fill: "none", stroke: colour, "stroke-width": width };
      Object.keys(extra || {}).forEach(function (k) { a[k] = extra[k]; });
      root.appendChild(svg("path", a));
    }
  }
  function band(root, s, c, lo, hi, opacity) {
    var up = "", down = "";
    for (var i = 0; i < c.p.length; i++) {
      if (lo[i] === null || hi[i] === null) { continue; }
      up += (up ? "L" : "M") + s.x(c.p0 + i).toFixed(1) + " " + s.y(hi[i]).toFixed(1);
    }
    for (var j = c.p.length - 1; j >= 0; j--) {
      if (lo[j] === null || hi[j] === null) { continue; }
      down += "L" + s.x(c.p0 + j).toFixed(1) + " " + s.y(lo[j]).toFixed(1);
    }
    if (up) { root.appendChild(svg("path", { d: up + down + "Z", fill: C.fc, "fill-opacity": opacity, stroke: "none" })); }
  }
  // A narrow screen (a phone) gets a narrower drawing, so its text is not
  // shrunk to a third when the chart is fitted to the screen's width.
  function chartWidth() {
    var w = document.documentElement.clientWidth || 1200;
    return w < 700 ? 640 : 1200;
  }
  function chart(d) {
    var c = d.chart, W = chartWidth(), narrow = W < 1200;
    var TOP = narrow ? 500 : 470, BOTTOM = c.bt.length ? 300 : 0;
    var root = svg("svg", { viewBox: "0 0 " + W + " " + (TOP + BOTTOM), width: W, height: TOP + BOTTOM, role: "img" });
    root.appendChild(svg("rect", { x: 0, y: 0, width: W, height: TOP + BOTTOM, fill: "#fff" }));
    root.appendChild(svg("text", { x: 20, y: 28, "font-size": 20, "font-weight": 600, fill: C.ink }, d.name));
    if (narrow) {
      // The subtitle in two lines, split between its parts.
      var parts = d.subtitle.split(" · "), half = Math.ceil(parts.length / 2);
      root.appendChild(svg("text", { x: 20, y: 48, "font-size": 13, fill: C.muted }, parts.slice(0, half).join(" · ")));
      root.appendChild(svg("text", { x: 20, y: 66, "font-size": 13, fill: C.muted }, parts.slice(half).join(" · ")));
    } else {
      root.appendChild(svg("text", { x: 20, y: 50, "font-size": 13, fill: C.muted }, d.subtitle));
    }
    var n = c.cl.length, last = Math.max(n - 1, c.p0 + c.p.length - 1, 1);
    var ymax = 0;
    var adj = c.a || [];
    [c.rep, c.cl, c.p, c.u95, c.u80].forEach(function (a) { a.forEach(function (v) { if (v !== null && v > ymax) { ymax = v; } }); });
    adj.forEach(function (a) { if (a[1] > ymax) { ymax = a[1]; } });
    var s = narrow ? panel(root, c, [70, 84, W - 90, TOP - 162], 0, last, ymax)
      : panel(root, c, [90, 70, W - 120, TOP - 130], 0, last, ymax);
    band(root, s, c, c.l95, c.u95, 0.12);
    band(root, s, c, c.l80, c.u80, 0.25);
    var pt = function (arr, i0) { return arr.map(function (v, i) { return v === null ? null : [s.x(i0 + i), s.y(v)]; }); };
    line(root, pt(c.rep, 0), C.reported, 1.5);
    line(root, pt(c.cl, 0), C.cleaned, 2.2);
    for (var i = 0; i < n; i++) {
      if (c.cl[i] === null) { continue; }
      var x = s.x(i), y = s.y(c.cl[i]), k = c.st.charAt(i);
      if (k === "a") { root.appendChild(svg("circle", { cx: x, cy: y, r: 4, fill: C.adjusted })); }
      if (k === "p") { root.appendChild(svg("circle", { cx: x, cy: y, r: 4.5, fill: "#fff", stroke: C.filled, "stroke-width": 2 })); }
      if (k === "i") { root.appendChild(svg("rect", { x: x - 4, y: y - 4, width: 8, height: 8, fill: C.filled })); }
    }
    c.out.forEach(function (o) {
      var v = c.rep[o] !== null ? c.rep[o] : c.cl[o];
      if (v === null) { return; }
      var x = s.x(o), y = s.y(v);
      line(root, [[x - 5, y - 5], [x + 5, y + 5], null, [x - 5, y + 5], [x + 5, y - 5]], C.outlier, 2);
    });
    if (c.p.length) {
      var xs = s.x(c.p0 - 0.5);
      line(root, [[xs, narrow ? 84 : 70], [xs, TOP - (narrow ? 78 : 60)]], C.muted, 1.2, { "stroke-dasharray": "5 4" });
      line(root, pt(c.p, c.p0), C.fc, 2.2);
    }
    // The adjusted forecast (known changes applied): dashed, over the
    // statistical projection and its ranges.
    var DASH = { "stroke-dasharray": "9 5" };
    if (adj.length) {
      line(root, adj.map(function (a) { return [s.x(a[0]), s.y(a[1])]; }), C.outlier, 3, DASH);
    }
    var legend = [["reported", C.reported], ["cleaned", C.cleaned], [c.pl, C.fc]];
    if (adj.length) { legend.push(["adjusted (known changes)", C.outlier, DASH]); }
    var lx = narrow ? 20 : 90, ly = narrow ? TOP - 40 : TOP - 24;
    legend.forEach(function (l) {
      line(root, [[lx, ly - 4], [lx + 22, ly - 4]], l[1], 3, l[2]);
      var t = svg("text", { x: lx + 28, y: ly, "font-size": 12, fill: C.ink }, l[0]);
      root.appendChild(t);
      lx += 40 + 7 * l[0].length;
    });
    var key = narrow ? "dots: changed by cleaning · rings: partly filled · squares: imputed · crosses: outliers"
      : "dots: changed by cleaning beyond the usual · rings: partly filled · squares: imputed · crosses: outliers · shaded: 80% and 95% ranges";
    // The marks' key takes a line of its own when it would not fit (about
    // 6.6 px a character at this size).
    if (lx + 6.6 * key.length > W - 10) { lx = narrow ? 20 : 90; ly += 18; }
    root.appendChild(svg("text", { x: lx, y: ly, "font-size": 12, fill: C.muted }, key));
    if (BOTTOM) {
      var o0 = c.bt[0][0], hmax = 0;
      c.bt.forEach(function (b) { for (var j = 1; j < b[1].length; j += 2) { if (b[1][j] > hmax) { hmax = b[1][j]; } } });
      c.cl.forEach(function (v, j) { if (j >= o0 && v !== null && v > hmax) { hmax = v; } });
      root.appendChild(svg("text", { x: 20, y: TOP + 22, "font-size": 14, "font-weight": 600, fill: C.ink },
        "Backtest: what " + c.btm + " would have forecast from each origin"));
      var b2 = panel(root, c, [narrow ? 70 : 90, TOP + 36, W - (narrow ? 90 : 120), BOTTOM - 80], o0, n - 1, hmax);
      line(root, c.cl.map(function (v, j) { return j < o0 || v === null ? null : [b2.x(j), b2.y(v)]; }), C.cleaned, 2);
      c.bt.forEach(function (b) {
        var pts = [];
        if (b[0] >= 0 && b[0] < n && c.cl[b[0]] !== null) { pts.push([b2.x(b[0]), b2.y(c.cl[b[0]])]); }
        for (var j = 0; j < b[1].length; j += 2) { pts.push([b2.x(b[1][j]), b2.y(b[1][j + 1])]); }
        line(root, pts, C.fc, 1.1, { "stroke-opacity": 0.8 });
        if (pts.length) { root.appendChild(svg("circle", { cx: pts[0][0], cy: pts[0][1], r: 3, fill: C.fc })); }
      });
    }
    return root;
  }

  // ---- one product's detail -------------------------------------------
  function record(stem) {
    var node = document.getElementById("d-" + stem);
    if (!node) { return null; }
    try { return JSON.parse(node.textContent); } catch (e) { return null; }
  }
  function detail(d, stem) {
    var sec = el("section", { "class": "product " + d.vc, id: "p-" + stem, "data-product": d.name });
    var h = el("h2", null, d.name + " ");
    h.appendChild(pill(d.vc, d.verdict || "no profile"));
    sec.appendChild(h);
    var p = el("p", null, "Chosen model: ");
    p.appendChild(el("strong", null, d.chosen));
    var rest = "";
    if (d.members) { rest += " (mean of " + d.members + ")"; }
    if (d.pinned) { rest += "; pinned by the user (the backtest would choose " + d.best + ")"; }
    p.appendChild(document.createTextNode(rest + ". " + d.reason));
    sec.appendChild(p);
    var keys = el("div", { "class": "keys" });
    d.keys.forEach(function (k) {
      var box = el("div", { "class": "key" });
      box.appendChild(el("div", { "class": "v" }, k[0]));
      box.appendChild(el("div", { "class": "l" }, k[1]));
      keys.appendChild(box);
    });
    sec.appendChild(keys);
    var fig = el("figure", { "class": "chart", role: "img", "aria-label": "Chart of " + d.name });
    fig.appendChild(chart(d));
    var cap = el("figcaption", null, "Consumption in " + (d.units || "base units") + " per month." + (d.files ? " Files: " : ""));
    if (d.files) {
      cap.appendChild(el("a", { href: "charts/" + stem + ".png" }, "PNG"));
      cap.appendChild(document.createTextNode(", "));
      cap.appendChild(el("a", { href: "charts/" + stem + ".svg" }, "SVG"));
      cap.appendChild(document.createTextNode("."));
    }
    fig.appendChild(cap);
    sec.appendChild(fig);
    sec.appendChild(el("h3", null, "Candidate models"));
    if (d.scores.length) {
      sec.appendChild(el("p", { "class": "note" }, d.pinned
        ? "Ordered by " + d.by + " (the score the backtest's choice is made by; the model used here was pinned); the pinned model is highlighted."
        : "Ordered by " + d.by + " (the score the choice was made by); the chosen model is highlighted."));
      var cols = [["model"], ["status"], ["MAPE", 1], ["bias", 1], ["WAPE", 1], ["MASE", 1], ["RMSE", 1], ["RMSSE", 1],
        ["in 80% range", 1], ["in 95% range", 1], ["forecasts", 1], ["note"]];
      sec.appendChild(table(cols, d.scores, function (r) { return r[0] === d.chosen ? "chosen" : null; }));
    } else {
      sec.appendChild(el("p", { "class": "note" }, "No backtest scores (scores.csv has none for this product)."));
    }
    sec.appendChild(el("h3", null, "Data quality"));
    if (d.quality) {
      var q = el("p");
      q.appendChild(pill(d.vc, d.verdict || "no profile"));
      q.appendChild(document.createTextNode(" — " + d.quality[0]));
      sec.appendChild(q);
      if (d.quality[1].length) {
        var ul = el("ul");
        d.quality[1].forEach(function (r) { ul.appendChild(el("li", null, r)); });
        sec.appendChild(ul);
      }
    } else {
      sec.appendChild(el("p", { "class": "note" }, "No data-quality profile in quality.csv."));
    }
    sec.appendChild(el("h3", null, "Adjustments to the data"));
    if (!d.adj_total) {
      sec.appendChild(el("p", { "class": "note" }, "None: every month is used as reported."));
    } else {
      var det = el("details");
      det.appendChild(el("summary", null, d.adj_total + " adjustment(s): " + d.adj_counts));
      det.appendChild(table([["month"], ["site"], ["rule"], ["before", 1], ["after", 1], ["reason"], ["input line", 1]], d.adj));
      if (d.adj_total > d.adj.length) {
        det.appendChild(el("p", { "class": "note" }, "The " + (d.adj_latest ? "latest " : "first ") + d.adj.length + " of " + d.adj_total + " are listed; adjustments.csv has them all."));
      }
      sec.appendChild(det);
    }
    sec.appendChild(el("h3", null, "Warnings"));
    if (!d.warnings.length) {
      sec.appendChild(el("p", { "class": "note" }, "None."));
    } else {
      var w = el("ul", { "class": "warn" });
      d.warnings.forEach(function (x) { w.appendChild(el("li", null, x)); });
      sec.appendChild(w);
    }
    var back = el("p", { "class": "note" });
    back.appendChild(el("a", { href: "#products" }, "↑ product index"));
    sec.appendChild(back);
    return sec;
  }
  function open(stem, scroll) {
    var have = document.getElementById("p-" + stem);
    if (!have) {
      var d = record(stem), slot = document.getElementById("detail");
      if (!d || !slot) { return false; }
      slot.textContent = "";
      have = detail(d, stem);
      slot.appendChild(have);
    }
    if (scroll) { have.scrollIntoView(); }
    return true;
  }
  function fromHash() {
    var h = decodeURIComponent(location.hash || "");
    if (h.indexOf("#p-") === 0) { open(h.slice(3), true); }
  }

  // ---- the index ------------------------------------------------------
  var data = document.getElementById("index-data");
  var rows = [];
  try { rows = data ? JSON.parse(data.textContent) : []; } catch (e) { rows = []; }
  var q = document.getElementById("find"), verdict = document.getElementById("verdict"),
    attn = document.getElementById("attention-only"), body = document.getElementById("index-body"),
    count = document.getElementById("index-count"), more = document.getElementById("index-more");
  var order = rows.slice(), shown = PAGE, matches = rows;
  // With known changes the index has the adjusted 12-month total (field
  // 11) after the statistical one.
  var adjCol = !!body && body.getAttribute("data-adjusted") === "yes";
  function wanted(r) {
    var text = q ? q.value.trim().toLowerCase() : "";
    if (text && r[0].toLowerCase().indexOf(text) < 0) { return false; }
    var v = verdict ? verdict.value : "";
    if (v && r[2] !== v) { return false; }
    if (attn && attn.checked && !(r[10] & F.ATTENTION)) { return false; }
    return true;
  }
  function renderIndex() {
    if (!body) { return; }
    matches = order.filter(wanted);
    body.textContent = "";
    var frag = document.createDocumentFragment();
    matches.slice(0, shown).forEach(function (r) {
      var tr = el("tr");
      var name = el("td");
      name.appendChild(el("a", { href: "#p-" + r[1] }, r[0]));
      tr.appendChild(name);
      var v = el("td");
      v.appendChild(pill(r[2], r[3] || "no profile"));
      tr.appendChild(v);
      var m = el("td", null, r[4]);
      if (r[10] & F.PINNED) { m.appendChild(document.createTextNode(" ")); m.appendChild(pill("none", "pinned")); }
      if (r[10] & F.NOT_BACKTESTED) { m.appendChild(document.createTextNode(" ")); m.appendChild(pill("none", "not backtested")); }
      if (r[10] & F.WARNINGS) { m.appendChild(document.createTextNode(" ")); m.appendChild(pill("care", "warnings")); }
      tr.appendChild(m);
      var nums = [pct(r[5]), spct(r[6]), fmtQ(r[7]), fmtQ(r[8]), fmtQ(r[9])];
      if (adjCol) { nums.splice(3, 0, fmtQ(r[11])); }
      nums.forEach(function (t) {
        tr.appendChild(el("td", { "class": "num" }, t));
      });
      frag.appendChild(tr);
    });
    body.appendChild(frag);
    if (count) {
      count.textContent = matches.length + " of " + rows.length + " products" +
        (matches.length > shown ? "; the first " + shown + " are listed" : "");
    }
    if (more) { more.hidden = matches.length <= shown; }
  }
  if (body) {
    var fields = adjCol ? [0, 3, 4, 5, 6, 7, 11, 8, 9] : [0, 3, 4, 5, 6, 7, 8, 9];
    var table0 = body.parentNode;
    sortable(table0, function (col, up, numeric) {
      var f = fields[col];
      var key = function (r) {
        var v = r[f];
        if (v === null || v === "") { return null; }
        return numeric ? v : String(v).toLowerCase();
      };
      order = rows.slice().sort(function (a, b) { return cmp(key(a), key(b), up); });
      renderIndex();
    });
    var again = function () { shown = PAGE; renderIndex(); };
    if (q) { q.addEventListener("input", again); }
    if (verdict) { verdict.addEventListener("change", again); }
    if (attn) { attn.addEventListener("change", again); }
    if (more) { more.addEventListener("click", function () { shown += PAGE; renderIndex(); }); }
    var form = document.getElementById("index-form");
    if (form) {
      form.hidden = false;
      form.addEventListener("submit", function (e) {
        // Enter opens the first product found.
        e.preventDefault();
        if (matches.length) { location.hash = "#p-" + matches[0][1]; }
      });
    }
    renderIndex();
  }
  // The first view is in the page: summary, figures, lists and the index
  // (the products' records below are parsed after it, unseen).
  document.documentElement.setAttribute("data-first-view", String(Math.round(performance.now())));
  window.addEventListener("hashchange", fromHash);
  document.addEventListener("DOMContentLoaded", function () {
    var all = document.getElementById("every-detail");
    if (all && all.getAttribute("data-all") === "yes") {
      rows.forEach(function (r) {
        var d = record(r[1]);
        if (d) { all.appendChild(detail(d, r[1])); }
      });
    }
    fromHash();
    document.documentElement.setAttribute("data-loaded", String(Math.round(performance.now())));
  });
  document.documentElement.setAttribute("data-report-script", "ran");
})();
