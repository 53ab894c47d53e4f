/*
 * veer task pane (plain ES2019): the connection of the add-in's runtime to
 * the veer server, the models on the server with their diagnostics, and the
 * charts of the worker on the selected row — the reference band of healthy
 * workers over age with the worker's readings, and the monitoring chart
 * statistic against its limit with signals marked. Every number comes from
 * the server through the same client the cell functions use (veer.js).
 *
 * Outside a spreadsheet (and in tests) window.veerPane.showWorker({model,
 * worker, group, ages, values, options, unit}) draws a worker's charts.
 */
(function () {
  "use strict";

  var veer = window.veer;
  var SVGNS = "http://www.w3.org/2000/svg";
  // Okabe-Ito colours (see taskpane.css); each also differs in shape.
  var C = { blue: "#0072B2", sky: "#56B4E9", vermillion: "#D55E00", ink: "#1a1a1a", grid: "#e4e4e4", muted: "#555" };
  // Units and marker names of the built-in demo models; for other models
  // the pane's settings give the unit.
  var DEMO = {
    "demo-sbp": { marker: "Systolic blood pressure", unit: "mmHg", column: "sbp" },
    "demo-fev1": { marker: "FEV1", unit: "litres", column: "fev1" }
  };
  var CENTILES = [2.5, 10, 50, 90, 97.5];
  var GRID = 61;

  function $(id) { return document.getElementById(id); }

  // ---- settings --------------------------------------------------------

  var SETTINGS_KEY = "veer.pane";
  var settings = { options: "target=20", cols: { id: "worker", age: "age", value: "", group: "group" }, unit: "" };
  try {
    var saved = JSON.parse(window.localStorage.getItem(SETTINGS_KEY) || "null");
    if (saved) settings = Object.assign(settings, saved, { cols: Object.assign(settings.cols, saved.cols || {}) });
  } catch (e) { /* defaults */ }

  function fillSettings() {
    $("options").value = settings.options;
    $("col-id").value = settings.cols.id;
    $("col-age").value = settings.cols.age;
    $("col-value").value = settings.cols.value;
    $("col-group").value = settings.cols.group;
    $("unit").value = settings.unit;
    $("server").value = veer.client.server;
  }

  function saveSettings(ev) {
    ev.preventDefault();
    settings.options = $("options").value.trim() || "target=20";
    settings.cols = { id: $("col-id").value.trim(), age: $("col-age").value.trim(), value: $("col-value").value.trim(), group: $("col-group").value.trim() };
    settings.unit = $("unit").value.trim();
    try { window.localStorage.setItem(SETTINGS_KEY, JSON.stringify(settings)); } catch (e) { /* session only */ }
    var msg = "Saved.";
    var tok = $("token").value.trim();
    if (tok) {
      veer.setToken(tok);
      $("token").value = "";
      msg = "Saved; token sent to the server.";
    }
    try {
      veer.setServer($("server").value.trim() || veer.client.server);
    } catch (e) {
      msg = "Not saved: " + e.message;
    }
    $("settings-saved").textContent = msg;
  }

  // ---- formatting ------------------------------------------------------

  function fmt(v, digits) {
    if (typeof v === "number") {
      if (!isFinite(v)) return String(v);
      if (Number.isInteger(v)) return v.toLocaleString("en");
      var a = Math.abs(v);
      if (a !== 0 && (a < 0.001 || a >= 1e6)) return v.toExponential(2);
      return String(Number(v.toPrecision(digits || 4)));
    }
    if (typeof v === "boolean") return v ? "yes" : "no";
    if (v === null || v === undefined) return "";
    if (typeof v === "object" && v.error) return v.error;
    return String(v);
  }

  function errText(e) {
    if (!e) return "unknown error";
    return (e.code ? e.code + " " : "") + (e.message || "");
  }

  // ---- status ----------------------------------------------------------

  var lastState = "";
  function showStatus(s) {
    var el = $("status");
    var host = s.server.replace(/^https?:\/\//, "");
    var text, cls;
    if (s.state === "connected") {
      cls = "ok";
      text = "Connected to veer on " + host;
      if (s.tokenState === "accepted") text += " · token accepted (fitting allowed)";
      if (s.tokenState === "refused") {
        cls = "bad";
        text += " · token refused: " + s.tokenMessage;
      }
    } else if (s.state === "connecting" || s.state === "idle") {
      cls = "wait";
      text = "Connecting to veer on " + host + "…";
    } else {
      cls = "bad";
      text = "veer server not running on " + host + " (start it with 'veer serve')";
      if (s.retryInMs > 0) text += "; retrying in " + Math.ceil(s.retryInMs / 1000) + " s";
    }
    if (s.pending) text += " · " + s.pending + " call" + (s.pending === 1 ? "" : "s") + " in progress";
    el.className = "status " + cls;
    $("status-text").textContent = text;
    if (s.state === "connected" && lastState !== "connected") refreshModels();
    lastState = s.state;
    showErrors();
  }

  function showErrors() {
    var list = $("errors");
    var errs = veer.recentErrors().slice(0, 8);
    list.textContent = "";
    if (!errs.length) {
      var li = document.createElement("li");
      li.className = "hint";
      li.textContent = "None.";
      list.appendChild(li);
      return;
    }
    errs.forEach(function (e) {
      var li = document.createElement("li");
      var code = document.createElement("code");
      code.textContent = e.code;
      li.appendChild(code);
      li.appendChild(document.createTextNode(" " + (e.fn ? e.fn + ": " : "") + e.message));
      list.appendChild(li);
    });
  }

  // ---- models and diagnostics -----------------------------------------

  var models = [];
  var infoSub = null;
  var infoRows = {}; // model -> last VEER.INFO rows
  var modelsLoaded;

  function refreshModels() {
    modelsLoaded = fetch(veer.client.server + "/v1/models", { cache: "no-store" }).then(function (r) {
      if (!r.ok) throw new Error("HTTP " + r.status);
      return r.json();
    }).then(function (doc) {
      models = (doc.models || []).map(function (m) { return m.name; });
      var sel = $("model");
      var keep = sel.value;
      sel.textContent = "";
      (doc.models || []).forEach(function (m) {
        var o = document.createElement("option");
        o.value = m.name;
        o.textContent = m.name + " (" + m.latest + (m.builtin ? ", built in" : "") + ")";
        sel.appendChild(o);
      });
      if (keep && models.indexOf(keep) >= 0) sel.value = keep;
      return selectModel(sel.value);
    }, function (e) {
      var sel = $("model");
      sel.textContent = "";
      var o = document.createElement("option");
      o.value = "";
      o.textContent = "(cannot list models: " + e.message + ")";
      sel.appendChild(o);
    });
    return modelsLoaded;
  }

  // selectModel shows the model's diagnostics; they update when it is
  // refitted (VEER.INFO streams). It resolves once they are shown, or when
  // another selection replaces this one.
  var infoDone = null;
  function selectModel(name) {
    if (infoSub) infoSub.cancel();
    infoSub = null;
    if (infoDone) infoDone();
    infoDone = null;
    var sel = $("model");
    if (name && sel.value !== name) sel.value = name;
    if (!name) return Promise.resolve();
    return new Promise(function (resolve) {
      var done = function () {
        if (infoDone === done) infoDone = null;
        resolve();
      };
      infoDone = done;
      infoSub = veer.request("VEER.INFO", [name], {
        subscribe: true,
        onResult: function (rows) {
          infoRows[name] = rows;
          renderInfo(rows);
          done();
        },
        onError: function (e) {
          renderInfo([["error", errText(e)]]);
          done();
        }
      });
    });
  }

  function renderInfo(rows) {
    var handle = (rows || []).filter(function (r) { return r[0] === "handle"; })[0];
    $("diag-summary").textContent = "Diagnostics of " + (handle ? handle[1] : "the selected model") + " (" + (rows || []).length + " items, VEER.INFO)";
    var body = $("info").tBodies[0];
    body.textContent = "";
    (rows || []).forEach(function (r) {
      var tr = document.createElement("tr");
      var th = document.createElement("td");
      th.textContent = r[0];
      var td = document.createElement("td");
      td.textContent = fmt(r[1]);
      if (typeof r[1] === "number") td.className = "num";
      tr.appendChild(th);
      tr.appendChild(td);
      body.appendChild(tr);
    });
  }

  function modelInfo(name) {
    if (infoRows[name]) return Promise.resolve(infoRows[name]);
    return veer.call("VEER.INFO", [name]).then(function (rows) {
      infoRows[name] = rows;
      return rows;
    });
  }

  // ageRange reads the reference age range of a group from VEER.INFO rows.
  function ageRange(rows, group) {
    var from = Infinity, to = -Infinity;
    (rows || []).forEach(function (r) {
      var m = /^group (.*): age (from|to)$/.exec(String(r[0]));
      if (!m || typeof r[1] !== "number") return;
      if (group && m[1] !== group && m[1] !== "all") return;
      if (m[2] === "from") from = Math.min(from, r[1]);
      else to = Math.max(to, r[1]);
    });
    return isFinite(from) && isFinite(to) && from < to ? { from: from, to: to } : null;
  }

  // ---- SVG helpers -----------------------------------------------------

  function el(tag, attrs, parent, text) {
    var e = document.createElementNS(SVGNS, tag);
    Object.keys(attrs || {}).forEach(function (k) { e.setAttribute(k, attrs[k]); });
    if (text !== undefined) e.textContent = text;
    if (parent) parent.appendChild(e);
    return e;
  }

  // niceTicks returns about n round tick values covering [lo, hi], after
  // Heckbert (1990), "Nice numbers for graph labels", Graphics Gems.
  function niceTicks(lo, hi, n) {
    function nice(x, round) {
      var e = Math.floor(Math.log10(x));
      var f = x / Math.pow(10, e);
      var nf = round ? (f < 1.5 ? 1 : f < 3 ? 2 : f < 7 ? 5 : 10) : (f <= 1 ? 1 : f <= 2 ? 2 : f <= 5 ? 5 : 10);
      return nf * Math.pow(10, e);
    }
    if (!(hi > lo)) hi = lo + 1;
    var step = nice(nice(hi - lo, false) / Math.max(1, n - 1), true);
    var out = [];
    for (var v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Number(v.toPrecision(12)));
    return out;
  }

  function scale(d0, d1, r0, r1) {
    return function (v) { return r0 + (v - d0) / (d1 - d0) * (r1 - r0); };
  }

  // frame draws grid, ticks, axis lines and labels, and returns the scales.
  function frame(svg, box, xd, yd, xlabel, ylabel) {
    // Widen the vertical range to whole tick steps, so the axis starts and
    // ends on a labelled value.
    var yt = niceTicks(yd[0], yd[1], 6);
    if (yt.length > 1) {
      var step = yt[1] - yt[0];
      yd = [Math.floor(yd[0] / step + 1e-9) * step, Math.ceil(yd[1] / step - 1e-9) * step];
    }
    var x = scale(xd[0], xd[1], box.l, box.w - box.r);
    var y = scale(yd[0], yd[1], box.h - box.b, box.t);
    var g = el("g", { "class": "axes", "font-size": "12", fill: C.ink }, svg);
    niceTicks(yd[0], yd[1], 6).forEach(function (v) {
      if (v < yd[0] || v > yd[1]) return;
      el("line", { x1: box.l, x2: box.w - box.r, y1: y(v), y2: y(v), stroke: C.grid }, g);
      el("text", { x: box.l - 6, y: y(v) + 4, "text-anchor": "end" }, g, fmt(v, 4));
    });
    niceTicks(xd[0], xd[1], 8).forEach(function (v) {
      if (v < xd[0] || v > xd[1]) return;
      el("line", { x1: x(v), x2: x(v), y1: box.h - box.b, y2: box.h - box.b + 5, stroke: C.ink }, g);
      el("text", { x: x(v), y: box.h - box.b + 18, "text-anchor": "middle" }, g, fmt(v, 4));
    });
    el("line", { x1: box.l, x2: box.w - box.r, y1: box.h - box.b, y2: box.h - box.b, stroke: C.ink }, g);
    el("line", { x1: box.l, x2: box.l, y1: box.t, y2: box.h - box.b, stroke: C.ink }, g);
    el("text", { x: (box.l + box.w - box.r) / 2, y: box.h - 6, "text-anchor": "middle", "font-size": "13" }, g, xlabel);
    el("text", { transform: "translate(14," + ((box.t + box.h - box.b) / 2) + ") rotate(-90)", "text-anchor": "middle", "font-size": "13" }, g, ylabel);
    return { x: x, y: y };
  }

  function newSVG(host, id, w, h, title, desc) {
    host.textContent = "";
    var svg = el("svg", { viewBox: "0 0 " + w + " " + h, width: w, height: h, role: "img", "aria-labelledby": id + "-title " + id + "-desc" });
    el("title", { id: id + "-title" }, svg, title);
    el("desc", { id: id + "-desc" }, svg, desc);
    el("rect", { x: 0, y: 0, width: w, height: h, fill: "#fff" }, svg);
    host.appendChild(svg);
    return svg;
  }

  // runs splits a series into runs of consecutive finite points (gaps where
  // the server had no value).
  function runs(xs, ys) {
    var out = [], cur = [];
    for (var i = 0; i < xs.length; i++) {
      if (typeof ys[i] === "number" && isFinite(ys[i])) cur.push([xs[i], ys[i]]);
      else if (cur.length) { out.push(cur); cur = []; }
    }
    if (cur.length) out.push(cur);
    return out;
  }

  function diamond(cx, cy, r) {
    return "M" + cx + " " + (cy - r) + " L" + (cx + r) + " " + cy + " L" + cx + " " + (cy + r) + " L" + (cx - r) + " " + cy + " Z";
  }

  function triangle(cx, cy, r) {
    return "M" + cx + " " + (cy - r) + " L" + (cx + r) + " " + (cy + r * 0.8) + " L" + (cx - r) + " " + (cy + r * 0.8) + " Z";
  }

  // ---- worker charts ---------------------------------------------------

  function column(xs) { return xs.map(function (v) { return [v]; }); }

  function numbersOf(col) {
    if (!Array.isArray(col)) return [typeof col === "number" ? col : NaN];
    return col.map(function (r) {
      var v = Array.isArray(r) ? r[0] : r;
      return typeof v === "number" ? v : NaN;
    });
  }

  function settle(p) {
    return p.then(function (v) { return { value: v }; }, function (e) { return { error: e }; });
  }

  // showWorker draws the charts of one worker; it resolves when drawn.
  function showWorker(w) {
    var model = w.model || $("model").value;
    var opts = (w.options || settings.options || "").trim();
    if (!/(^|;)\s*(target|limit)\s*=/.test(opts)) opts = "target=20" + (opts ? "; " + opts : "");
    var demo = DEMO[model] || {};
    var unit = w.unit || settings.unit || demo.unit || "";
    var marker = w.marker || demo.marker || "Reading";
    var group = w.group === undefined || w.group === null ? "" : String(w.group);
    var ages = w.ages.map(Number), values = w.values.map(Number);
    var n = ages.length;
    $("worker-hint").hidden = true;
    $("worker").hidden = false;
    $("worker-caption").textContent = "Worker " + w.worker + (group ? " (group " + group + ")" : "") + " · model " + model + " · " + opts;
    return modelInfo(model).catch(function () { return []; }).then(function (info) {
      var lo = Math.min.apply(null, ages), hi = Math.max.apply(null, ages);
      var ref = ageRange(info, group) || { from: lo - 2, to: hi + 2 };
      var g0 = Math.max(ref.from, lo - 3), g1 = Math.min(ref.to, hi + 3);
      if (!(g1 > g0)) { g0 = ref.from; g1 = ref.to; }
      var grid = [];
      for (var i = 0; i < GRID; i++) grid.push(Number((g0 + (g1 - g0) * i / (GRID - 1)).toFixed(3)));
      // All in the same tick: one websocket frame for the quick centile
      // calls, one for the chart.
      var cent = CENTILES.map(function (p) {
        return settle(veer.call("VEER.CENTILE", [model, column(grid), p, group || null]));
      });
      var ids = ages.map(function () { return w.worker; });
      var chart = settle(veer.call("VEER.CHART", [model, column(ids), column(ages), column(values), group || null, opts]));
      return Promise.all(cent.concat([chart])).then(function (res) {
        var band = res.slice(0, CENTILES.length).map(function (r) { return r.error ? grid.map(function () { return NaN; }) : numbersOf(r.value); });
        var bandErr = res.slice(0, CENTILES.length).filter(function (r) { return r.error; })[0];
        var ch = res[CENTILES.length];
        var rows = ch.error ? null : ch.value;
        drawWorker({ w: w, model: model, group: group, unit: unit, marker: marker, opts: opts, grid: grid, band: band, bandErr: bandErr && bandErr.error, rows: rows, chartErr: ch.error, ages: ages, values: values, n: n });
      });
    });
  }

  function drawWorker(d) {
    var order = d.ages.map(function (_, i) { return i; }).sort(function (a, b) { return d.ages[a] - d.ages[b]; });
    var ages = order.map(function (i) { return d.ages[i]; });
    var vals = order.map(function (i) { return d.values[i]; });
    var rows = d.rows ? order.map(function (i) { return d.rows[i] || []; }) : null;
    var lo95 = d.band[0], hi95 = d.band[4];
    // Is each reading outside the central 95%? Compare with the band at its
    // age (linear interpolation on the grid).
    function at(series, a) {
      var g = d.grid;
      if (a < g[0] || a > g[g.length - 1]) return NaN;
      var j = Math.min(g.length - 2, Math.max(0, Math.floor((a - g[0]) / (g[g.length - 1] - g[0]) * (g.length - 1))));
      var t = (a - g[j]) / (g[j + 1] - g[j]);
      return series[j] + t * (series[j + 1] - series[j]);
    }
    var outside = ages.map(function (a, i) {
      var l = at(lo95, a), h = at(hi95, a);
      return isFinite(l) && isFinite(h) && (vals[i] < l || vals[i] > h);
    });
    var nOut = outside.filter(Boolean).length;
    var xd = [Math.min(d.grid[0], ages[0]), Math.max(d.grid[d.grid.length - 1], ages[ages.length - 1])];
    var pad = (xd[1] - xd[0]) * 0.02 || 1;
    xd = [xd[0] - pad, xd[1] + pad];

    // Reference band chart.
    var ys = vals.slice();
    d.band.forEach(function (s) { s.forEach(function (v) { if (isFinite(v)) ys.push(v); }); });
    var ymin = Math.min.apply(null, ys), ymax = Math.max.apply(null, ys);
    var ypad = (ymax - ymin) * 0.06 || 1;
    var unitText = d.unit ? " (" + d.unit + ")" : "";
    var signals = [], limit = NaN, first = null;
    if (rows) {
      rows.forEach(function (r, i) {
        if (r[4] === true) signals.push(i);
        if (typeof r[3] === "number") limit = r[3];
        if (typeof r[5] === "number") first = r[5];
      });
    }
    var summary = d.n + " readings from age " + fmt(ages[0], 3) + " to " + fmt(ages[ages.length - 1], 3) + "; " +
      nOut + " outside the central 95% of healthy workers" + (d.group ? " of group " + d.group : "") + ". " +
      (rows ? (signals.length ? "The chart crossed its limit (h = " + fmt(limit, 3) + ") first at age " + fmt(first === null ? ages[signals[0]] : first, 3) +
        ", with " + signals.length + " signalling exam" + (signals.length === 1 ? "" : "s") + ": a prompt for review by a licensed clinician, not a diagnosis."
        : "No signal: the chart statistic stayed below its limit (h = " + fmt(limit, 3) + ").")
        : "The chart could not be computed: " + errText(d.chartErr));
    if (d.bandErr) summary += " Reference band: " + errText(d.bandErr);
    $("worker-summary").textContent = summary;

    var W = 600, H = 320;
    var svg = newSVG($("band-chart"), "band", W, H,
      d.marker + " of worker " + d.w.worker + " against healthy workers of the same age",
      "Reference band of model " + d.model + (d.group ? ", group " + d.group : "") + ": median and central 80% and 95% of healthy workers over age, with the worker's readings. " + summary);
    var box = { l: 62, r: 14, t: 14, b: 44, w: W, h: H };
    var s = frame(svg, box, xd, [ymin - ypad, ymax + ypad], "Age (years)", d.marker + unitText);
    var bands = el("g", { "class": "band" }, svg);
    [[0, 4, 0.28], [1, 3, 0.55]].forEach(function (pq) {
      var loS = d.band[pq[0]], hiS = d.band[pq[1]];
      var both = d.grid.map(function (_, i) { return isFinite(loS[i]) && isFinite(hiS[i]) ? 1 : NaN; });
      runs(d.grid, both).forEach(function (run) {
        var idx = run.map(function (p) { return d.grid.indexOf(p[0]); });
        var top = idx.map(function (i) { return s.x(d.grid[i]) + "," + s.y(hiS[i]); });
        var bot = idx.slice().reverse().map(function (i) { return s.x(d.grid[i]) + "," + s.y(loS[i]); });
        el("polygon", { points: top.concat(bot).join(" "), fill: C.sky, "fill-opacity": pq[2], stroke: "none" }, bands);
      });
    });
    runs(d.grid, d.band[2]).forEach(function (run) {
      el("polyline", { "class": "median", points: run.map(function (p) { return s.x(p[0]) + "," + s.y(p[1]); }).join(" "), fill: "none", stroke: C.blue, "stroke-width": 2.5 }, svg);
    });
    el("polyline", { points: ages.map(function (a, i) { return s.x(a) + "," + s.y(vals[i]); }).join(" "), fill: "none", stroke: C.muted, "stroke-width": 1 }, svg);
    var pts = el("g", { "class": "readings" }, svg);
    ages.forEach(function (a, i) {
      var label = "Age " + fmt(a, 3) + ": " + fmt(vals[i], 4) + (d.unit ? " " + d.unit : "") + (outside[i] ? ", outside the central 95%" : "");
      var m = outside[i]
        ? el("path", { "class": "reading outside", d: diamond(s.x(a), s.y(vals[i]), 6), fill: C.vermillion, stroke: "#000", "stroke-width": 0.8 }, pts)
        : el("circle", { "class": "reading", cx: s.x(a), cy: s.y(vals[i]), r: 4, fill: "#000", stroke: "#fff", "stroke-width": 1 }, pts);
      el("title", {}, m, label);
    });

    // Chart statistic against the limit.
    var H2 = 240;
    var kind = /chart\s*=\s*ewma/i.test(d.opts) ? "EWMA" : "CUSUM";
    var svg2 = newSVG($("stat-chart"), "stat", W, H2,
      kind + " chart of worker " + d.w.worker + " against its limit",
      rows ? "Chart statistic at each exam, in standard-deviation units, with the limit h = " + fmt(limit, 3) + ". " + summary : summary);
    var box2 = { l: 62, r: 14, t: 14, b: 44, w: W, h: H2 };
    var cs = rows ? rows.map(function (r) { return typeof r[2] === "number" ? r[2] : NaN; }) : [];
    var cy = cs.filter(isFinite);
    if (isFinite(limit)) cy.push(limit);
    var y0 = Math.min(0, Math.min.apply(null, cy.length ? cy : [0])), y1 = Math.max.apply(null, cy.length ? cy : [1]);
    y1 += (y1 - y0) * 0.12 || 1;
    var s2 = frame(svg2, box2, xd, [y0, y1], "Age (years)", kind + " statistic (SD units)");
    if (!rows) {
      el("text", { x: W / 2, y: H2 / 2, "text-anchor": "middle", fill: C.vermillion, "font-size": "13" }, svg2, "No chart: " + errText(d.chartErr));
      fillTable(ages, vals, rows);
      return;
    }
    if (isFinite(limit)) {
      el("line", { "class": "limit", x1: box2.l, x2: W - box2.r, y1: s2.y(limit), y2: s2.y(limit), stroke: "#000", "stroke-width": 1.5, "stroke-dasharray": "6 4" }, svg2);
      el("text", { x: W - box2.r - 4, y: s2.y(limit) - 5, "text-anchor": "end", "font-size": "12", fill: C.ink }, svg2, "limit h = " + fmt(limit, 3));
    }
    if (first !== null && isFinite(first)) {
      el("line", { "class": "first-signal", x1: s2.x(first), x2: s2.x(first), y1: box2.t, y2: H2 - box2.b, stroke: C.vermillion, "stroke-width": 1.2, "stroke-dasharray": "2 3" }, svg2);
      el("text", { x: s2.x(first) + 4, y: box2.t + 12, "font-size": "12", fill: C.ink }, svg2, "first signal, age " + fmt(first, 3));
    }
    runs(ages, cs).forEach(function (run) {
      el("polyline", { "class": "stat-line", points: run.map(function (p) { return s2.x(p[0]) + "," + s2.y(p[1]); }).join(" "), fill: "none", stroke: C.blue, "stroke-width": 2 }, svg2);
    });
    var g2 = el("g", { "class": "stats" }, svg2);
    ages.forEach(function (a, i) {
      if (!isFinite(cs[i])) return;
      var label = "Age " + fmt(a, 3) + ": chart " + fmt(cs[i], 3) + (rows[i][4] === true ? ", signal" : "");
      var m = rows[i][4] === true
        ? el("path", { "class": "signal", d: triangle(s2.x(a), s2.y(cs[i]), 7), fill: C.vermillion, stroke: "#000", "stroke-width": 0.8 }, g2)
        : el("circle", { "class": "stat", cx: s2.x(a), cy: s2.y(cs[i]), r: 3, fill: C.blue }, g2);
      el("title", {}, m, label);
    });
    fillTable(ages, vals, rows);
  }

  function fillTable(ages, vals, rows) {
    var body = $("worker-table").tBodies[0];
    body.textContent = "";
    ages.forEach(function (a, i) {
      var r = rows ? rows[i] : [];
      var tr = document.createElement("tr");
      [a, vals[i], r[0], r[2], r[3], r[4]].forEach(function (v) {
        var td = document.createElement("td");
        td.textContent = fmt(v, 4);
        if (typeof v === "number") td.className = "num";
        tr.appendChild(td);
      });
      body.appendChild(tr);
    });
  }

  // ---- the spreadsheet's selected row ---------------------------------

  function findCol(header, name) {
    if (!name) return -1;
    var want = String(name).trim().toLowerCase();
    for (var i = 0; i < header.length; i++) {
      if (String(header[i]).trim().toLowerCase() === want) return i;
    }
    return -1;
  }

  // workerFromTable picks the worker on row `row` (0 is the header row) of
  // a table of exams and collects all that worker's rows. The reading
  // column is the one named in the settings, or the one named like the
  // model (demo-sbp: sbp).
  function workerFromTable(values, row, model, cols) {
    cols = cols || settings.cols;
    if (!values || values.length < 2 || row < 1 || row >= values.length) return null;
    var h = values[0];
    var ci = findCol(h, cols.id), ca = findCol(h, cols.age), cg = findCol(h, cols.group);
    var cv = findCol(h, cols.value);
    if (cv < 0 && model) cv = findCol(h, (DEMO[model] && DEMO[model].column) || model.replace(/^demo-/, "").replace(/@v\d+$/, ""));
    if (ci < 0 || ca < 0 || cv < 0) return null;
    var id = values[row][ci];
    if (id === "" || id === null || id === undefined) return null;
    var ages = [], vals = [];
    for (var r = 1; r < values.length; r++) {
      if (values[r][ci] !== id) continue;
      var a = values[r][ca], v = values[r][cv];
      if (typeof a !== "number" || typeof v !== "number") continue;
      ages.push(a);
      vals.push(v);
    }
    if (!ages.length) return null;
    return { model: model, worker: String(id), group: cg >= 0 ? values[row][cg] : "", ages: ages, values: vals };
  }

  var selectionBusy = false;
  function onSelection() {
    if (selectionBusy || !window.Excel) return;
    selectionBusy = true;
    window.Excel.run(function (ctx) {
      var sel = ctx.workbook.getSelectedRange();
      sel.load("rowIndex");
      var used = sel.worksheet.getUsedRange(true);
      used.load("values,rowIndex");
      return ctx.sync().then(function () {
        var w = workerFromTable(used.values, sel.rowIndex - used.rowIndex, $("model").value);
        if (w) return showWorker(w);
        return null;
      });
    }).catch(function (e) {
      $("worker-hint").textContent = "Could not read the selected row: " + e.message;
    }).then(function () { selectionBusy = false; });
  }

  // ---- start -----------------------------------------------------------

  var readyResolve;
  var ready = new Promise(function (r) { readyResolve = r; });

  function start(info) {
    fillSettings();
    $("settings-form").addEventListener("submit", saveSettings);
    $("refresh-models").addEventListener("click", refreshModels);
    $("model").addEventListener("change", function () { selectModel($("model").value); });
    veer.onStatus(showStatus);
    setInterval(function () { showStatus(veer.status()); }, 1000);
    if (info && window.Office && info.host === window.Office.HostType.Excel && window.Office.context.document.addHandlerAsync) {
      window.Office.context.document.addHandlerAsync(window.Office.EventType.DocumentSelectionChanged, onSelection);
    }
    (modelsLoaded || refreshModels()).then(function () { readyResolve(); });
  }

  window.veerPane = {
    ready: ready,
    showWorker: showWorker,
    selectModel: selectModel,
    refreshModels: refreshModels,
    workerFromTable: workerFromTable
  };

  if (window.Office && typeof window.Office.onReady === "function") {
    window.Office.onReady(start);
  } else {
    start(null);
  }
})();
