/*
 * A small stand-in for the spreadsheet host's JavaScript library, used only
 * by veer's browser tests (cmd/veer/addin_test.go). It implements what
 * veer.js and the task pane use, as the host platform documents it:
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
(function () {
  "use strict";

  var ErrorCode = {
    invalidValue: "#VALUE!",
    notAvailable: "#N/A",
    divisionByZero: "#DIV/0!",
    invalidNumber: "#NUM!",
    nullReference: "#NULL!",
    invalidName: "#NAME?",
    invalidReference: "#REF!"
  };
  var KNOWN = {};
  Object.keys(ErrorCode).forEach(function (k) { KNOWN[ErrorCode[k]] = true; });
  // Only these kinds carry a custom message.
  var MESSAGE_OK = { "#VALUE!": true, "#N/A": true };
  // These are input errors only; a function cannot return them.
  var NOT_OUTPUT = { "#NAME?": true, "#REF!": true };

  var violations = [];
  function violation(msg) { violations.push(msg); }

  function HostError(code, message) {
    if (!(this instanceof HostError)) throw new TypeError("CustomFunctions.Error must be called with new");
    if (!KNOWN[code]) violation("unknown error code " + code);
    this.code = code;
    if (message !== undefined) this.message = message;
  }

  var associated = {};
  window.CustomFunctions = {
    associate: function (id, fn) {
      if (id && typeof id === "object") {
        Object.keys(id).forEach(function (k) { window.CustomFunctions.associate(k, id[k]); });
        return;
      }
      if (typeof fn !== "function") violation("associate(" + id + ") without a function");
      var key = String(id).toUpperCase();
      if (associated[key]) violation("associate(" + id + ") twice");
      associated[key] = fn;
    },
    Error: HostError,
    ErrorCode: ErrorCode
  };

  window.Office = {
    HostType: { Excel: "Excel" },
    EventType: { DocumentSelectionChanged: "documentSelectionChanged" },
    context: { host: null, document: {} },
    onReady: function (cb) {
      var p = Promise.resolve({ host: null, platform: null });
      if (cb) p.then(cb);
      return p;
    }
  };

  // ---- the host's view of a function ----------------------------------

  var byId = {};
  var metadata = fetch("/addin/functions.json", { cache: "no-store" }).then(function (r) { return r.json(); }).then(function (doc) {
    doc.functions.forEach(function (f) { byId[f.id.toUpperCase()] = f; });
    return doc;
  });

  function checkCell(v, where) {
    if (v instanceof HostError) {
      if (NOT_OUTPUT[v.code]) violation(where + ": " + v.code + " cannot be returned by a custom function");
      if (v.message !== undefined && !MESSAGE_OK[v.code]) violation(where + ": " + v.code + " cannot carry a message");
      return;
    }
    if (v === null || v === undefined) violation(where + ": null or undefined cell");
    else if (typeof v === "object") violation(where + ": an object that is no error: " + JSON.stringify(v));
  }

  function checkOutput(meta, v, where) {
    if (meta.result.dimensionality === "matrix") {
      if (v instanceof HostError) return checkCell(v, where);
      if (!Array.isArray(v) || !v.length || !Array.isArray(v[0])) {
        violation(where + ": a spilling function must give a 2-D array, got " + JSON.stringify(v));
        return;
      }
      var w = v[0].length;
      v.forEach(function (row, i) {
        if (!Array.isArray(row) || row.length !== w) violation(where + ": row " + (i + 1) + " is not " + w + " cells wide");
        else row.forEach(function (c, j) { checkCell(c, where + " [" + i + "][" + j + "]"); });
      });
      return;
    }
    if (Array.isArray(v)) violation(where + ": a scalar function gave an array");
    else checkCell(v, where);
  }

  // plain makes a result JSON-friendly for the test: errors become
  // {"error": {"code", "message"}}, values {"value": ...}.
  function plainCell(c) {
    if (c instanceof HostError) return { error: c.code, message: c.message === undefined ? null : c.message };
    return c;
  }
  function plain(v) {
    if (v instanceof HostError) return { error: { code: v.code, message: v.message === undefined ? null : v.message } };
    if (Array.isArray(v)) return { value: v.map(function (r) { return Array.isArray(r) ? r.map(plainCell) : plainCell(r); }) };
    return { value: v };
  }

  var invocations = {};
  var nextId = 1;

  function wake(rec) {
    rec.waiters = rec.waiters.filter(function (w) {
      if (rec.results.length >= w.n) {
        clearTimeout(w.timer);
        w.resolve(rec.results.slice());
        return false;
      }
      return true;
    });
  }

  window.testHost = {
    violations: violations,
    ready: metadata.then(function (doc) {
      doc.functions.forEach(function (f) {
        if (!associated[f.id.toUpperCase()]) violation("function " + f.id + " of functions.json was not associated");
      });
      Object.keys(associated).forEach(function (id) {
        if (!byId[id]) violation("associate(" + id + ") names no function of functions.json");
      });
      return doc.functions.length;
    }),

    // invoke calls "VEER.X" as the host would for a formula with the given
    // arguments (fewer than declared: the rest are omitted). It returns the
    // invocation's record id.
    invoke: function (name, args) {
      var id = String(name).replace(/^VEER\./i, "").toUpperCase();
      var meta = byId[id];
      var fn = associated[id];
      if (!meta || !fn) throw new Error("no function " + name);
      args = args || [];
      if (args.length > meta.parameters.length) throw new Error(name + " takes at most " + meta.parameters.length + " arguments");
      var full = [];
      for (var i = 0; i < meta.parameters.length; i++) full.push(args[i] === undefined ? null : args[i]);
      var rec = { id: nextId++, name: name, results: [], waiters: [], cancelled: false, started: Date.now() };
      invocations[rec.id] = rec;
      var opts = meta.options || {};
      var inv = { functionName: meta.name };
      if (opts.stream) {
        inv.setResult = function (v) {
          if (rec.cancelled) violation(name + ": setResult after the cell was cancelled");
          checkOutput(meta, v, name);
          rec.results.push(plain(v));
          wake(rec);
        };
      }
      rec.inv = inv;
      var ret = fn.apply(null, full.concat([inv]));
      if (opts.stream) {
        if (ret !== undefined) violation(name + ": a streaming function returned a value");
      } else {
        Promise.resolve(ret).then(function (v) {
          if (rec.cancelled) return;
          checkOutput(meta, v, name);
          rec.results.push(plain(v));
          wake(rec);
        }, function (e) {
          if (rec.cancelled) return;
          if (!(e instanceof HostError)) violation(name + ": rejected with something other than CustomFunctions.Error: " + e);
          else checkCell(e, name);
          rec.results.push(plain(e instanceof HostError ? e : new HostError("#VALUE!", String(e))));
          wake(rec);
        });
      }
      return rec.id;
    },

    // cancel does what the host does when the cell's formula is removed.
    cancel: function (id) {
      var rec = invocations[id];
      rec.cancelled = true;
      if (typeof rec.inv.onCanceled === "function") rec.inv.onCanceled();
      else violation(rec.name + ": no onCanceled handler");
    },

    // wait resolves with the results of invocation id once it has n of
    // them, or rejects after ms milliseconds.
    wait: function (id, n, ms) {
      var rec = invocations[id];
      return new Promise(function (resolve, reject) {
        var w = { n: n, resolve: resolve };
        w.timer = setTimeout(function () {
          rec.waiters = rec.waiters.filter(function (x) { return x !== w; });
          reject(new Error(rec.name + ": " + rec.results.length + " of " + n + " results after " + ms + " ms"));
        }, ms);
        rec.waiters.push(w);
        wake(rec);
      });
    },

    results: function (id) { return invocations[id].results.slice(); },

    // call invokes and resolves with the first result ({value} or
    // {error: {code, message}}) and the milliseconds it took.
    call: function (name, args, ms) {
      var id = window.testHost.invoke(name, args);
      var t0 = Date.now();
      return window.testHost.wait(id, 1, ms || 20000).then(function (r) {
        var out = r[0];
        out.ms = Date.now() - t0;
        return out;
      });
    }
  };
})();
