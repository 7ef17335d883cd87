/* rebalance report: draws every chart as SVG from the JSON in #report-data, makes tables
   sortable, and marks each chart drawn (data-drawn="yes") so a browser test can check it.
   Hand-written, no libraries, so the page works offline from one file. */
(function () {
  "use strict";
  var NS = "http://www.w3.org/2000/svg";
  var C = {
    staff: "#3f7f94", hire: "#88ad6b", short: "#c0533a", ink: "#1f2a30", soft: "#4a565d",
    detail: "#3f7f94", move: "#7b5a97", amber: "#d9a036", grid: "#efeade", axis: "#cfc8b8",
    muted: "#7a8388", track: "#efeadd", spare: "#cfe2e8"
  };
  // Skills get colours of their own: none near a colour that means something elsewhere on the
  // page (staff and details blue, hires sage, shortfall brick, reassignments plum, the amber
  // knee, the outcome greens and reds); each at least 20 CIE76 units from all of those.
  var SKILL = ["#2c5aa0", "#b8658f", "#8a6d4b", "#5aa89a", "#8fa3d6", "#2f5f5a", "#9c8f3a",
    "#5b4636", "#e0b4a4", "#d7c95a"];
  // Frontier lines mean only "this series": none near a colour that means something elsewhere
  // on the pages (the keys above, the outcome greens and reds, the budget parts, the heat
  // scale, the skills; staff blue and shortfall brick had drawn two of them), each at least
  // 20 CIE76 units from all of those and from one another, 3:1 or more against the white.
  var LINES = ["#9a1a66", "#0094d6", "#5a5a0a", "#a46fd8", "#2a2466", "#d65db1"];
  var HEAT = [[247, 244, 236], [240, 217, 166], [224, 146, 90], [178, 59, 44]];

  function el(tag, attrs, parent) {
    var node = document.createElementNS(NS, tag);
    Object.keys(attrs || {}).forEach(function (k) { node.setAttribute(k, attrs[k]); });
    if (parent) { parent.appendChild(node); }
    return node;
  }
  function label(parent, x, y, str, attrs) {
    var t = el("text", Object.assign({ x: x, y: y }, attrs || {}), parent);
    t.textContent = str;
    return t;
  }
  function svg(box, w, h) {
    // Never wider than drawn: a small chart keeps its type size on a wide page.
    return el("svg", { viewBox: "0 0 " + w + " " + h, preserveAspectRatio: "xMinYMin meet",
      style: "max-width:" + w + "px" }, box);
  }
  function empty(box, message) {
    var s = svg(box, 900, 70);
    label(s, 12, 40, message, { "class": "empty" });
    return 0;
  }
  // The number rule of rebalance/numbers.py: its decimals come with the data (main() sets
  // them from data.numbers), so a chart's labels and tips read as the tables and cards beside
  // it.  Money is written in full, never "299k" or "2.46M": beside "298,500" in the table
  // such a label read as another figure.
  var RULE = { table_digits: 3, total_digits: 1, gap_digits: 2, share_digits: 1, whole_from: 1000 };
  var DUST = 1e-9;  // numbers.NEAR_ZERO
  // ``v`` to ``digits`` decimals as Python's format and round() write it.  toFixed rounds
  // the binary value as they do (toLocaleString rounds the decimal text: 2,021.6 for
  // Python's 2,021.5), but an exact half away from zero where they take the even neighbour
  // (0.0625 to three decimals: 0.063 against 0.062).  An exact half ends in 5 at digits + 1
  // with nothing after it, which toFixed's exact expansion shows.
  function toFixedEven(v, digits) {
    var text = (v + 0).toFixed(digits);
    var exact = Math.abs(v).toFixed(Math.min(100, digits + 40));
    var dot = exact.indexOf(".");
    if (!/^50*$/.test(exact.slice(dot + 1 + digits))) { return text; }
    var toward = digits ? exact.slice(0, dot + 1 + digits) : exact.slice(0, dot);
    if (Number(toward.slice(-1)) % 2 === 1) { return text; }
    return (v < 0 ? "-" : "") + toward;
  }
  // ``digits`` decimals with thousands separators.
  function fixed(v, digits) {
    var parts = toFixedEven(v, digits).split(".");
    parts[0] = parts[0].replace(/\B(?=(\d{3})+(?!\d))/g, ",");
    return parts.join(".");
  }
  // numbers.money_text: whole units with separators, no "-0" (round() gives an int).
  function money(v) {
    if (v === null || v === undefined || isNaN(v)) { return "-"; }
    var text = fixed(v, 0);
    return /^-[0,]*$/.test(text) ? text.slice(1) : text;
  }
  // numbers.number_text: whole numbers and anything from 1,000 up as money_text, others to
  // the rule's decimals; ``decimals``: the series has decimals somewhere, so all take them.
  function num(v, decimals) {
    if (v === null || v === undefined || isNaN(v)) { return "-"; }
    if (Math.abs(v) < DUST) { v = 0; }
    if (Math.abs(v) >= RULE.whole_from || (Number.isInteger(v) && !decimals)) { return money(v); }
    var text = fixed(v, RULE.table_digits);
    return /^-[0.,]*$/.test(text) ? text.slice(1) : text;
  }
  // numbers.has_decimals.
  function hasDecimals(values) {
    return values.some(function (v) {
      return typeof v === "number" && isFinite(v) && Math.abs(v) >= DUST && Math.abs(v) < RULE.whole_from &&
        !Number.isInteger(v);
    });
  }
  // numbers.fte_total_text: a total of FTE-periods (a heat map cell, an office's spare).
  function total(v) {
    if (v === null || v === undefined || isNaN(v)) { return "-"; }
    return fixed(Math.abs(v) < DUST ? 0 : v, RULE.total_digits);
  }
  // An axis tick: a round number, in full.
  function tick(v) {
    return (Math.round(v * 100) / 100 + 0).toLocaleString("en");
  }
  // A share as numbers.share_text writes it: never 100% unless it is (298,500 of 300,000
  // had read 100%), never 0% when something was spent.
  function share(part, whole) {
    if (!whole) { return "-"; }
    // Float dust off the whole or off 0 is neither kept off 100% nor "under" anything
    // (rebalance.numbers.share_text).
    var dust = RULE.near_zero * Math.max(1, Math.abs(whole));
    var d = RULE.share_digits, step = Math.pow(10, -d);
    var p = Math.abs(part - whole) < dust ? 100 : Math.abs(part) < dust ? 0 : 100 * part / whole;
    var text = toFixedEven(p, d) + "%";
    if (text === (100).toFixed(d) + "%" && p !== 100) {
      return toFixedEven(p < 100 ? Math.min(p, 100 - step) : Math.max(p, 100 + step), d) + "%";
    }
    if (text === (0).toFixed(d) + "%" && p > 0) { return "under " + step.toFixed(d) + "%"; }
    return text;
  }
  function ticks(max, count, whole) {
    if (!(max > 0)) { return [0, 1]; }
    var raw = max / count, mag = Math.pow(10, Math.floor(Math.log10(raw)));
    var step = [1, 2, 2.5, 5, 10].map(function (m) { return m * mag; })
      .filter(function (s) { return s >= raw; })[0];
    if (whole) { step = Math.max(1, Math.round(step)); }
    var out = [], n = Math.ceil(max / step - 1e-9);
    for (var i = 0; i <= n; i++) { out.push(i * step); }
    return out;
  }
  // A period goes by its own name on every chart, as in every table, card and CSV file (a
  // chart's "Q1 \u201927" beside a table's "2027-Q1" had read as two names for one period).
  // Where the names would touch, fewer are written: every k-th, from the first, the least k
  // that leaves a gap between each two; the tooltips still name every period.
  var PERIOD_GAP = 8, PERIOD_FONT_PX = 11;  // .chart text's size in report.css
  var measurer = null;
  function textWidth(str) {
    if (measurer === null) {
      var canvas = document.createElement("canvas");
      measurer = (canvas.getContext && canvas.getContext("2d")) || false;
      if (measurer) { measurer.font = PERIOD_FONT_PX + "px " + getComputedStyle(document.body).fontFamily; }
    }
    // Without a canvas, a generous guess: most characters of a sans-serif are narrower.
    return measurer ? measurer.measureText(str).width : str.length * PERIOD_FONT_PX * 0.62;
  }
  // Period labels on one axis: ``at(i)`` is where period i's label centres, kept within
  // ``lo``..``hi``; returns how many periods each label stands for (k).
  function periodLabels(g, names, at, y, lo, hi) {
    var T = names.length, spans = names.map(function (name, i) {
      var w = textWidth(name), left = Math.max(lo, Math.min(hi - w, at(i) - w / 2));
      return [left, left + w];
    });
    var k = 1;
    for (; k < T; k++) {
      var clear = true;
      for (var i = k; i < T && clear; i += k) { clear = spans[i][0] - spans[i - k][1] >= PERIOD_GAP; }
      if (clear) { break; }
    }
    for (var j = 0; j < T; j += k) {
      label(g, spans[j][0], y, names[j], { "class": "period" });
    }
    g.setAttribute("data-period-step", String(k));
    return k;
  }
  function legend(box, items) {
    var div = document.createElement("div");
    div.className = "legend";
    items.forEach(function (it) {
      var span = document.createElement("span");
      span.style.setProperty("--c", it.color);
      if (it.line) { span.className = "line"; }
      if (it.spare) { span.className = "spare"; }
      span.textContent = it.text;
      div.appendChild(span);
    });
    box.appendChild(div);
  }
  function yAxis(g, y, values, x0, x1, format) {
    var grid = el("g", { "class": "grid" }, g);
    values.forEach(function (v) {
      el("line", { x1: x0, x2: x1, y1: y(v), y2: y(v) }, grid);
      label(grid, x0 - 5, y(v) + 3.5, (format || tick)(v), { "text-anchor": "end" });
    });
  }
  function points(xs, ys) {
    return xs.map(function (x, i) { return x.toFixed(2) + "," + ys[i].toFixed(2); }).join(" ");
  }

  /* ---------------------------------------------------------------- demand vs covered */
  function coverage(box, d) {
    var spareOf = function (s) { return s.spare || s.demand.map(function () { return 0; }); };
    legend(box, [{ color: C.staff, text: "covered by current staff" },
      { color: C.hire, text: "covered by new hires" },
      { color: C.short, text: "not covered (shortfall)" },
      { color: C.spare, text: "output beyond demand (spare, covers nothing)", spare: true },
      { color: C.ink, text: "demand", line: true }]);
    var grid = document.createElement("div");
    grid.className = "multiples";
    box.appendChild(grid);
    var T = d.periods.length, marks = 0;
    d.series.forEach(function (s) {
      var W = 340, H = 214, ml = 40, mr = 12, mt = 38, mb = 26, iw = W - ml - mr, ih = H - mt - mb;
      var cell = document.createElement("div");
      grid.appendChild(cell);
      var g = svg(cell, W, H), spare = spareOf(s), spareTotal = 0;
      var top = 0;
      for (var i = 0; i < T; i++) {
        top = Math.max(top, s.demand[i] + spare[i], s.staff[i] + s.hires[i]);
        spareTotal += spare[i];
      }
      var tk = ticks(top * 1.05 || 1, 4), ymax = tk[tk.length - 1] || 1;
      var x = function (i) { return ml + (T === 1 ? iw / 2 : i * iw / (T - 1)); };
      var y = function (v) { return mt + ih - v / ymax * ih; };
      label(g, ml - 34, 14, s.office, { "class": "title" });
      label(g, W - mr, 14, "FTE", { "text-anchor": "end" });  // the axis's unit
      label(g, ml - 34, 28, spareTotal >= 0.05 ? total(spareTotal) +
        " FTE-periods beyond demand (spare)" : "no output beyond demand",
        { "class": "spare-note" });
      yAxis(g, y, tk, ml, ml + iw);
      var xs = [], base = [], staffTop = [], covTop = [], dem = [], spareTop = [];
      for (i = 0; i < T; i++) {
        xs.push(x(i)); base.push(y(0)); staffTop.push(y(s.staff[i]));
        covTop.push(y(s.staff[i] + s.hires[i])); dem.push(y(s.demand[i]));
        spareTop.push(y(s.demand[i] + spare[i]));
      }
      var rev = function (a) { return a.slice().reverse(); };
      if (spareTotal > 0) {
        // A pale band above the demand line, its top edge dashed: output that covers nothing.
        el("polygon", { points: points(xs.concat(rev(xs)), spareTop.concat(rev(dem))),
          fill: C.spare, "class": "spare" }, g);
        el("polyline", { points: points(xs, spareTop), fill: "none", stroke: C.staff,
          "stroke-width": 1.2, "stroke-dasharray": "4 3" }, g);
        marks++;
      }
      el("polygon", { points: points(xs.concat(rev(xs)), dem.concat(rev(covTop))),
        fill: C.short, "fill-opacity": 0.55 }, g);
      el("polygon", { points: points(xs.concat(rev(xs)), covTop.concat(rev(staffTop))),
        fill: C.hire, "fill-opacity": 0.9 }, g);
      el("polygon", { points: points(xs.concat(rev(xs)), staffTop.concat(rev(base))),
        fill: C.staff, "fill-opacity": 0.85 }, g);
      el("polyline", { points: points(xs, dem), fill: "none", stroke: C.ink, "stroke-width": 2,
        "stroke-linejoin": "round" }, g);
      marks += 4;
      periodLabels(g, d.periods, x, H - 8, 0, W);
      for (i = 0; i < T; i++) {
        var half = T === 1 ? iw / 2 : iw / (T - 1) / 2;
        el("rect", { x: x(i) - half, y: mt, width: 2 * half, height: ih, fill: "transparent",
          "data-tip": s.office + ", " + d.periods[i] + "\ndemand " + num(s.demand[i], true) +
            " FTE\nstaff cover " + num(s.staff[i], true) + "\nhires add " +
            num(s.hires[i], true) + "\nshort " + num(s.shortfall[i], true) +
            "\nbeyond demand (spare) " + num(spare[i], true) }, g);
      }
    });
    return marks;
  }

  /* ---------------------------------------------------------------- shortfall heat map */
  function heatColour(t) {
    t = Math.max(0, Math.min(1, t));
    var seg = Math.min(HEAT.length - 2, Math.floor(t * (HEAT.length - 1)));
    var f = t * (HEAT.length - 1) - seg, a = HEAT[seg], b = HEAT[seg + 1];
    return "rgb(" + [0, 1, 2].map(function (k) { return Math.round(a[k] + (b[k] - a[k]) * f); })
      .join(",") + ")";
  }
  function heat(box, d) {
    var R = d.offices.length, T = d.periods.length;
    var lw = 170, cw = Math.max(52, Math.min(110, (900 - lw - 80) / T)), ch = 32, top = 26;
    var W = lw + T * cw + 80, H = top + (R + 1) * ch + 40;
    var g = svg(box, W, H), max = 0, marks = 0;
    d.cells.forEach(function (row) { row.forEach(function (c) { max = Math.max(max, c.shortfall); }); });
    periodLabels(g, d.periods, function (j) { return lw + j * cw + cw / 2; }, top - 8, lw, lw + T * cw);
    label(g, lw + T * cw + 40, top - 8, "total", { "text-anchor": "middle", "class": "title" });
    var colTotals = new Array(T).fill(0);
    d.cells.forEach(function (row, i) {
      var yy = top + i * ch, sum = 0;
      label(g, lw - 10, yy + ch / 2 + 4, d.offices[i], { "text-anchor": "end" });
      row.forEach(function (c, j) {
        sum += c.shortfall; colTotals[j] += c.shortfall;
        var t = max > 0 ? c.shortfall / max : 0;
        var tip = d.offices[i] + ", " + d.periods[j] + "\nshort " + num(c.shortfall, true) +
          " of " + num(c.demand, true) + " FTE demanded" + "\nweighted " +
          num(c.weighted, true) +
          (c.skills.length ? "\n" + (c.skills_short > c.skills.length ?
            "most short (" + c.skills.length + " of " + c.skills_short + " skills short): " :
            "skills short: ") + c.skills.join(", ") : "");
        el("rect", { x: lw + j * cw + 1, y: yy + 1, width: cw - 2, height: ch - 2, rx: 3,
          fill: c.shortfall > 1e-6 ? heatColour(0.12 + 0.88 * t) : "#f3f0e7", "data-tip": tip }, g);
        marks++;
        if (c.shortfall >= 0.05) {
          label(g, lw + j * cw + cw / 2, yy + ch / 2 + 4, total(c.shortfall), {
            "text-anchor": "middle", style: "pointer-events:none;fill:" + (t > 0.45 ? "#fff" : C.ink) });
        }
      });
      label(g, lw + T * cw + 40, yy + ch / 2 + 4, total(sum), { "text-anchor": "middle",
        "class": "title" });
    });
    var yb = top + R * ch + 4;
    label(g, lw - 10, yb + ch / 2 + 4, "all offices", { "text-anchor": "end", "class": "title" });
    colTotals.forEach(function (v, j) {
      label(g, lw + j * cw + cw / 2, yb + ch / 2 + 4, total(v), { "text-anchor": "middle",
        "class": "title" });
    });
    var ly = yb + ch + 8, lx = lw;
    label(g, lx - 10, ly + 9, "FTE short", { "text-anchor": "end" });
    for (var k = 0; k <= 20; k++) {
      el("rect", { x: lx + k * 8, y: ly, width: 8, height: 10, fill: heatColour(0.12 + 0.88 * k / 20) }, g);
    }
    label(g, lx, ly + 24, "0");
    label(g, lx + 168, ly + 24, total(max), { "text-anchor": "end" });
    return marks;
  }

  /* ---------------------------------------------------------------- movements */
  function flows(box, d) {
    if (!d.flows.length) { return empty(box, "No one is detailed or reassigned in this plan."); }
    legend(box, [{ color: C.detail, text: "details (person-periods)" },
      { color: C.move, text: "reassignments (person-periods to horizon end)" }]);
    var bands = [];
    d.flows.forEach(function (f) {
      if (f.detail_periods > 0) {
        bands.push({ from: f.from, to: f.to, v: f.detail_periods, kind: "detail",
          tip: f.from + " \u2192 " + f.to + "\n" + f.detail_periods + " detail periods, " +
            f.detail_people + (f.detail_people === 1 ? " person" : " people") });
      }
      if (f.reassigned_periods > 0) {
        bands.push({ from: f.from, to: f.to, v: f.reassigned_periods, kind: "move",
          tip: f.from + " \u2192 " + f.to + "\n" + f.reassignments + " reassignment" +
            (f.reassignments === 1 ? "" : "s") + " (" + f.reassigned_periods + " person-periods)" });
      }
    });
    var order = {};
    d.offices.forEach(function (o, i) { order[o] = i; });
    var outT = {}, inT = {};
    bands.forEach(function (b) { outT[b.from] = (outT[b.from] || 0) + b.v; inT[b.to] = (inT[b.to] || 0) + b.v; });
    var left = d.offices.filter(function (o) { return outT[o]; });
    var right = d.offices.filter(function (o) { return inT[o]; });
    var W = 900, pad = 14, x0 = 210, x1 = 690, nw = 14;
    var sum = 0;
    Object.keys(outT).forEach(function (k) { sum += outT[k]; });
    var n = Math.max(left.length, right.length);
    var H = Math.max(180, 34 * n + 40), inner = H - 30 - pad * (n - 1);
    var k = inner / sum;
    var g = svg(box, W, H);
    label(g, x0 + nw, 12, "home office", { "text-anchor": "end", "class": "title" });
    label(g, x1, 12, "office helped", { "class": "title" });
    function place(list, totals) {
      var pos = {}, y = 24;
      list.forEach(function (o) { pos[o] = { y: y, h: totals[o] * k, used: 0 }; y += totals[o] * k + pad; });
      return pos;
    }
    var L = place(left, outT), Rr = place(right, inT);
    bands.sort(function (a, b) { return order[a.from] - order[b.from] || order[a.to] - order[b.to]; });
    var atSource = bands.slice();
    atSource.forEach(function (b) { b.sy = L[b.from].y + L[b.from].used; L[b.from].used += b.v * k; });
    var atTarget = bands.slice().sort(function (a, b) {
      return order[a.to] - order[b.to] || order[a.from] - order[b.from];
    });
    atTarget.forEach(function (b) { b.ty = Rr[b.to].y + Rr[b.to].used; Rr[b.to].used += b.v * k; });
    var xm = (x0 + nw + x1) / 2, marks = 0;
    bands.forEach(function (b) {
      var h = b.v * k, a = x0 + nw, c = x1;
      var dpath = "M" + a + "," + b.sy + " C" + xm + "," + b.sy + " " + xm + "," + b.ty + " " + c + "," + b.ty +
        " L" + c + "," + (b.ty + h) + " C" + xm + "," + (b.ty + h) + " " + xm + "," + (b.sy + h) + " " +
        a + "," + (b.sy + h) + " Z";
      var p = el("path", { d: dpath, fill: b.kind === "move" ? C.move : C.detail,
        "fill-opacity": 0.45, stroke: "#fff", "stroke-width": 0.6, "data-tip": b.tip }, g);
      p.addEventListener("mouseenter", function () { p.setAttribute("fill-opacity", 0.8); });
      p.addEventListener("mouseleave", function () { p.setAttribute("fill-opacity", 0.45); });
      marks++;
    });
    left.forEach(function (o) {
      el("rect", { x: x0, y: L[o].y, width: nw, height: Math.max(L[o].h, 1.5), fill: C.ink, rx: 2 }, g);
      label(g, x0 - 8, L[o].y + L[o].h / 2 + 4, o + "  " + outT[o], { "text-anchor": "end" });
    });
    right.forEach(function (o) {
      el("rect", { x: x1, y: Rr[o].y, width: nw, height: Math.max(Rr[o].h, 1.5), fill: C.ink, rx: 2 }, g);
      label(g, x1 + nw + 8, Rr[o].y + Rr[o].h / 2 + 4, inT[o] + "  " + o);
    });
    return marks;
  }

  /* ---------------------------------------------------------------- hires by skill */
  function hires(box, d) {
    if (!d.skills.length) { return empty(box, "No hires in this plan."); }
    legend(box, d.skills.map(function (s, i) { return { color: SKILL[i % SKILL.length], text: s }; }));
    var T = d.periods.length, W = 900, H = 250, ml = 40, mr = 10, mt = 14, mb = 28;
    var iw = W - ml - mr, ih = H - mt - mb, totals = new Array(T).fill(0);
    d.counts.forEach(function (row) { row.forEach(function (v, t) { totals[t] += v; }); });
    var tk = ticks(Math.max.apply(null, totals) || 1, 4, true), ymax = tk[tk.length - 1] || 1;
    var g = svg(box, W, H);
    var y = function (v) { return mt + ih - v / ymax * ih; };
    yAxis(g, y, tk, ml, ml + iw);
    var bw = iw / T, marks = 0;
    for (var t = 0; t < T; t++) {
      var acc = 0;
      d.counts.forEach(function (row, si) {
        if (!row[t]) { return; }
        el("rect", { x: ml + t * bw + bw * 0.18, y: y(acc + row[t]), width: bw * 0.64,
          height: y(acc) - y(acc + row[t]), fill: SKILL[si % SKILL.length],
          "data-tip": d.periods[t] + "\n" + row[t] + " " + d.skills[si] + " hire" + (row[t] === 1 ? "" : "s") }, g);
        acc += row[t];
        marks++;
      });
      if (totals[t]) { label(g, ml + t * bw + bw / 2, y(acc) - 5, String(totals[t]), { "text-anchor": "middle", "class": "title" }); }
    }
    periodLabels(g, d.periods, function (i) { return ml + i * bw + bw / 2; }, H - 9, 0, W);
    return marks;
  }

  /* ---------------------------------------------------------------- spending vs caps */
  var PART = { onboarding: ["#6f9a55", "onboarding"],
    new_position_salary: ["#b5d09d", "new-position salaries"],
    detail: ["#3f7f94", "details"], relocation: ["#9cc3cf", "relocations"] };
  function budget(box, d, page) {
    if (!d.length) { return empty(box, "No budget years in this plan."); }
    legend(box, Object.keys(PART).map(function (k) { return { color: PART[k][0], text: PART[k][1] }; })
      .concat([{ color: C.ink, text: "cap for the year", line: true }]));
    // One scale for every line, so bar lengths compare across years and budget lines.
    var top = 0;
    d.forEach(function (r) { top = Math.max(top, r.cap || 0, r.spend); });
    var tk = ticks(top || 1, 5), dom = tk[tk.length - 1] || 1;
    var W = 900, rh = 36, lw = 130, bw = 560, axisY = 8 + d.length * rh + 4, H = axisY + 30;
    var g = svg(box, W, H), marks = 0;
    var xv = function (v) { return lw + v / dom * bw; };
    var axis = el("g", { "class": "axis" }, g), gridG = el("g", { "class": "grid" }, g);
    tk.forEach(function (v) {
      el("line", { x1: xv(v), x2: xv(v), y1: 6, y2: axisY }, gridG);
      el("line", { x1: xv(v), x2: xv(v), y1: axisY, y2: axisY + 4 }, axis);
      label(axis, xv(v), axisY + 16, money(v), { "text-anchor": "middle" });
    });
    el("line", { x1: lw, x2: lw + bw, y1: axisY, y2: axisY }, axis);
    // The page's currency, where the instance names one: the axis says it, as the caption does.
    var unit = page && page.currency ? ", in " + page.currency : "";
    label(axis, lw - 12, axisY + 16, "one scale" + unit, { "text-anchor": "end" });
    d.forEach(function (r, i) {
      var yy = 8 + i * rh, keys = Object.keys(r.parts);
      label(g, lw - 12, yy + 17, r.year + " " + r.kind, { "text-anchor": "end", "class": "title" });
      var acc = 0;
      keys.forEach(function (key) {
        var v = r.parts[key];
        if (v <= 0) { return; }
        el("rect", { x: xv(acc), y: yy + 7, width: v / dom * bw, height: 14,
          fill: (PART[key] || [C.staff])[0], "data-v": v,
          "data-tip": r.year + " " + ((PART[key] || [0, key])[1]) + ": " + money(v) }, g);
        acc += v;
        marks++;
      });
      var over = r.cap !== null && r.spend > r.cap + 0.5;
      if (r.cap !== null) {
        var cx = xv(r.cap);
        el("line", { x1: cx, x2: cx, y1: yy + 1, y2: yy + 27, stroke: C.ink, "stroke-width": 2.5,
          "data-tip": r.year + " " + r.kind + " cap: " + money(r.cap) }, g);
      }
      var words = money(r.spend) + (r.cap === null ? " spent, no cap" :
        " of " + money(r.cap) + " (" + share(r.spend, r.cap) + " used)");
      label(g, lw + bw + 14, yy + 18, words, over ? { style: "fill:" + C.short } : {});
      marks++;
    });
    return marks;
  }

  /* ---------------------------------------------------------------- analysis charts */
  function frontier(box, d) {
    var all = [];
    d.series.forEach(function (s) { all = all.concat(s.points); });
    if (d.series.length > 1) {
      legend(box, d.series.map(function (s, i) { return { color: LINES[i % LINES.length], text: s.label, line: true }; }));
    }
    var W = 900, H = 300, ml = 56, mr = 24, mt = 30, mb = 40, iw = W - ml - mr, ih = H - mt - mb;
    var xsRaw = all.map(function (p) { return p.x; }), ysRaw = all.map(function (p) { return p.y; });
    var xmin = Math.min.apply(null, xsRaw), xmax = Math.max.apply(null, xsRaw);
    if (xmax === xmin) { xmax = xmin + 1; }
    // The y axis spans the data, not 0 to the top: the shortfalls of a frontier differ by a
    // few percent (175.5, 168.6, 165.8), which a 0-based axis drew as a flat line.  A note
    // under the axis title says it does not start at 0.
    var ylo = Math.min.apply(null, ysRaw), yhi = Math.max.apply(null, ysRaw);
    var span = yhi - ylo || Math.abs(yhi) * 0.1 || 1;
    var tk = ticks(span * 1.2, 4), step = tk[1] - tk[0];
    var y0 = Math.floor((ylo - span * 0.1) / step) * step;
    if (ylo >= 0 && y0 < span * 0.5) { y0 = 0; }  // near 0 anyway: start there
    tk = [];
    for (var v = y0; v < yhi + step - 1e-9; v += step) { tk.push(v); }
    var ymin = tk[0], ymax = tk[tk.length - 1] > ymin ? tk[tk.length - 1] : ymin + 1;
    var x = function (v) { return ml + (v - xmin) / (xmax - xmin) * iw; };
    var y = function (v) { return mt + ih - (v - ymin) / (ymax - ymin) * ih; };
    var g = svg(box, W, H), marks = 0, seen = {};
    // Budgets, shortfalls and costs as the frontier table below writes them.
    var xDec = hasDecimals(xsRaw), yDec = hasDecimals(ysRaw);
    var xName = d.x_label.replace(/_/g, " "), yName = d.y_label.replace(/_/g, " ");
    var costName = (d.cost_label || "cost").replace(/_/g, " ");
    yAxis(g, y, tk, ml, ml + iw);
    all.forEach(function (p) {
      if (seen[p.x]) { return; }
      seen[p.x] = true;
      label(g, x(p.x), H - 20, num(p.x, xDec), { "text-anchor": "middle" });
    });
    label(g, ml + iw / 2, H - 4, xName, { "text-anchor": "middle", "class": "title" });
    label(g, 4, 10, yName, { "class": "title" });
    if (ymin > 0) {
      label(g, 4, 23, "axis starts at " + tick(ymin) + ", not 0", { "class": "axis-note" });
    }
    // Each point's value beside it, where the points are few enough to read.
    var writeValues = all.length <= 12;
    d.series.forEach(function (s, i) {
      var colour = LINES[i % LINES.length];
      el("polyline", { points: points(s.points.map(function (p) { return x(p.x); }),
        s.points.map(function (p) { return y(p.y); })), fill: "none", stroke: colour, "stroke-width": 2.5 }, g);
      marks++;
      s.points.forEach(function (p) {
        // Among fewer than four points any line bends somewhere: a "knee" there says nothing
        // about where money starts to buy less (analysis_charts clears it too).
        if (p.knee && s.points.length >= 4) {
          el("circle", { cx: x(p.x), cy: y(p.y), r: 10, fill: "none", stroke: C.amber, "stroke-width": 3 }, g);
          label(g, x(p.x) + 13, y(p.y) - 10, "knee", { "class": "title" });
        }
        el("circle", { cx: x(p.x), cy: y(p.y), r: 4.5, fill: colour,
          "data-tip": (s.label ? s.label + "\n" : "") + xName + " " + num(p.x, xDec) + "\n" +
            yName + " " + num(p.y, yDec) +
            (p.cost !== null ? "\n" + costName + " " + money(p.cost) : "") }, g);
        if (writeValues) {
          // Above and to the left, where a knee's word (above, to the right) is not; at the
          // left edge to the right, clear of the axis's numbers.
          var first = x(p.x) - ml < 40;
          label(g, x(p.x) + (first ? 7 : -7), y(p.y) - 9, num(p.y, yDec), {
            "text-anchor": first ? "start" : "end", "class": "point-value" });
        }
        marks++;
      });
    });
    return marks;
  }
  // A bar label that fits its room: whole if it can, else on two lines broken between
  // words, else cut with an ellipsis; the full text is its tooltip (and <title>).
  function fitText(g, str, room) {
    var probe = label(g, 0, -100, str);
    var width = function (t) {
      probe.textContent = t;
      var w = probe.getComputedTextLength ? probe.getComputedTextLength() : 0;
      return w > 0 ? w : t.length * 6.2;  // not laid out: about 6.2 units a character
    };
    var cut = function (t) {
      if (width(t) <= room) { return t; }
      while (t.length > 1 && width(t + "\u2026") > room) { t = t.slice(0, -1); }
      return t.replace(/\s+$/, "") + "\u2026";
    };
    var lines = [str];
    if (width(str) > room) {
      var words = str.split(" "), best = null;
      for (var i = 1; i < words.length; i++) {
        var a = words.slice(0, i).join(" "), b = words.slice(i).join(" ");
        if (width(a) <= room) { best = [a, b]; }
      }
      lines = best ? [best[0], cut(best[1])] : [cut(str)];
    }
    g.removeChild(probe);
    return lines;
  }
  // ``isMoney``: the values are money (a scenario's total cost), written in full.
  function hbars(parent, labels, values, title, colour, W, ticksAt, tips, isMoney) {
    var dec = hasDecimals(values.concat(ticksAt || []));
    var write = function (v) { return isMoney ? money(v) : num(v, dec); };
    var g0 = svg(parent, W, 10);
    var widest = 0;
    labels.forEach(function (l) {
      var t = label(g0, 0, -100, l);
      widest = Math.max(widest, t.getComputedTextLength ? t.getComputedTextLength() || l.length * 6.2 : l.length * 6.2);
      g0.removeChild(t);
    });
    // Labels get at most 38% of the width; longer ones wrap or are cut (full text on hover).
    var lw = Math.min(Math.ceil(widest) + 16, Math.round(W * 0.38));
    var room = lw - 10, rm = ticksAt ? 150 : 72, bw = W - lw - rm;
    var lines = labels.map(function (l) { return fitText(g0, l, room); });
    var two = lines.some(function (ls) { return ls.length > 1; });
    var rh = two ? 32 : 24, H = labels.length * rh + 28;
    g0.setAttribute("viewBox", "0 0 " + W + " " + H);
    var g = g0;
    label(g, 0, 13, title, { "class": "title" });
    var max = Math.max.apply(null, values.concat(ticksAt || []).map(function (v) { return Math.abs(v || 0); })) || 1;
    var marks = 0;
    labels.forEach(function (l, i) {
      var v = values[i], yy = 22 + i * rh, mid = yy + rh / 2, tip = (tips && tips[i]) || l;
      var t = label(g, lw - 10, mid + 4 - (lines[i].length - 1) * 6.5, "", { "text-anchor": "end",
        "data-tip": tip, "class": "bar-label" });
      lines[i].forEach(function (line, k) {
        var span = el("tspan", { x: lw - 10, dy: k ? 13 : 0 }, t);
        span.textContent = line;
      });
      el("title", {}, t).textContent = l;
      if (v === null) { label(g, lw, mid + 4, "-"); return; }
      var end = lw + Math.abs(v) / max * bw;
      el("rect", { x: lw, y: mid - 8, width: Math.max(1, Math.abs(v) / max * bw), height: 16, rx: 2,
        fill: v < 0 ? C.short : colour, "data-tip": tip + "\n" + title + ": " + write(v) +
          (ticksAt && ticksAt[i] !== null && ticksAt[i] !== undefined ? "\nestimate: " + write(ticksAt[i]) : "") }, g);
      marks++;
      var words = write(v);
      var est = ticksAt ? ticksAt[i] : null;
      if (est !== null && est !== undefined) {
        var tx = lw + Math.abs(est) / max * bw;
        el("line", { x1: tx, x2: tx, y1: mid - 11, y2: mid + 11, stroke: C.ink, "stroke-width": 2.5,
          "class": "estimate", "data-v": est, "data-tip": l + "\nestimate: " + write(est) }, g);
        end = Math.max(end, tx);
        words += " (estimate " + write(est) + ")";
      }
      label(g, end + 6, mid + 4, words, { "class": "bar-value" });
    });
    return marks;
  }
  function scenarios(box, d) {
    var grid = document.createElement("div");
    grid.className = "multiples";
    box.appendChild(grid);
    var marks = 0;
    d.metrics.forEach(function (m, i) {
      var cell = document.createElement("div");
      grid.appendChild(cell);
      marks += hbars(cell, d.labels, m.values, m.name.replace(/_/g, " "), i === 0 ? C.short : C.staff, 340,
        null, null, m.money);
    });
    return marks;
  }
  function marginal(box, d) {
    var estimates = d.rows.map(function (r) { return r.estimate === undefined ? null : r.estimate; });
    var any = estimates.some(function (v) { return v !== null; });
    var measured = (d.value_label || "value").replace(/_/g, " ");
    legend(box, [{ color: C.move, text: measured + ", measured by a re-solve (value after the bar)" }]
      .concat(any ? [{ color: C.ink, text: (d.estimate_label || "estimate").replace(/_/g, " ") +
        ", an estimate from the relaxed LP (value in brackets)", line: true }] : []));
    return hbars(box, d.rows.map(function (r) { return r.label; }),
      d.rows.map(function (r) { return r.value; }), d.title || measured, C.move, 900,
      any ? estimates : null, d.rows.map(function (r) { return r.tip || r.label; }));
  }

  var CHARTS = { coverage: coverage, heat: heat, flows: flows, hires: hires, budget: budget,
    frontier: frontier, scenarios: scenarios, marginal: marginal };

  /* ---------------------------------------------------------------- tooltips and tables */
  function tooltips() {
    var tip = document.createElement("div");
    tip.className = "tip";
    document.body.appendChild(tip);
    document.addEventListener("mousemove", function (ev) {
      var t = ev.target && ev.target.closest ? ev.target.closest("[data-tip]") : null;
      if (!t) { tip.style.opacity = 0; return; }
      tip.textContent = t.getAttribute("data-tip");
      var x = ev.clientX + 14, y = ev.clientY + 14;
      if (x + 330 > window.innerWidth) { x = ev.clientX - 330; }
      tip.style.left = x + "px"; tip.style.top = y + "px"; tip.style.opacity = 1;
    });
  }
  function sortable(table) {
    var heads = table.querySelectorAll("thead th");
    heads.forEach(function (th, col) {
      function run() {
        var body = table.tBodies[0], rows = Array.prototype.slice.call(body.rows);
        var dir = th.getAttribute("aria-sort") === "ascending" ? -1 : 1;
        heads.forEach(function (h) { h.removeAttribute("aria-sort"); });
        th.setAttribute("aria-sort", dir === 1 ? "ascending" : "descending");
        var numeric = rows.every(function (r) { return !r.cells[col] || r.cells[col].hasAttribute("data-v") || r.cells[col].textContent === ""; });
        rows.sort(function (a, b) {
          var ca = a.cells[col], cb = b.cells[col];
          if (numeric) {
            var va = parseFloat(ca && ca.getAttribute("data-v")), vb = parseFloat(cb && cb.getAttribute("data-v"));
            va = isNaN(va) ? -Infinity : va; vb = isNaN(vb) ? -Infinity : vb;
            return (va - vb) * dir;
          }
          return (ca ? ca.textContent : "").localeCompare(cb ? cb.textContent : "", "en", { numeric: true }) * dir;
        });
        rows.forEach(function (r) { body.appendChild(r); });
      }
      th.addEventListener("click", run);
      th.addEventListener("keydown", function (ev) { if (ev.key === "Enter" || ev.key === " ") { ev.preventDefault(); run(); } });
    });
  }

  // A table taller than its scroll box says how many rows it has, above the box: the box
  // alone showed 13 of 67 rows with nothing to say there were more.
  function scrollNotes() {
    document.querySelectorAll(".table-wrap").forEach(function (wrap) {
      var table = wrap.querySelector("table");
      var before = wrap.previousElementSibling;
      if (before && before.className === "scroll-note") { return; }  // said already
      if (!table || !table.tBodies.length || wrap.scrollHeight <= wrap.clientHeight + 1) { return; }
      var n = table.tBodies[0].rows.length;
      var note = document.createElement("p");
      note.className = "scroll-note";
      note.textContent = n.toLocaleString("en") + (n === 1 ? " row" : " rows") + "; scroll for more";
      wrap.parentNode.insertBefore(note, wrap);
    });
  }

  function main() {
    var data = JSON.parse(document.getElementById("report-data").textContent);
    if (data.numbers) { RULE = data.numbers; }
    var boxes = document.querySelectorAll(".chart[data-chart]"), drawn = 0;
    boxes.forEach(function (box) {
      var kind = box.getAttribute("data-chart");
      try {
        if (!CHARTS[kind] || !data[kind]) { throw new Error("no data"); }
        var marks = CHARTS[kind](box, data[kind], data);  // the whole data: page-wide settings
        box.setAttribute("data-marks", String(marks));
        box.setAttribute("data-drawn", "yes");
        drawn++;
      } catch (err) {
        box.setAttribute("data-drawn", "error");
        console.error("chart '" + kind + "' could not be drawn: " + err);
      }
    });
    document.body.setAttribute("data-charts-total", String(boxes.length));
    document.body.setAttribute("data-charts-drawn", String(drawn));
    document.querySelectorAll("table.sortable").forEach(sortable);
    scrollNotes();
    // A table folded away (the full reasons, below their summary) has no height until opened.
    document.querySelectorAll("details").forEach(function (d) {
      d.addEventListener("toggle", scrollNotes);
    });
    tooltips();
  }
  if (document.readyState === "loading") { document.addEventListener("DOMContentLoaded", main); } else { main(); }
})();
