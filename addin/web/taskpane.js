/*
 * veer task pane (an ES2022 module): the connection of the add-in's runtime
 * to the veer server, the models on the server with their diagnostics, and
 * the charts of the worker on the selected row — the reference band of
 * healthy workers over age with the worker's readings, and the monitoring
 * chart statistic against its limit with signals marked. Every number comes
 * from the server through the same client the cell functions use (veer.js).
 *
 * Outside a spreadsheet (and in tests) the module's showWorker({model,
 * worker, group, ages, values, options, unit}) draws a worker's charts:
 * (await import("./taskpane.js")).showWorker(...).
 */
import catalog from "./catalog.js";
import * as veer from "./veer.js";

const SVGNS = "http://www.w3.org/2000/svg";
// Colours of the frame; every mark (reading, signal, limit, band...) comes
// from veer's one key of chart marks, catalog.symbols, which the report
// draws with too: one shape and colour, one meaning.
const C = { ink: "#1a1a1a", grid: "#e4e4e4", muted: "#555" };
const K = catalog.symbols;
// Units and marker names of the built-in demo models; for other models the
// pane's settings give the unit.
const DEMO = {
  "demo-sbp": { marker: "Systolic blood pressure", unit: "mmHg", column: "sbp" },
  "demo-fev1": { marker: "FEV1", unit: "litres", column: "fev1" },
};
const CENTILES = [2.5, 10, 50, 90, 97.5];
const GRID = 61;

const $ = (id) => document.getElementById(id);

// ---- settings ------------------------------------------------------------

const SETTINGS_KEY = "veer.pane";
const settings = { options: "target=20", cols: { id: "worker", age: "age", value: "", group: "group" }, unit: "" };
try {
  const saved = JSON.parse(localStorage.getItem(SETTINGS_KEY) || "null");
  if (saved) Object.assign(settings, saved, { cols: { ...settings.cols, ...saved.cols } });
} catch { /* defaults */ }

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
  const field = (id) => $(id).value.trim();
  settings.options = field("options") || "target=20";
  settings.cols = { id: field("col-id"), age: field("col-age"), value: field("col-value"), group: field("col-group") };
  settings.unit = field("unit");
  try {
    localStorage.setItem(SETTINGS_KEY, JSON.stringify(settings));
  } catch { /* this session only */ }
  let msg = "Saved.";
  const tok = field("token");
  if (tok) {
    veer.setToken(tok);
    $("token").value = "";
    msg = "Saved; token sent to the server.";
  }
  try {
    veer.setServer(field("server") || veer.client.server);
  } catch (e) {
    msg = `Not saved: ${e.message}`;
  }
  $("settings-saved").textContent = msg;
}

// ---- formatting ----------------------------------------------------------

function fmt(v, digits) {
  if (typeof v === "number") {
    if (!Number.isFinite(v)) return String(v);
    if (Number.isInteger(v)) return v.toLocaleString("en");
    const a = Math.abs(v);
    if (a !== 0 && (a < 0.001 || a >= 1e6)) return v.toExponential(2);
    return String(Number(v.toPrecision(digits || 4)));
  }
  if (typeof v === "boolean") return v ? "yes" : "no";
  if (v == null) return "";
  if (typeof v === "object" && v.error) return v.error;
  return String(v);
}

function errText(e) {
  if (!e) return "unknown error";
  return (e.code ? `${e.code} ` : "") + (e.message || "");
}

const plural = (n, word) => `${n} ${word}${n === 1 ? "" : "s"}`;

// ---- status --------------------------------------------------------------

let lastState = "";
function showStatus(s) {
  const host = s.server.replace(/^https?:\/\//, "");
  let text, cls;
  if (s.state === "connected") {
    cls = "ok";
    text = `Connected to veer on ${host}`;
    if (s.tokenState === "accepted") text += " · token accepted (fitting allowed)";
    if (s.tokenState === "refused") {
      cls = "bad";
      text += ` · token refused: ${s.tokenMessage}`;
    }
  } else if (s.state === "connecting" || s.state === "idle") {
    cls = "wait";
    text = `Connecting to veer on ${host}…`;
  } else {
    cls = "bad";
    text = `veer server not running on ${host} (start it with 'veer serve')`;
    if (s.retryInMs > 0) text += `; retrying in ${Math.ceil(s.retryInMs / 1000)} s`;
  }
  if (s.pending) text += ` · ${plural(s.pending, "call")} in progress`;
  $("status").className = `status ${cls}`;
  $("status-text").textContent = text;
  if (s.state === "connected" && lastState !== "connected") refreshModels();
  lastState = s.state;
  showErrors();
}

function showErrors() {
  const list = $("errors");
  const errs = veer.recentErrors().slice(0, 8);
  if (!errs.length) {
    const li = document.createElement("li");
    li.className = "hint";
    li.textContent = "None.";
    list.replaceChildren(li);
    return;
  }
  list.replaceChildren(...errs.map((e) => {
    const li = document.createElement("li");
    const code = document.createElement("code");
    code.textContent = e.code;
    // The server's messages start with the function's name; a message made
    // here (no server reached) gets it in front, so it shows once.
    const named = !e.fn || e.message.startsWith(`${e.fn}:`);
    li.append(code, ` ${named ? "" : `${e.fn}: `}${e.message}`);
    return li;
  }));
}

// ---- models and diagnostics ----------------------------------------------

const infoRows = new Map(); // model -> last VEER.INFO rows
let infoSub = null;
let infoDone = null;
let modelsLoaded = null;

function option(value, text) {
  const o = document.createElement("option");
  o.value = value;
  o.textContent = text;
  return o;
}

// refreshModels lists the server's models and shows the selected one's
// diagnostics; it resolves once they are shown.
export function refreshModels() {
  modelsLoaded = loadModels();
  return modelsLoaded;
}

async function loadModels() {
  const sel = $("model");
  let doc;
  try {
    const r = await fetch(`${veer.client.server}/v1/models`, { cache: "no-store" });
    if (!r.ok) throw new Error(`HTTP ${r.status}`);
    doc = await r.json();
  } catch (e) {
    sel.replaceChildren(option("", `(cannot list models: ${e.message})`));
    return;
  }
  const list = doc.models || [];
  const keep = sel.value;
  sel.replaceChildren(...list.map((m) => option(m.name, `${m.name} (${m.latest}${m.builtin ? ", built in" : ""})`)));
  if (keep && list.some((m) => m.name === keep)) sel.value = keep;
  await selectModel(sel.value);
}

// selectModel shows the model's diagnostics; they update when it is
// refitted (VEER.INFO streams). It resolves once they are shown, or when
// another selection replaces this one.
export function selectModel(name) {
  infoSub?.cancel();
  infoSub = null;
  infoDone?.();
  infoDone = null;
  const sel = $("model");
  if (name && sel.value !== name) sel.value = name;
  if (!name) return Promise.resolve();
  return new Promise((resolve) => {
    const done = () => {
      if (infoDone === done) infoDone = null;
      resolve();
    };
    infoDone = done;
    infoSub = veer.request("VEER.INFO", [name], {
      subscribe: true,
      onResult: (rows) => {
        infoRows.set(name, rows);
        renderInfo(rows);
        done();
      },
      onError: (e) => {
        renderInfo([["error", errText(e)]]);
        done();
      },
    });
  });
}

function renderInfo(rows) {
  rows ??= [];
  const handle = rows.find((r) => r[0] === "handle");
  $("diag-summary").textContent = `Diagnostics of ${handle ? handle[1] : "the selected model"} (${rows.length} items, VEER.INFO)`;
  $("info").tBodies[0].replaceChildren(...rows.map((r) => {
    const tr = document.createElement("tr");
    const th = document.createElement("td");
    th.textContent = r[0];
    const td = document.createElement("td");
    td.textContent = fmt(r[1]);
    if (typeof r[1] === "number") td.className = "num";
    tr.append(th, td);
    return tr;
  }));
}

async function modelInfo(name) {
  if (!infoRows.has(name)) infoRows.set(name, await veer.call("VEER.INFO", [name]));
  return infoRows.get(name);
}

// ageRange reads the reference age range of a group from VEER.INFO rows.
function ageRange(rows, group) {
  let from = Infinity, to = -Infinity;
  for (const r of rows || []) {
    const m = /^group (.*): age (from|to)$/.exec(String(r[0]));
    if (!m || typeof r[1] !== "number") continue;
    if (group && m[1] !== group && m[1] !== "all") continue;
    if (m[2] === "from") from = Math.min(from, r[1]);
    else to = Math.max(to, r[1]);
  }
  return Number.isFinite(from) && Number.isFinite(to) && from < to ? { from, to } : null;
}

// ---- SVG helpers ---------------------------------------------------------

function el(tag, attrs, parent, text) {
  const e = document.createElementNS(SVGNS, tag);
  for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, v);
  if (text !== undefined) e.textContent = text;
  parent?.appendChild(e);
  return e;
}

// niceTicks returns about n round tick values covering [lo, hi], after
// Heckbert (1990), "Nice numbers for graph labels", Graphics Gems.
function niceTicks(lo, hi, n) {
  const nice = (x, round) => {
    const e = Math.floor(Math.log10(x));
    const f = x / 10 ** e;
    const nf = round ? (f < 1.5 ? 1 : f < 3 ? 2 : f < 7 ? 5 : 10) : (f <= 1 ? 1 : f <= 2 ? 2 : f <= 5 ? 5 : 10);
    return nf * 10 ** e;
  };
  if (!(hi > lo)) hi = lo + 1;
  const step = nice(nice(hi - lo, false) / Math.max(1, n - 1), true);
  const out = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Number(v.toPrecision(12)));
  return out;
}

const scale = (d0, d1, r0, r1) => (v) => r0 + (v - d0) / (d1 - d0) * (r1 - r0);

// frame draws grid, ticks, axis lines and labels, and returns the scales.
function frame(svg, box, xd, yd, xlabel, ylabel) {
  // Widen the vertical range to whole tick steps, so the axis starts and
  // ends on a labelled value.
  const yt = niceTicks(yd[0], yd[1], 6);
  if (yt.length > 1) {
    const step = yt[1] - yt[0];
    yd = [Math.floor(yd[0] / step + 1e-9) * step, Math.ceil(yd[1] / step - 1e-9) * step];
  }
  const x = scale(xd[0], xd[1], box.l, box.w - box.r);
  const y = scale(yd[0], yd[1], box.h - box.b, box.t);
  const g = el("g", { class: "axes", "font-size": "12", fill: C.ink }, svg);
  for (const v of niceTicks(yd[0], yd[1], 6)) {
    if (v < yd[0] || v > yd[1]) continue;
    el("line", { x1: box.l, x2: box.w - box.r, y1: y(v), y2: y(v), stroke: C.grid }, g);
    el("text", { x: box.l - 6, y: y(v) + 4, "text-anchor": "end" }, g, fmt(v, 4));
  }
  for (const v of niceTicks(xd[0], xd[1], 8)) {
    if (v < xd[0] || v > xd[1]) continue;
    el("line", { x1: x(v), x2: x(v), y1: box.h - box.b, y2: box.h - box.b + 5, stroke: C.ink }, g);
    el("text", { x: x(v), y: box.h - box.b + 18, "text-anchor": "middle" }, g, fmt(v, 4));
  }
  el("line", { x1: box.l, x2: box.w - box.r, y1: box.h - box.b, y2: box.h - box.b, stroke: C.ink }, g);
  el("line", { x1: box.l, x2: box.l, y1: box.t, y2: box.h - box.b, stroke: C.ink }, g);
  el("text", { x: (box.l + box.w - box.r) / 2, y: box.h - 6, "text-anchor": "middle", "font-size": "13" }, g, xlabel);
  el("text", { transform: `translate(14,${(box.t + box.h - box.b) / 2}) rotate(-90)`, "text-anchor": "middle", "font-size": "13" }, g, ylabel);
  return { x, y };
}

function newSVG(host, id, w, h, title, desc) {
  const svg = el("svg", { viewBox: `0 0 ${w} ${h}`, width: w, height: h, role: "img", "aria-labelledby": `${id}-title ${id}-desc` });
  el("title", { id: `${id}-title` }, svg, title);
  el("desc", { id: `${id}-desc` }, svg, desc);
  el("rect", { x: 0, y: 0, width: w, height: h, fill: "#fff" }, svg);
  host.replaceChildren(svg);
  return svg;
}

// runs splits a series into runs of consecutive finite points (gaps where
// the server had no value).
function runs(xs, ys) {
  const out = [];
  let cur = [];
  xs.forEach((x, i) => {
    if (typeof ys[i] === "number" && Number.isFinite(ys[i])) cur.push([x, ys[i]]);
    else if (cur.length) {
      out.push(cur);
      cur = [];
    }
  });
  if (cur.length) out.push(cur);
  return out;
}

const points = (pts) => pts.map(([x, y]) => `${x},${y}`).join(" ");
const diamond = (cx, cy, r) => `M${cx} ${cy - r} L${cx + r} ${cy} L${cx} ${cy + r} L${cx - r} ${cy} Z`;

// mark draws one mark of the key (catalog.symbols) at (cx, cy) with size r.
function mark(m, cx, cy, r, cls, parent) {
  switch (m.shape) {
    case "diamond":
      return el("path", { class: cls, d: diamond(cx, cy, r), fill: m.fill, stroke: m.stroke, "stroke-width": 0.8 }, parent);
    case "ring":
      return el("circle", { class: cls, cx, cy, r, fill: "none", stroke: m.stroke, "stroke-width": 1.6 }, parent);
    case "square":
      return el("rect", { class: cls, x: cx - r, y: cy - r, width: 2 * r, height: 2 * r, fill: "none", stroke: m.stroke, "stroke-width": 1.6 }, parent);
    default:
      return el("circle", { class: cls, cx, cy, r, fill: m.fill, stroke: "#fff", "stroke-width": 1 }, parent);
  }
}

// fillLegend writes the key of a chart from the marks it draws, each with
// the key's meaning.
function fillLegend(id, entries) {
  const ul = $(id);
  if (!ul) return;
  ul.replaceChildren(...entries.map(([m, text]) => {
    const li = document.createElement("li");
    const svg = el("svg", { width: 26, height: 14, "aria-hidden": "true" });
    if (m.shape === "band") {
      el("rect", { x: 0, y: 1, width: 26, height: 12, fill: m.fill, "fill-opacity": 0.28 }, svg);
      el("rect", { x: 0, y: 4, width: 26, height: 6, fill: m.fill, "fill-opacity": 0.55 }, svg);
    } else if (m.shape === "line") {
      el("line", { x1: 0, y1: 7, x2: 26, y2: 7, stroke: m.stroke, "stroke-width": 2, ...(m.dash ? { "stroke-dasharray": m.dash } : {}) }, svg);
    } else {
      if (m.shape === "ring") mark(K.reading, 13, 7, 3.5, "", svg);
      mark(m, 13, 7, m.shape === "ring" ? 6 : 5, "", svg);
    }
    li.append(svg, " " + (text || m.meaning));
    return li;
  }));
}

// ---- worker charts -------------------------------------------------------

const column = (xs) => xs.map((v) => [v]);

function numbersOf(col) {
  if (!Array.isArray(col)) return [typeof col === "number" ? col : NaN];
  return col.map((r) => {
    const v = Array.isArray(r) ? r[0] : r;
    return typeof v === "number" ? v : NaN;
  });
}

const settle = (p) => p.then((value) => ({ value }), (error) => ({ error }));

// showWorker draws the charts of one worker; it resolves when drawn.
export async function showWorker(w) {
  const model = w.model || $("model").value;
  let opts = (w.options || settings.options || "").trim();
  if (!/(^|;)\s*(target|limit)\s*=/.test(opts)) opts = "target=20" + (opts ? "; " + opts : "");
  const demo = DEMO[model] || {};
  const unit = w.unit || settings.unit || demo.unit || "";
  const marker = w.marker || demo.marker || "Reading";
  const group = w.group == null ? "" : String(w.group);
  const ages = w.ages.map(Number), values = w.values.map(Number);
  $("worker-hint").hidden = true;
  $("worker").hidden = false;
  $("worker-caption").textContent = `Worker ${w.worker}${group ? ` (group ${group})` : ""} · model ${model} · ${opts}`;
  const info = await modelInfo(model).catch(() => []);
  const lo = Math.min(...ages), hi = Math.max(...ages);
  const ref = ageRange(info, group) || { from: lo - 2, to: hi + 2 };
  let g0 = Math.max(ref.from, lo - 3), g1 = Math.min(ref.to, hi + 3);
  if (!(g1 > g0)) [g0, g1] = [ref.from, ref.to];
  const grid = Array.from({ length: GRID }, (_, i) => Number((g0 + (g1 - g0) * i / (GRID - 1)).toFixed(3)));
  // All in the same tick: one websocket frame for the quick centile calls,
  // one for the chart.
  const cent = CENTILES.map((p) => settle(veer.call("VEER.CENTILE", [model, column(grid), p, group || null])));
  const ids = ages.map(() => w.worker);
  const chart = settle(veer.call("VEER.CHART", [model, column(ids), column(ages), column(values), group || null, opts]));
  const bandRes = await Promise.all(cent);
  const ch = await chart;
  drawWorker({
    w, model, group, unit, marker, opts, grid, ages, values,
    band: bandRes.map((r) => (r.error ? grid.map(() => NaN) : numbersOf(r.value))),
    bandErr: bandRes.find((r) => r.error)?.error,
    rows: ch.error ? null : ch.value,
    chartErr: ch.error,
  });
}

// byAge returns the worker's exams in age order: ages, readings and the
// chart's rows (null without a chart).
function byAge(d) {
  const order = d.ages.map((_, i) => i).sort((a, b) => d.ages[a] - d.ages[b]);
  return {
    ages: order.map((i) => d.ages[i]),
    vals: order.map((i) => d.values[i]),
    rows: d.rows ? order.map((i) => d.rows[i] || []) : null,
  };
}

// summarise describes the worker's charts in words (the charts' text
// alternative, and the line under them).
function summarise(d, ages, nOut, chart) {
  let s = `${d.ages.length} readings from age ${fmt(ages[0], 3)} to ${fmt(ages.at(-1), 3)}; ` +
    `${nOut} outside the central 95% of healthy workers${d.group ? ` of group ${d.group}` : ""}. `;
  if (!chart.rows) s += `The chart could not be computed: ${errText(d.chartErr)}`;
  else if (chart.signals.length) {
    s += `The chart crossed its limit (h = ${fmt(chart.limit, 3)}) first at age ${fmt(chart.first ?? ages[chart.signals[0]], 3)}` +
      `, with ${plural(chart.signals.length, "signalling exam")}. ${catalog.caution}`;
  } else s += `No signal: the chart statistic stayed below its limit (h = ${fmt(chart.limit, 3)}).`;
  if (d.bandErr) s += ` Reference band: ${errText(d.bandErr)}`;
  return s;
}

function drawWorker(d) {
  const { ages, vals, rows } = byAge(d);
  const [lo95, , , , hi95] = d.band;
  // Is each reading outside the central 95%? Compare with the band at its
  // age (linear interpolation on the grid).
  const g = d.grid;
  const at = (series, a) => {
    if (a < g[0] || a > g.at(-1)) return NaN;
    const j = Math.min(g.length - 2, Math.max(0, Math.floor((a - g[0]) / (g.at(-1) - g[0]) * (g.length - 1))));
    const t = (a - g[j]) / (g[j + 1] - g[j]);
    return series[j] + t * (series[j + 1] - series[j]);
  };
  const outside = ages.map((a, i) => {
    const l = at(lo95, a), h = at(hi95, a);
    return Number.isFinite(l) && Number.isFinite(h) && (vals[i] < l || vals[i] > h);
  });
  const pad = (Math.max(g.at(-1), ages.at(-1)) - Math.min(g[0], ages[0])) * 0.02 || 1;
  const xd = [Math.min(g[0], ages[0]) - pad, Math.max(g.at(-1), ages.at(-1)) + pad];
  const chart = { rows, signals: [], limit: NaN, first: null };
  rows?.forEach((r, i) => {
    if (r[4] === true) chart.signals.push(i);
    if (typeof r[3] === "number") chart.limit = r[3];
    if (typeof r[5] === "number") chart.first = r[5];
  });
  const summary = summarise(d, ages, outside.filter(Boolean).length, chart);
  $("worker-summary").textContent = summary;
  drawBand(d, ages, vals, rows, outside, xd, summary);
  drawStatistic(d, ages, chart, xd, summary);
  fillTable(ages, vals, rows);
}

// drawBand draws the reference band of healthy workers with the worker's
// readings.
function drawBand(d, ages, vals, rows, outside, xd, summary) {
  const W = 600, H = 320;
  const svg = newSVG($("band-chart"), "band", W, H,
    `${d.marker} of worker ${d.w.worker} against healthy workers of the same age`,
    `Reference band of model ${d.model}${d.group ? `, group ${d.group}` : ""}: median and central 80% and 95% of healthy workers over age, with the worker's readings. ${summary}`);
  const ys = [...vals, ...d.band.flat().filter(Number.isFinite)];
  const ymin = Math.min(...ys), ymax = Math.max(...ys);
  const ypad = (ymax - ymin) * 0.06 || 1;
  const box = { l: 62, r: 14, t: 14, b: 44, w: W, h: H };
  const s = frame(svg, box, xd, [ymin - ypad, ymax + ypad], "Age (years)", d.marker + (d.unit ? ` (${d.unit})` : ""));
  const bands = el("g", { class: "band" }, svg);
  for (const [p, q, opacity] of [[0, 4, 0.28], [1, 3, 0.55]]) {
    const loS = d.band[p], hiS = d.band[q];
    const both = d.grid.map((_, i) => (Number.isFinite(loS[i]) && Number.isFinite(hiS[i]) ? 1 : NaN));
    for (const run of runs(d.grid, both)) {
      const idx = run.map(([x]) => d.grid.indexOf(x));
      const top = idx.map((i) => [s.x(d.grid[i]), s.y(hiS[i])]);
      const bot = [...idx].reverse().map((i) => [s.x(d.grid[i]), s.y(loS[i])]);
      el("polygon", { points: points([...top, ...bot]), fill: K.band.fill, "fill-opacity": opacity, stroke: "none" }, bands);
    }
  }
  for (const run of runs(d.grid, d.band[2])) {
    el("polyline", { class: "median", points: points(run.map(([x, y]) => [s.x(x), s.y(y)])), fill: "none", stroke: K.median.stroke, "stroke-width": 2.5 }, svg);
  }
  el("polyline", { points: points(ages.map((a, i) => [s.x(a), s.y(vals[i])])), fill: "none", stroke: C.muted, "stroke-width": 1 }, svg);
  const pts = el("g", { class: "readings" }, svg);
  ages.forEach((a, i) => {
    const signal = rows?.[i]?.[4] === true;
    const label = `Age ${fmt(a, 3)}: ${fmt(vals[i], 4)}${d.unit ? ` ${d.unit}` : ""}${outside[i] ? ", outside the central 95%" : ""}${signal ? ", the chart signals" : ""}`;
    const x = s.x(a), y = s.y(vals[i]);
    const m = mark(K.reading, x, y, 4, outside[i] ? "reading outside" : "reading", pts);
    if (signal) mark(K.signal, x, y, 6, "signal", pts);
    if (outside[i]) mark(K.outside, x, y, 9, "outside-ring", pts);
    el("title", {}, m, label);
  });
}

// drawStatistic draws the chart statistic against its limit, with signals
// marked.
function drawStatistic(d, ages, chart, xd, summary) {
  const W = 600, H = 240;
  const { rows, limit, first } = chart;
  const kind = /chart\s*=\s*ewma/i.test(d.opts) ? "EWMA" : "CUSUM";
  const svg = newSVG($("stat-chart"), "stat", W, H,
    `${kind} chart of worker ${d.w.worker} against its limit`,
    rows ? `Chart statistic at each exam, in standard-deviation units, with the limit h = ${fmt(limit, 3)}. ${summary}` : summary);
  const box = { l: 62, r: 14, t: 14, b: 44, w: W, h: H };
  const cs = rows ? rows.map((r) => (typeof r[2] === "number" ? r[2] : NaN)) : [];
  const cy = cs.filter(Number.isFinite);
  if (Number.isFinite(limit)) cy.push(limit);
  const y0 = Math.min(0, ...cy);
  let y1 = cy.length ? Math.max(...cy) : 1;
  y1 += (y1 - y0) * 0.12 || 1;
  const s = frame(svg, box, xd, [y0, y1], "Age (years)", `${kind} statistic (SD units)`);
  if (!rows) {
    el("text", { x: W / 2, y: H / 2, "text-anchor": "middle", fill: C.ink, "font-size": "13" }, svg, `No chart: ${errText(d.chartErr)}`);
    return;
  }
  if (Number.isFinite(limit)) {
    el("line", { class: "limit", x1: box.l, x2: W - box.r, y1: s.y(limit), y2: s.y(limit), stroke: K.limit.stroke, "stroke-width": 1.6, "stroke-dasharray": K.limit.dash }, svg);
    el("text", { x: W - box.r - 4, y: s.y(limit) - 5, "text-anchor": "end", "font-size": "12", fill: K.limit.stroke }, svg, `limit h = ${fmt(limit, 3)}`);
  }
  if (Number.isFinite(first)) {
    el("line", { class: "first-signal", x1: s.x(first), x2: s.x(first), y1: box.t, y2: H - box.b, stroke: C.muted, "stroke-width": 1.2, "stroke-dasharray": "2 3" }, svg);
    el("text", { x: s.x(first) + 4, y: box.t + 12, "font-size": "12", fill: C.ink }, svg, `first signal, age ${fmt(first, 3)}`);
  }
  for (const run of runs(ages, cs)) {
    el("polyline", { class: "stat-line", points: points(run.map(([x, y]) => [s.x(x), s.y(y)])), fill: "none", stroke: K.statistic.stroke, "stroke-width": 2 }, svg);
  }
  const g = el("g", { class: "stats" }, svg);
  ages.forEach((a, i) => {
    if (!Number.isFinite(cs[i])) return;
    const signal = rows[i][4] === true;
    const m = signal
      ? mark(K.signal, s.x(a), s.y(cs[i]), 6, "signal", g)
      : el("circle", { class: "stat", cx: s.x(a), cy: s.y(cs[i]), r: 3, fill: K.statistic.fill }, g);
    el("title", {}, m, `Age ${fmt(a, 3)}: chart ${fmt(cs[i], 3)}${signal ? ", signal" : ""}`);
  });
}

function fillTable(ages, vals, rows) {
  $("worker-table").tBodies[0].replaceChildren(...ages.map((a, i) => {
    const r = rows ? rows[i] : [];
    const tr = document.createElement("tr");
    for (const v of [a, vals[i], r[0], r[2], r[3], r[4]]) {
      const td = document.createElement("td");
      td.textContent = fmt(v, 4);
      if (typeof v === "number") td.className = "num";
      tr.append(td);
    }
    return tr;
  }));
}

// ---- the spreadsheet's selected row --------------------------------------

function findCol(header, name) {
  if (!name) return -1;
  const want = String(name).trim().toLowerCase();
  return header.findIndex((h) => String(h).trim().toLowerCase() === want);
}

// workerFromTable picks the worker on row `row` (0 is the header row) of a
// table of exams and collects all that worker's rows. The reading column is
// the one named in the settings, or the one named like the model
// (demo-sbp: sbp).
export function workerFromTable(values, row, model, cols = settings.cols) {
  if (!values || values.length < 2 || row < 1 || row >= values.length) return null;
  const [h] = values;
  const ci = findCol(h, cols.id), ca = findCol(h, cols.age), cg = findCol(h, cols.group);
  let cv = findCol(h, cols.value);
  if (cv < 0 && model) cv = findCol(h, DEMO[model]?.column || model.replace(/^demo-/, "").replace(/@v\d+$/, ""));
  if (ci < 0 || ca < 0 || cv < 0) return null;
  const id = values[row][ci];
  if (id === "" || id == null) return null;
  const ages = [], vals = [];
  for (const r of values.slice(1)) {
    if (r[ci] !== id) continue;
    const a = r[ca], v = r[cv];
    if (typeof a !== "number" || typeof v !== "number") continue;
    ages.push(a);
    vals.push(v);
  }
  if (!ages.length) return null;
  return { model, worker: String(id), group: cg >= 0 ? values[row][cg] : "", ages, values: vals };
}

let selectionBusy = false;
async function onSelection() {
  if (selectionBusy || !globalThis.Excel) return;
  selectionBusy = true;
  try {
    await Excel.run(async (ctx) => {
      const sel = ctx.workbook.getSelectedRange();
      sel.load("rowIndex");
      const used = sel.worksheet.getUsedRange(true);
      used.load("values,rowIndex");
      await ctx.sync();
      const w = workerFromTable(used.values, sel.rowIndex - used.rowIndex, $("model").value);
      if (w) await showWorker(w);
    });
  } catch (e) {
    $("worker-hint").textContent = `Could not read the selected row: ${e.message}`;
  } finally {
    selectionBusy = false;
  }
}

// ---- start ---------------------------------------------------------------

function start(info) {
  fillSettings();
  fillLegend("band-legend", [[K.band], [K.median], [K.reading], [K.outside], [K.signal]]);
  fillLegend("stat-legend", [[K.statistic], [K.limit], [K.signal]]);
  $("settings-form").addEventListener("submit", saveSettings);
  $("refresh-models").addEventListener("click", refreshModels);
  $("model").addEventListener("change", () => selectModel($("model").value));
  veer.onStatus(showStatus);
  setInterval(() => showStatus(veer.status()), 1000);
  const office = globalThis.Office;
  if (info && office && info.host === office.HostType.Excel && office.context.document.addHandlerAsync) {
    office.context.document.addHandlerAsync(office.EventType.DocumentSelectionChanged, onSelection);
  }
  return modelsLoaded ?? refreshModels();
}

// ready resolves once the pane is set up and shows the models.
export const ready = typeof globalThis.Office?.onReady === "function"
  ? new Promise((resolve) => globalThis.Office.onReady((info) => resolve(start(info))))
  : start(null);
