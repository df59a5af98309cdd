(function () {
  "use strict";
  var SVGNS = "http://www.w3.org/2000/svg";
  var LEVEL = /(_lufs|_lu|_db|_dbtp|_dbfs)$/;
  var data = JSON.parse(document.getElementById("report-rows").textContent);
  var rows = data.rows;
  var tbody = document.getElementById("file-rows");
  var trs = Array.prototype.slice.call(tbody.rows);
  var heads = Array.prototype.slice.call(document.querySelectorAll("#file-table thead th[data-col]"));
  var collator = new Intl.Collator(undefined, { numeric: true, sensitivity: "base" });
  var sortState = { col: -1, dir: 1 };
  var PAGE = 250;
  var order = rows.map(function (_, i) { return i; });  // current sort (default: worst first)
  var limit = PAGE;  // rows attached to the table; the rest wait, detached, until asked for

  // ---- showing: only the first `limit` matching rows are in the document ----
  var form = document.getElementById("filters");
  var query = document.getElementById("q");
  var shown = document.getElementById("shown");
  var more = document.getElementById("more");
  var moreBox = document.getElementById("more-box");
  var timer = null;
  function render() {
    var on = {};
    form.querySelectorAll("input[name=status]").forEach(function (box) { on[box.value] = box.checked; });
    var q = query.value.trim().toLowerCase();
    var frag = document.createDocumentFragment(), matches = 0;
    for (var k = 0; k < order.length; k++) {
      var r = rows[order[k]];
      if (on[r.st] === false || (q !== "" && r.h.indexOf(q) === -1)) continue;
      if (matches < limit) frag.appendChild(trs[order[k]]);
      matches++;
    }
    tbody.textContent = "";
    tbody.classList.remove("first-page");
    tbody.appendChild(frag);
    var count = Math.min(matches, limit);
    shown.textContent = count < matches
      ? "Showing the first " + count + " of " + matches + " matching files (" + rows.length + " in total)"
      : "Showing " + count + " of " + rows.length + " files";
    moreBox.hidden = count >= matches;
    more.textContent = "Show " + Math.min(PAGE, matches - count) + " more";
  }

  // ---- sorting: numbers as numbers, -inf lowest, empty cells always last ----
  function numKey(v) {
    if (v === null || v === undefined) return NaN;
    if (v === "-inf") return -Infinity;
    if (v === "inf") return Infinity;
    return typeof v === "number" ? v : NaN;
  }
  function sortBy(col, dir) {
    var numeric = heads[col].getAttribute("data-kind") === "num";
    var keys = rows.map(function (r) { return numeric ? numKey(r.s[col]) : String(r.s[col] || ""); });
    order = rows.map(function (_, i) { return i; });
    order.sort(function (a, b) {
      var x = keys[a], y = keys[b], c;
      if (numeric) {
        var xn = isNaN(x), yn = isNaN(y);
        if (xn || yn) return xn === yn ? a - b : (xn ? 1 : -1);
        c = x < y ? -1 : (x > y ? 1 : 0);
      } else {
        if (x === "" || y === "") return x === y ? a - b : (x === "" ? 1 : -1);
        c = collator.compare(x, y);
      }
      return c !== 0 ? c * dir : a - b;
    });
    heads.forEach(function (th, n) {
      if (n === col) th.setAttribute("aria-sort", dir > 0 ? "ascending" : "descending");
      else th.removeAttribute("aria-sort");
    });
    sortState = { col: col, dir: dir };
    render();
  }
  heads.forEach(function (th, n) {
    th.querySelector("button").addEventListener("click", function () {
      sortBy(n, sortState.col === n ? -sortState.dir : 1);
    });
  });

  // ---- filtering by status and by text ----
  form.addEventListener("change", function (e) {
    if (e.target !== query) render();  // the search box re-renders on input, not on blur
  });
  form.addEventListener("submit", function (e) { e.preventDefault(); });
  query.addEventListener("input", function () {
    clearTimeout(timer);
    timer = setTimeout(render, 120);
  });
  more.addEventListener("click", function () { limit += PAGE; render(); });
  document.getElementById("all").addEventListener("click", function () { limit = rows.length; render(); });
  render();

  // ---- formatting ----
  function fmt(key, v) {
    if (v === null || v === undefined || v === "") return "\u2014";
    if (v === "-inf") return "-inf (digital silence)";
    if (typeof v === "boolean") return v ? "yes" : "no";
    if (Array.isArray(v) && !v.length) return "none";
    if (Array.isArray(v)) {
      return v.map(function (x) { return Array.isArray(x) ? "(" + x.map(function (y) { return fmt("", y); }).join(", ") + ")" : fmt(key, x); }).join("; ");
    }
    if (typeof v === "number") {
      if (LEVEL.test(key) || /_s$/.test(key)) return v.toFixed(2);
      if (Number.isInteger(v)) return String(v);
      return String(Number(v.toPrecision(4)));
    }
    if (typeof v === "object") return JSON.stringify(v);
    return String(v);
  }
  function withUnit(v, unit) {
    var key = /^(LUFS|LU|dB|dBTP|dBFS)$/.test(unit) ? "x_db" : (unit === "s" ? "x_s" : "x");
    var text = fmt(key, v);
    if (typeof v === "string") return text;  // limits written as text carry their own units
    return unit && text !== "\u2014" ? text + " " + unit : text;
  }
  function el(tag, attrs, text) {
    var node = document.createElement(tag);
    if (attrs) Object.keys(attrs).forEach(function (k) { node.setAttribute(k, attrs[k]); });
    if (text !== undefined && text !== null) node.textContent = text;
    return node;
  }
  function table(cls, caption, header, body) {
    var t = el("table", { "class": "dt " + cls });
    t.appendChild(el("caption", null, caption));
    if (header) {
      var hr = el("tr");
      header.forEach(function (h) { hr.appendChild(el("th", { scope: "col" }, h)); });
      t.appendChild(el("thead")).appendChild(hr);
    }
    var tb = t.appendChild(el("tbody"));
    body.forEach(function (cells) {
      var tr = tb.appendChild(el("tr"));
      cells.forEach(function (c, n) {
        var td = tr.appendChild(el(n === 0 && !header ? "th" : "td", n === 0 && !header ? { scope: "row" } : null, c.text !== undefined ? c.text : c));
        if (c.cls) td.className = c.cls;
      });
    });
    return t;
  }

  // ---- loudness-over-time graph (inline SVG, drawn when a detail opens) ----
  function svg(tag, attrs, parent) {
    var node = document.createElementNS(SVGNS, tag);
    Object.keys(attrs).forEach(function (k) { node.setAttribute(k, attrs[k]); });
    if (parent) parent.appendChild(node);
    return node;
  }
  function niceStep(span, target) {
    var raw = span / target, steps = [1, 2, 5, 10, 15, 30, 60, 120, 300, 600, 900, 1800, 3600, 7200];
    for (var i = 0; i < steps.length; i++) if (steps[i] >= raw) return steps[i];
    return steps[steps.length - 1];
  }
  function clock(t) {
    var m = Math.floor(t / 60), s = Math.round(t - m * 60);
    if (s === 60) { m += 1; s = 0; }
    return m + ":" + (s < 10 ? "0" : "") + s;
  }
  function decode(tenths) {
    return (tenths || []).map(function (v) { return typeof v === "number" ? v / 10 : null; });
  }
  function drawGraph(d) {
    var tl = d.timeline, lim = d.limits || {};
    var W = 760, H = 300, L = 52, R = 14, T = 14, B = 34;
    var st = decode(tl && tl.short_term_lufs), mo = decode(tl && tl.momentary_lufs);
    var n = tl ? tl.n : 0, time = function (i) { return tl.t ? tl.t[i] : tl.t0 + i * tl.dt; };
    var finite = st.concat(mo).filter(function (v) { return typeof v === "number"; });
    var top = Math.max.apply(null, finite.concat([lim.ceiling_dbtp, lim.band_high_lufs, lim.target_lufs, lim.short_term_max_lufs, lim.momentary_max_lufs].filter(function (v) { return typeof v === "number"; })));
    if (!isFinite(top)) top = -10;
    var sorted = finite.slice().sort(function (a, b) { return a - b; });
    var low = sorted.length ? sorted[Math.floor(sorted.length * 0.02)] : -40;
    if (typeof lim.band_low_lufs === "number") low = Math.min(low, lim.band_low_lufs - 6);
    if (typeof lim.target_lufs === "number") low = Math.min(low, lim.target_lufs - 10);
    var yMax = Math.ceil((top + 2) / 5) * 5, yMin = Math.max(Math.floor((low - 3) / 5) * 5, -80);
    if (yMax - yMin < 20) yMin = yMax - 20;
    var dur = (d.values && typeof d.values.duration_s === "number" && d.values.duration_s > 0) ? d.values.duration_s : (n ? time(n - 1) : 1);
    var x = function (t) { return L + (Math.min(Math.max(t, 0), dur) / dur) * (W - L - R); };
    var y = function (v) { return T + (yMax - Math.min(Math.max(v, yMin), yMax)) / (yMax - yMin) * (H - T - B); };
    var root = svg("svg", { viewBox: "0 0 " + W + " " + H, role: "img", "aria-labelledby": "g-title g-desc", "font-family": "system-ui, sans-serif", "font-size": "11" });
    svg("title", { id: "g-title" }, root).textContent = "Loudness over time";
    var desc = svg("desc", { id: "g-desc" }, root);
    var gy = svg("g", { "class": "grid" }, root), yStep = (yMax - yMin) > 40 ? 10 : 5;
    for (var v = yMin; v <= yMax; v += yStep) {
      svg("line", { x1: L, x2: W - R, y1: y(v), y2: y(v), stroke: "#ebe8e1" }, gy);
      svg("text", { x: L - 6, y: y(v) + 4, "text-anchor": "end", fill: "#6b7385" }, gy).textContent = v;
    }
    var xStep = niceStep(dur, 8);
    for (var t = 0; t <= dur + 1e-9; t += xStep) {
      svg("line", { x1: x(t), x2: x(t), y1: T, y2: H - B, stroke: "#f1efe9" }, gy);
      svg("text", { x: x(t), y: H - B + 16, "text-anchor": "middle", fill: "#6b7385" }, gy).textContent = clock(t);
    }
    svg("text", { x: 12, y: T + (H - T - B) / 2, transform: "rotate(-90 12 " + (T + (H - T - B) / 2) + ")", "text-anchor": "middle", fill: "#4a5366" }, root).textContent = "LUFS / dBTP";
    svg("text", { x: (L + W - R) / 2, y: H - 4, "text-anchor": "middle", fill: "#4a5366" }, root).textContent = "time (m:ss)";
    var labels = [];
    function label(yy, color, text) {
      var node = svg("text", { x: W - R - 6, y: yy, "text-anchor": "end", fill: color, stroke: "#fff", "stroke-width": "3", "paint-order": "stroke", "font-weight": "600" });
      node.textContent = text;
      labels.push(node);
    }
    if (typeof lim.band_low_lufs === "number" && typeof lim.band_high_lufs === "number") {
      svg("rect", { "class": "band", x: L, width: W - L - R, y: y(lim.band_high_lufs), height: Math.max(1, y(lim.band_low_lufs) - y(lim.band_high_lufs)), fill: "#cfe3d3", "fill-opacity": "0.7" }, root);
      label(y(lim.band_low_lufs) + 13, "#2e6b3f", "target range " + lim.band_low_lufs.toFixed(1) + " to " + lim.band_high_lufs.toFixed(1) + " LUFS");
    }
    if (typeof lim.target_lufs === "number") {
      svg("line", { "class": "target", x1: L, x2: W - R, y1: y(lim.target_lufs), y2: y(lim.target_lufs), stroke: "#2e6b3f", "stroke-dasharray": "2 3" }, root);
    }
    if (typeof lim.ceiling_dbtp === "number") {
      svg("line", { "class": "ceiling", x1: L, x2: W - R, y1: y(lim.ceiling_dbtp), y2: y(lim.ceiling_dbtp), stroke: "#a0242c", "stroke-width": "1.5", "stroke-dasharray": "6 4" }, root);
      label(y(lim.ceiling_dbtp) - 4, "#a0242c", (lim.ceiling_from === "meter" ? "overs counted above " : "true-peak ceiling ") + lim.ceiling_dbtp.toFixed(1) + " dBTP");
    }
    [["short_term_max_lufs", "short-term max "], ["momentary_max_lufs", "momentary max "]].forEach(function (m) {
      var v = lim[m[0]];
      if (typeof v !== "number") return;
      svg("line", { "class": "loudness-max", x1: L, x2: W - R, y1: y(v), y2: y(v), stroke: "#7f5200", "stroke-dasharray": "3 3" }, root);
      label(y(v) - 4, "#7f5200", m[1] + v.toFixed(1) + " LUFS");
    });
    var plotted = 0;
    function series(values, cls, color, width) {
      var dstr = "", pen = false, count = 0;
      for (var i = 0; i < values.length; i++) {
        var v = values[i];
        if (typeof v !== "number" || i >= n) { pen = false; continue; }
        dstr += (pen ? "L" : "M") + x(time(i)).toFixed(1) + " " + y(v).toFixed(1);
        pen = true; count++;
      }
      if (count) svg("path", { "class": cls, d: dstr, fill: "none", stroke: color, "stroke-width": width, "stroke-linejoin": "round", "data-points": count }, root);
      return count;
    }
    if (tl) {
      plotted += series(mo, "momentary", "#9bb3c6", "1");
      plotted += series(st, "short-term", "#24577a", "2");
    }
    (d.marks || []).forEach(function (m) {
      if (m.t < 0 || m.t > dur) return;
      var g = svg("g", { "class": "mark" }, root);
      svg("line", { x1: x(m.t), x2: x(m.t), y1: T, y2: H - B, stroke: "#a0242c", "stroke-opacity": "0.35" }, g);
      svg("path", { d: "M" + (x(m.t) - 5) + " " + T + "h10l-5 8z", fill: "#a0242c" }, g);
      svg("title", {}, g).textContent = m.label + " at " + m.t.toFixed(2) + " s";
    });
    svg("rect", { x: L, y: T, width: W - L - R, height: H - T - B, fill: "none", stroke: "#d9d5cb" }, root);
    labels.forEach(function (l) { root.appendChild(l); });
    var max = d.values ? d.values.max_short_term_lufs : null;
    desc.textContent = plotted ? ("Short-term and momentary loudness over " + clock(dur) + "; highest short-term " + fmt("x_lufs", max) + " LUFS; " + (d.marks || []).length + " marked positions.") : "No loudness values to draw.";
    root.setAttribute("data-plotted", plotted);
    return root;
  }

  // ---- detail view ----
  var dialog = document.getElementById("detail");
  var body = document.getElementById("detail-body");
  var opener = null;
  function section(title) {
    body.appendChild(el("h3", null, title));
  }
  function openDetail(i) {
    var d = JSON.parse(document.getElementById("d-" + i).textContent);
    var name = d.path.split(/[\\/]/).pop();
    document.getElementById("detail-title").textContent = name;
    body.textContent = "";
    body.appendChild(el("p", { "class": "path" }, d.path));
    var badge = trs[i].querySelector(".badge").cloneNode(true);
    var line = body.appendChild(el("p"));
    line.appendChild(badge);
    if (d.kind === "set") line.appendChild(document.createTextNode("  stem set summary"));
    if (d.group) line.appendChild(document.createTextNode("  in set " + d.group));
    if (d.error) body.appendChild(el("p", { "class": "card err" }, "Could not be checked: " + d.error));
    section("Flags");
    if (d.flags.length) {
      body.appendChild(table("flags", "Each limit this file breaks, with the measured value", ["Severity", "Rule", "Measured", "Limit", "Where", "What to do", "Source"],
        d.flags.map(function (f) {
          return [f.severity, f.rule, { text: withUnit(f.measured, f.unit), cls: "n" }, { text: withUnit(f.limit, f.unit), cls: "n" },
            f.position_s === null ? "whole file" : clock(f.position_s) + " (" + Number(f.position_s).toFixed(2) + " s)", f.message, f.source || "\u2014"];
        })));
    } else {
      body.appendChild(el("p", { "class": "muted" }, d.error ? "No flags: the file could not be measured." : "No limit of the profile is broken."));
    }
    if (d.gain) {
      section("Gain advice");
      var card = body.appendChild(el("div", { "class": "card" }));
      var dl = card.appendChild(el("dl", { "class": "gain" }));
      [["Gain to target", d.gain.gain_to_target_db, "dB"], ["True peak after gain", d.gain.predicted_true_peak_dbtp, "dBTP"],
        ["Noise floor after gain", d.gain.predicted_noise_floor_dbfs, "dBFS"], ["Plain gain enough", d.gain.plain_gain_enough, ""]].forEach(function (g) {
        var box = dl.appendChild(el("div"));
        box.appendChild(el("dt", null, g[0]));
        var text = typeof g[1] === "boolean" ? (g[1] ? "yes" : "no, needs limiting or a remix") : withUnit(g[1], g[2]);
        box.appendChild(el("dd", null, g[2] === "dB" && g[1] > 0 ? "+" + text : text));
      });
      card.appendChild(el("p", null, d.gain.advice));
      if (typeof d.gain.gain_to_target_db === "number" && d.gain.gain_to_target_db !== 0) {
        card.appendChild(el("p", { "class": "listen" }, "Listening level: turn the monitors down before you audition a file with gain applied; a few dB up is much louder, and an over can hurt ears and speakers."));
      }
    }
    var fig = el("figure", { "class": "graph" });
    if (!d.error || d.timeline) {
      section("Loudness over time");
      body.appendChild(fig);
    }
    if (d.timeline && d.timeline.n) {
      fig.appendChild(drawGraph(d));
      var legend = fig.appendChild(el("ul", { "class": "legend" }));
      var lim = d.limits || {};
      [["l-short", "short-term (3 s)", true], ["l-moment", "momentary (400 ms)", true],
        ["l-band", "target range", typeof lim.band_low_lufs === "number"],
        ["l-ceiling", "true-peak ceiling", typeof lim.ceiling_dbtp === "number"],
        ["l-max", "short-term or momentary maximum", typeof lim.short_term_max_lufs === "number" || typeof lim.momentary_max_lufs === "number"],
        ["l-mark", "over or flagged position", (d.marks || []).length > 0]].forEach(function (p) {
        if (p[2]) legend.appendChild(el("li", { "class": p[0] }, p[1]));
      });
      fig.appendChild(el("figcaption", null, "Short-term and momentary loudness in LUFS with the profile's limits; the true-peak line is in dBTP. Reduced to at most a few hundred points, keeping each stretch's loudest value."));
    } else {
      fig.appendChild(el("p", { "class": "muted" }, "No loudness timeline was stored for this file."));
    }
    if (d.findings.length) {
      section("Findings");
      var ul = body.appendChild(el("ul", { "class": "plain" }));
      d.findings.forEach(function (f) { ul.appendChild(el("li", null, f)); });
    }
    var keys = Object.keys(d.values);
    if (keys.length) {
      var all = body.appendChild(el("details", { "class": "all" }));
      all.appendChild(el("summary", null, "All measurements (" + keys.length + ")"));
      all.appendChild(table("kv", "Every measured value under its report.csv column name", null,
        keys.map(function (k) { return [k, { text: fmt(k, d.values[k]), cls: "n" }]; })));
    }
    if (!dialog.open) dialog.showModal();
    dialog.scrollTop = 0;
  }
  tbody.addEventListener("click", function (e) {
    var button = e.target.closest("button.open");
    if (!button) return;
    opener = button;
    openDetail(Number(button.getAttribute("data-i")));
  });
  document.getElementById("detail-close").addEventListener("click", function () { dialog.close(); });
  dialog.addEventListener("click", function (e) { if (e.target === dialog) dialog.close(); });
  dialog.addEventListener("close", function () { if (opener) opener.focus(); });
})();
