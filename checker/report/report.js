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
      if (LEVEL.test(key) || /_s$/.test(key)) {
        var fixed = v.toFixed(2);
        return fixed === "-0.00" ? "0.00" : fixed;  // a gain that rounds to nothing has no sign
      }
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
        if (header) td.setAttribute("data-label", header[n]);  // shown when a narrow screen stacks the cells
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
  // The loudness timeline as distance from the target: 0 is the target, above is louder,
  // below is quieter (LU). Lanes under it: overs and flagged positions, and stretches with
  // no loudness (silence or below the gate).
  function drawGraph(d) {
    var tl = d.timeline, lim = d.limits || {}, vals = d.values || {};
    var W = 760, L = 96, R = 14, T = 14, PH = 230, LANE = 22, GAP = 8;  // L: room for the lane names
    // the speech lane only where the speech gate ran (measure --speech, or a speech profile)
    var sp = decode(tl && tl.speech_active);
    var hasSpeech = sp.some(function (v) { return typeof v === "number"; });
    // the programme lane only where a span or parts were asked for (checker/analysis/span.py)
    var parts = Array.isArray(vals.parts) ? vals.parts : [];
    var hasSpan = typeof vals.programme_start_s === "number" && typeof vals.programme_end_s === "number";
    var hasProgramme = hasSpan || parts.length > 0;
    var lanes = 2 + (hasSpeech ? 1 : 0) + (hasProgramme ? 1 : 0);
    var H = T + PH + GAP + lanes * LANE + 34;
    var shift = d.judged ? d.judged.offset_lu : 0;  // mono judged as dual mono: the judged scale
    var st = decode(tl && tl.short_term_lufs), mo = decode(tl && tl.momentary_lufs);
    var n = tl ? tl.n : 0, time = function (i) { return tl.t ? tl.t[i] : tl.t0 + i * tl.dt; };
    var hasTarget = typeof lim.target_lufs === "number";
    var own = typeof vals.integrated_lufs === "number" ? vals.integrated_lufs + shift : null;
    var ref = hasTarget ? lim.target_lufs : own;
    if (ref === null) ref = -23;
    var dist = function (v) { return typeof v === "number" ? v + shift - ref : null; };
    var ds = st.map(dist), dm = mo.map(dist);
    var tol = (typeof lim.band_low_lufs === "number" && typeof lim.band_high_lufs === "number") ? [lim.band_low_lufs - ref, lim.band_high_lufs - ref] : null;
    var finite = ds.filter(function (v) { return typeof v === "number"; }).map(Math.abs).sort(function (a, b) { return a - b; });
    var reach = finite.length ? finite[Math.floor(finite.length * 0.98)] : 6;
    if (tol) reach = Math.max(reach, Math.abs(tol[0]), Math.abs(tol[1]));
    var span = [6, 12, 18, 24, 30].filter(function (s) { return s >= reach + 1; })[0] || 30;
    var dur = (typeof vals.duration_s === "number" && vals.duration_s > 0) ? vals.duration_s : (n ? time(n - 1) : 1);
    var x = function (t) { return L + (Math.min(Math.max(t, 0), dur) / dur) * (W - L - R); };
    var y = function (v) { return T + (span - Math.min(Math.max(v, -span), span)) / (2 * span) * PH; };
    var root = svg("svg", { viewBox: "0 0 " + W + " " + H, role: "img", "aria-labelledby": "g-title g-desc", "font-family": "system-ui, sans-serif", "font-size": "11", "class": "distance" });
    svg("title", { id: "g-title" }, root).textContent = "Loudness against the " + (hasTarget ? "target" : "file's own integrated loudness") + " over time";
    var desc = svg("desc", { id: "g-desc" }, root);
    svg("rect", { x: L, y: T, width: W - L - R, height: PH, fill: "#fbfaf7" }, root);
    var gy = svg("g", { "class": "grid" }, root), step = span > 12 ? 6 : 3;
    for (var v = -span; v <= span; v += step) {
      svg("line", { x1: L, x2: W - R, y1: y(v), y2: y(v), stroke: v === 0 ? "none" : "#ece9e2" }, gy);
      svg("text", { x: L - 6, y: y(v) + 4, "text-anchor": "end", fill: "#6b7385" }, gy).textContent = (v > 0 ? "+" : "") + v;
    }
    var xStep = niceStep(dur, 8);
    for (var t = 0; t <= dur + 1e-9; t += xStep) {
      svg("text", { x: x(t), y: H - 18, "text-anchor": "middle", fill: "#6b7385" }, gy).textContent = clock(t);
      svg("line", { x1: x(t), x2: x(t), y1: T + PH, y2: T + PH + 4, stroke: "#b8b2a6" }, gy);
    }
    svg("text", { x: 12, y: T + PH / 2, transform: "rotate(-90 12 " + (T + PH / 2) + ")", "text-anchor": "middle", fill: "#4a5366" }, root).textContent = "LU from " + (hasTarget ? "target" : "own level");
    // the area between the short-term curve and the target, warm above and cool below
    var clipA = svg("clipPath", { id: "above" }, root), clipB = svg("clipPath", { id: "below" }, root);
    svg("rect", { x: L, y: T, width: W - L - R, height: y(0) - T }, clipA);
    svg("rect", { x: L, y: y(0), width: W - L - R, height: T + PH - y(0) }, clipB);
    var area = "", run = [];
    function flush() {
      if (run.length > 1) area += "M" + run[0][0] + " " + y(0).toFixed(1) + run.map(function (p) { return "L" + p[0] + " " + p[1]; }).join("") + "L" + run[run.length - 1][0] + " " + y(0).toFixed(1) + "Z";
      run = [];
    }
    for (var i = 0; i < Math.min(ds.length, n); i++) {
      if (typeof ds[i] !== "number") { flush(); continue; }
      run.push([x(time(i)).toFixed(1), y(ds[i]).toFixed(1)]);
    }
    flush();
    if (area) {
      svg("path", { "class": "over-target", d: area, fill: "#c98a00", "fill-opacity": "0.35", "clip-path": "url(#above)" }, root);
      svg("path", { "class": "under-target", d: area, fill: "#24577a", "fill-opacity": "0.22", "clip-path": "url(#below)" }, root);
    }
    if (tol) {
      [tol[0], tol[1]].forEach(function (v) {
        svg("line", { "class": "tolerance", x1: L, x2: W - R, y1: y(v), y2: y(v), stroke: "#2e6b3f", "stroke-dasharray": "1 4", "stroke-width": "1.5" }, root);
      });
    }
    svg("line", { "class": "zero", x1: L, x2: W - R, y1: y(0), y2: y(0), stroke: "#1c2230", "stroke-width": "1.5" }, root);
    var plotted = 0;
    function series(values, cls, color, width, opacity) {
      var dstr = "", pen = false, count = 0;
      for (var i = 0; i < values.length; i++) {
        var v = values[i];
        if (typeof v !== "number" || i >= n) { pen = false; continue; }
        dstr += (pen ? "L" : "M") + x(time(i)).toFixed(1) + " " + y(v).toFixed(1);
        pen = true; count++;
      }
      if (count) svg("path", { "class": cls, d: dstr, fill: "none", stroke: color, "stroke-width": width, "stroke-opacity": opacity, "stroke-linejoin": "round", "data-points": count }, root);
      return count;
    }
    if (tl) {
      plotted += series(dm, "momentary", "#4a5366", "0.8", "0.35");
      plotted += series(ds, "short-term", "#1c2230", "1.6", "1");
    }
    var refText = hasTarget ? "0 = target " + lim.target_lufs.toFixed(1) + " LUFS" : "0 = the file's integrated loudness";
    if (tol) refText += " (tolerance " + (tol[0] > 0 ? "+" : "") + tol[0].toFixed(1) + " / +" + tol[1].toFixed(1) + " LU dotted)";
    svg("text", { x: W - R - 6, y: y(0) - 5, "text-anchor": "end", fill: "#1c2230", stroke: "#fbfaf7", "stroke-width": "3", "paint-order": "stroke", "font-weight": "600" }, root).textContent = refText;
    svg("text", { x: L + 6, y: T + 13, fill: "#7f5200" }, root).textContent = "louder than " + (hasTarget ? "target" : "its level");
    svg("text", { x: L + 6, y: T + PH - 6, fill: "#24577a" }, root).textContent = "quieter";
    svg("rect", { x: L, y: T, width: W - L - R, height: PH, fill: "none", stroke: "#d9d5cb" }, root);
    // lanes
    var laneY = [];
    for (var li = 0; li < lanes; li++) laneY.push(T + PH + GAP + li * LANE);
    var laneDefs = [["overs and flags", "lane-overs"], ["no loudness", "lane-quiet"]];
    if (hasSpeech) laneDefs.push(["speech", "lane-speech"]);
    if (hasProgramme) laneDefs.push(["programme", "lane-programme"]);
    laneDefs.forEach(function (ln, k) {
      svg("rect", { "class": ln[1], x: L, y: laneY[k], width: W - L - R, height: LANE - 3, fill: "#f1efe9" }, root);
      svg("text", { x: L - 6, y: laneY[k] + 14, "text-anchor": "end", fill: "#6b7385", "font-size": "10" }, root).textContent = ln[0];
    });
    (d.marks || []).forEach(function (m) {
      if (m.t < 0 || m.t > dur) return;
      var g = svg("g", { "class": "mark" }, root);
      svg("path", { d: "M" + x(m.t).toFixed(1) + " " + (laneY[0] + 2) + "l5 8l-5 8l-5 -8z", fill: "#a0242c" }, g);
      svg("line", { x1: x(m.t), x2: x(m.t), y1: T, y2: T + PH, stroke: "#a0242c", "stroke-opacity": "0.25" }, g);
      svg("title", {}, g).textContent = m.label + " at " + m.t.toFixed(2) + " s";
    });
    var gapStart = null;
    for (var j = 0; j <= Math.min(st.length, n); j++) {
      var none = j < Math.min(st.length, n) && typeof st[j] !== "number";
      if (none && gapStart === null) gapStart = j;
      if (!none && gapStart !== null) {
        var t0 = time(gapStart), t1 = j < n ? time(j) : dur;
        svg("rect", { "class": "quiet", x: x(t0), y: laneY[1] + 3, width: Math.max(1, x(t1) - x(t0)), height: LANE - 9, fill: "#9aa3b5" }, root);
        gapStart = null;
      }
    }
    if (hasSpeech) {  // stretches the speech gate marked as speech (reduced: any speech in a stretch)
      var spStart = null, m2 = Math.min(sp.length, n);
      for (var k2 = 0; k2 <= m2; k2++) {
        var on = k2 < m2 && typeof sp[k2] === "number" && sp[k2] >= 0.5;
        if (on && spStart === null) spStart = k2;
        if (!on && spStart !== null) {
          var s0 = time(spStart), s1 = k2 < n ? time(k2) : dur;
          svg("rect", { "class": "speech", x: x(s0), y: laneY[2] + 3, width: Math.max(1, x(s1) - x(s0)), height: LANE - 9, fill: "#3f7a52" }, root);
          spStart = null;
        }
      }
    }
    if (hasProgramme) {  // what was left out (head, tail) and the parts between breaks
      var py = laneY[lanes - 1];
      var outside = function (t0, t1, label) {
        if (!(t1 > t0)) return;
        var g = svg("g", { "class": "excluded" }, root);
        svg("rect", { x: x(t0), y: py + 3, width: Math.max(1, x(t1) - x(t0)), height: LANE - 9, fill: "none", stroke: "#9aa3b5", "stroke-dasharray": "2 2" }, g);
        svg("title", {}, g).textContent = label + ", " + fmt("x_s", t0) + "\u2013" + withUnit(t1, "s") + ": not in the programme";
      };
      if (hasSpan) {
        outside(0, vals.programme_start_s, "head");
        outside(vals.programme_end_s, dur, "tail");
      }
      var spans = parts.length ? parts : (hasSpan ? [{ part: 1, start_s: vals.programme_start_s, end_s: vals.programme_end_s }] : []);
      spans.forEach(function (pt, i) {
        if (typeof pt.start_s !== "number" || typeof pt.end_s !== "number") return;
        var g = svg("g", { "class": "part" }, root);
        svg("rect", { x: x(pt.start_s), y: py + 3, width: Math.max(1, x(pt.end_s) - x(pt.start_s)), height: LANE - 9, fill: i % 2 ? "#6d5a8f" : "#8a78a8" }, g);
        if (parts.length && x(pt.end_s) - x(pt.start_s) > 14) {
          svg("text", { x: (x(pt.start_s) + x(pt.end_s)) / 2, y: py + 14, "text-anchor": "middle", fill: "#fbfaf7", "font-size": "10" }, g).textContent = String(pt.part);
        }
        svg("title", {}, g).textContent = (parts.length ? "part " + pt.part : "programme") + ", " + fmt("x_s", pt.start_s) + "\u2013" + withUnit(pt.end_s, "s") + (typeof pt.integrated_lufs === "number" ? ": integrated " + withUnit(pt.integrated_lufs, "LUFS") : "");
      });
    }
    var max = vals.max_short_term_lufs;
    desc.textContent = plotted ? ("Short-term loudness as distance from " + (hasTarget ? "the target" : "the file's own level") + " over " + clock(dur) + "; highest short-term " + fmt("x_lufs", max) + " LUFS; " + (d.marks || []).length + " marked positions.") : "No loudness values to draw.";
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
    if (d.judged) body.appendChild(el("p", { "class": "card judged-note" }, "Mono file judged as dual mono: integrated loudness " + fmt("x_lufs", d.judged.judged_lufs) + " LUFS as judged (as if played on both channels of a stereo pair); " + fmt("x_lufs", d.judged.plain_lufs) + " LUFS on its one channel."));
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
        ["l-above", "louder than the target", true], ["l-below", "quieter than the target", true],
        ["l-band", "tolerance", typeof lim.band_low_lufs === "number"],
        ["l-mark", "over or flagged position", (d.marks || []).length > 0]].forEach(function (p) {
        if (p[2]) legend.appendChild(el("li", { "class": p[0] }, p[1]));
      });
      fig.appendChild(el("figcaption", null, "How far the short-term loudness (3 s) sits above or below the target, in LU; the lanes below mark true-peak overs and flagged positions, stretches with no loudness (silence, or below the gate), where the speech gate ran the stretches it heard as speech, and where a programme span or parts were asked for the programme's parts (numbered) with the left-out head and tail dashed. Reduced to at most a few hundred points, keeping each stretch's loudest value."));
    } else {
      fig.appendChild(el("p", { "class": "muted" }, "No loudness timeline was stored for this file."));
    }
    if (d.findings.length) {
      section("Findings");
      var ul = body.appendChild(el("ul", { "class": "plain" }));
      d.findings.forEach(function (f) { ul.appendChild(el("li", null, f)); });
    }
    var parts = d.values.parts;
    if (Array.isArray(parts) && parts.length) {  // programme parts (checker/analysis/span.py)
      section("Programme parts");
      var pl = body.appendChild(el("ul", { "class": "plain parts" }));
      parts.forEach(function (p) {
        pl.appendChild(el("li", null, "Part " + p.part + ", " + fmt("x_s", p.start_s) + "\u2013" +
          withUnit(p.end_s, "s") + ": integrated " + withUnit(p.integrated_lufs, "LUFS") +
          ", max short-term " + withUnit(p.max_short_term_lufs, "LUFS") +
          ", true peak " + withUnit(p.true_peak_dbtp, "dBTP") +
          (p.integrated_note ? " (" + p.integrated_note + ")" : "") +
          (p.true_peak_note ? " (" + p.true_peak_note + ")" : "")));
      });
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
