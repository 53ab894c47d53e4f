/*
 * A small stand-in for the spreadsheet host's JavaScript library, used only
 * by veer's browser tests (cmd/veer/addin_browser_test.go). Like the real
 * library it is a plain script (not a module) that defines globals. It
 * implements what veer.js and the task pane use, as the host platform
 * documents it:
 *
 *   CustomFunctions.associate(id, fn) and associate({id: fn, ...})
 *   new CustomFunctions.Error(code, message?) and CustomFunctions.ErrorCode
 *   the invocation object passed as the last argument: setResult(value) for
 *     streaming functions, onCanceled for streaming and cancelable ones
 *   Office.onReady, Office.HostType (no spreadsheet: host is null)
 *
 * Like the host, it reads the add-in's metadata (functions.json) and calls a
 * function with every declared parameter — null when omitted, ranges as 2-D
 * arrays with "" for blank cells — followed by the invocation. It records
 * every thing the platform would refuse (an error kind that cannot be a
 * function's output, a message with a kind that takes none, a matrix that
 * is not rectangular, a streaming function returning a value, ...) in
 * testHost.violations, which the tests require to stay empty.
 *
 * Sources (the host platform's documentation, consulted for these rules):
 *   custom-functions-runtime reference, CustomFunctions.ErrorCode: a custom
 *     message is allowed only with invalidValue (#VALUE!) and notAvailable
 *     (#N/A); invalidName (#NAME?) and invalidReference (#REF!) are input
 *     errors only, not outputs;
 *   "Manually create JSON metadata for custom functions": ids of letters,
 *     digits and periods; a function cannot be both stream and cancelable;
 *     allowErrorForDataTypeAny passes error cells to "any" parameters;
 *   "Custom functions parameter options": an omitted optional parameter is
 *     null; ranges arrive as 2-D arrays; the invocation is the last argument.
 * That blank cells of a range arrive as "" is recalled from memory.
 */
(() => {
  "use strict";

  const ErrorCode = {
    invalidValue: "#VALUE!",
    notAvailable: "#N/A",
    divisionByZero: "#DIV/0!",
    invalidNumber: "#NUM!",
    nullReference: "#NULL!",
    invalidName: "#NAME?",
    invalidReference: "#REF!",
  };
  const KNOWN = new Set(Object.values(ErrorCode));
  // Only these kinds carry a custom message.
  const MESSAGE_OK = new Set(["#VALUE!", "#N/A"]);
  // These are input errors only; a function cannot return them.
  const NOT_OUTPUT = new Set(["#NAME?", "#REF!"]);

  const violations = [];
  const violation = (msg) => violations.push(msg);

  class HostError {
    constructor(code, message) {
      if (!KNOWN.has(code)) violation(`unknown error code ${code}`);
      this.code = code;
      if (message !== undefined) this.message = message;
    }
  }

  const associated = new Map();
  const associate = (id, fn) => {
    if (id && typeof id === "object") {
      for (const [k, f] of Object.entries(id)) associate(k, f);
      return;
    }
    if (typeof fn !== "function") violation(`associate(${id}) without a function`);
    const key = String(id).toUpperCase();
    if (associated.has(key)) violation(`associate(${id}) twice`);
    associated.set(key, fn);
  };
  window.CustomFunctions = { associate, Error: HostError, ErrorCode };

  window.Office = {
    HostType: { Excel: "Excel" },
    EventType: { DocumentSelectionChanged: "documentSelectionChanged" },
    context: { host: null, document: {} },
    onReady(cb) {
      const p = Promise.resolve({ host: null, platform: null });
      if (cb) p.then(cb);
      return p;
    },
  };

  // ---- the host's view of a function ----------------------------------

  const byId = new Map();
  const metadata = fetch("/addin/functions.json", { cache: "no-store" })
    .then((r) => r.json())
    .then((doc) => {
      for (const f of doc.functions) byId.set(f.id.toUpperCase(), f);
      return doc;
    });
  // The add-in's modules run before DOMContentLoaded; the host calls
  // nothing before its scripts have run.
  const loaded = new Promise((resolve) => {
    if (document.readyState === "loading") document.addEventListener("DOMContentLoaded", resolve);
    else resolve();
  });

  function checkCell(v, where) {
    if (v instanceof HostError) {
      if (NOT_OUTPUT.has(v.code)) violation(`${where}: ${v.code} cannot be returned by a custom function`);
      if (v.message !== undefined && !MESSAGE_OK.has(v.code)) violation(`${where}: ${v.code} cannot carry a message`);
      return;
    }
    if (v == null) violation(`${where}: null or undefined cell`);
    else if (typeof v === "object") violation(`${where}: an object that is no error: ${JSON.stringify(v)}`);
  }

  function checkOutput(meta, v, where) {
    if (meta.result.dimensionality === "matrix") {
      if (v instanceof HostError) return checkCell(v, where);
      if (!Array.isArray(v) || !v.length || !Array.isArray(v[0])) {
        violation(`${where}: a spilling function must give a 2-D array, got ${JSON.stringify(v)}`);
        return;
      }
      const w = v[0].length;
      v.forEach((row, i) => {
        if (!Array.isArray(row) || row.length !== w) violation(`${where}: row ${i + 1} is not ${w} cells wide`);
        else row.forEach((c, j) => checkCell(c, `${where} [${i}][${j}]`));
      });
      return;
    }
    if (Array.isArray(v)) violation(`${where}: a scalar function gave an array`);
    else checkCell(v, where);
  }

  // plain makes a result JSON-friendly for the test: errors become
  // {"error": {"code", "message"}}, values {"value": ...}.
  const plainCell = (c) => (c instanceof HostError ? { error: c.code, message: c.message ?? null } : c);
  function plain(v) {
    if (v instanceof HostError) return { error: { code: v.code, message: v.message ?? null } };
    if (Array.isArray(v)) return { value: v.map((r) => (Array.isArray(r) ? r.map(plainCell) : plainCell(r))) };
    return { value: v };
  }

  const invocations = new Map();
  let nextId = 1;

  function wake(rec) {
    rec.waiters = rec.waiters.filter((w) => {
      if (rec.results.length < w.n) return true;
      clearTimeout(w.timer);
      w.resolve(rec.results.slice());
      return false;
    });
  }

  const record = (rec, meta, v) => {
    checkOutput(meta, v, rec.name);
    rec.results.push(plain(v));
    wake(rec);
  };

  window.testHost = {
    violations,
    ready: Promise.all([metadata, loaded]).then(([doc]) => {
      for (const f of doc.functions) {
        if (!associated.has(f.id.toUpperCase())) violation(`function ${f.id} of functions.json was not associated`);
      }
      for (const id of associated.keys()) {
        if (!byId.has(id)) violation(`associate(${id}) names no function of functions.json`);
      }
      return doc.functions.length;
    }),

    // invoke calls "VEER.X" as the host would for a formula with the given
    // arguments (fewer than declared: the rest are omitted). It returns the
    // invocation's record id.
    invoke(name, args) {
      args ??= [];
      const id = String(name).replace(/^VEER\./i, "").toUpperCase();
      const meta = byId.get(id);
      const fn = associated.get(id);
      if (!meta || !fn) throw new Error(`no function ${name}`);
      if (args.length > meta.parameters.length) throw new Error(`${name} takes at most ${meta.parameters.length} arguments`);
      const full = meta.parameters.map((_, i) => args[i] ?? null);
      const rec = { id: nextId++, name, results: [], waiters: [], cancelled: false, started: Date.now() };
      invocations.set(rec.id, rec);
      const opts = meta.options || {};
      const inv = { functionName: meta.name };
      if (opts.stream) {
        inv.setResult = (v) => {
          if (rec.cancelled) violation(`${name}: setResult after the cell was cancelled`);
          record(rec, meta, v);
        };
      }
      rec.inv = inv;
      const ret = fn(...full, inv);
      if (opts.stream) {
        if (ret !== undefined) violation(`${name}: a streaming function returned a value`);
        return rec.id;
      }
      Promise.resolve(ret).then((v) => {
        if (!rec.cancelled) record(rec, meta, v);
      }, (e) => {
        if (rec.cancelled) return;
        if (!(e instanceof HostError)) {
          violation(`${name}: rejected with something other than CustomFunctions.Error: ${e}`);
          e = new HostError("#VALUE!", String(e));
        }
        checkCell(e, name);
        rec.results.push(plain(e));
        wake(rec);
      });
      return rec.id;
    },

    // cancel does what the host does when the cell's formula is removed.
    cancel(id) {
      const rec = invocations.get(id);
      rec.cancelled = true;
      if (typeof rec.inv.onCanceled === "function") rec.inv.onCanceled();
      else violation(`${rec.name}: no onCanceled handler`);
    },

    // wait resolves with the results of invocation id once it has n of
    // them, or rejects after ms milliseconds.
    wait(id, n, ms) {
      const rec = invocations.get(id);
      return new Promise((resolve, reject) => {
        const w = { n, resolve };
        w.timer = setTimeout(() => {
          rec.waiters = rec.waiters.filter((x) => x !== w);
          reject(new Error(`${rec.name}: ${rec.results.length} of ${n} results after ${ms} ms`));
        }, ms);
        rec.waiters.push(w);
        wake(rec);
      });
    },

    results: (id) => invocations.get(id).results.slice(),

    // call invokes and resolves with the first result ({value} or
    // {error: {code, message}}) and the milliseconds it took.
    async call(name, args, ms = 20000) {
      const id = window.testHost.invoke(name, args);
      const t0 = Date.now();
      const [out] = await window.testHost.wait(id, 1, ms);
      out.ms = Date.now() - t0;
      return out;
    },
  };
})();
