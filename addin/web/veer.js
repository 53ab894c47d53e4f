/*
 * veer.js — the runtime of veer's spreadsheet add-in (plain ES2019, no build
 * step). It registers every function of veer's catalogue (catalog.js, which
 * the veer server generates) with the host's custom-functions runtime, and
 * forwards each cell call to the local veer server over one websocket:
 *
 *   - calls made in the same tick go out as one batch frame (a call to a
 *     slow function gets a frame of its own, so it does not hold up the
 *     answers of quick ones);
 *   - streaming functions subscribe, and every new answer the server pushes
 *     (after a model is refitted) is set into the cell;
 *   - a cell the host cancels sends {"cancel": id};
 *   - server errors become the host's error kinds with the server's message;
 *   - when the connection drops, the runtime reconnects with exponential
 *     backoff, presents the token again and re-sends pending calls and
 *     subscriptions; a call that cannot reach any server within a few
 *     seconds gets "veer server not running on ..." instead of hanging.
 *
 * All statistics stay on the server. veer is a screening aid: a signal
 * prompts review by a licensed clinician under local occupational-health
 * rules; it is not a diagnosis.
 *
 * The global `veer` object is the client the task pane uses too.
 */
(function (root) {
  "use strict";

  var VERSION = "1";
  var TOKEN_KEY = "veer.token";
  var SERVER_KEY = "veer.server";

  // Where this script came from: the veer server serves the add-in itself,
  // so by default that is also the server to call.
  var scriptOrigin = (function () {
    try {
      if (root.document && root.document.currentScript && root.document.currentScript.src) {
        return new URL(root.document.currentScript.src).origin;
      }
      if (root.location && /^https?:$/.test(root.location.protocol)) {
        return root.location.origin;
      }
    } catch (e) { /* fall through */ }
    return "https://localhost:7311";
  })();

  // ---- settings --------------------------------------------------------

  function storageGet(key) {
    try {
      return root.localStorage ? root.localStorage.getItem(key) : null;
    } catch (e) {
      return null;
    }
  }

  function storageSet(key, value) {
    try {
      if (root.localStorage) {
        if (value) root.localStorage.setItem(key, value);
        else root.localStorage.removeItem(key);
      }
    } catch (e) { /* private mode: keep it for this session only */ }
    // The host's own storage, shared by the add-in's runtimes.
    try {
      if (root.OfficeRuntime && root.OfficeRuntime.storage) {
        if (value) root.OfficeRuntime.storage.setItem(key, value);
        else root.OfficeRuntime.storage.removeItem(key);
      }
    } catch (e) { /* not available */ }
  }

  function storedToken() {
    var t = storageGet(TOKEN_KEY);
    if (t) return Promise.resolve(t);
    try {
      if (root.OfficeRuntime && root.OfficeRuntime.storage) {
        return Promise.resolve(root.OfficeRuntime.storage.getItem(TOKEN_KEY)).then(function (v) { return v || ""; }, function () { return ""; });
      }
    } catch (e) { /* not available */ }
    return Promise.resolve("");
  }

  function normalizeServer(url) {
    var u = new URL(url);
    if (u.protocol !== "http:" && u.protocol !== "https:") throw new Error("the server address must start with http:// or https://");
    return u.origin;
  }

  // ---- errors ----------------------------------------------------------

  // How veer's error codes (server/README.md) reach the host. The host
  // shows a message only with #VALUE! and #N/A, and cannot return #REF! or
  // #NAME? from a custom function; it has no #BUSY!. Those arrive as #N/A
  // with the original code at the start of the message.
  var HOST_KIND = {
    "#VALUE!": { kind: "invalidValue", message: true },
    "#N/A": { kind: "notAvailable", message: true },
    "#NUM!": { kind: "invalidNumber", message: false },
    "#DIV/0!": { kind: "divisionByZero", message: false },
    "#NULL!": { kind: "nullReference", message: false },
    "#REF!": { kind: "notAvailable", message: true, prefix: true },
    "#NAME?": { kind: "notAvailable", message: true, prefix: true },
    "#BUSY!": { kind: "notAvailable", message: true, prefix: true }
  };
  var KIND_CODE = {
    invalidValue: "#VALUE!", notAvailable: "#N/A", invalidNumber: "#NUM!",
    divisionByZero: "#DIV/0!", nullReference: "#NULL!"
  };
  var MAX_MESSAGE = 1000;

  function hostErrorClass() {
    return root.CustomFunctions && root.CustomFunctions.Error;
  }

  function isHostError(x) {
    var E = hostErrorClass();
    if (E && x instanceof E) return true;
    return !!x && typeof x === "object" && !Array.isArray(x) && typeof x.code === "string" && x.code.charAt(0) === "#" && !("error" in x);
  }

  // ---- client ----------------------------------------------------------

  function Client(opts) {
    opts = opts || {};
    this.server = normalizeServer(opts.server || storageGet(SERVER_KEY) || scriptOrigin);
    this.notRunningMs = opts.notRunningMs || 3000;
    this.minBackoff = opts.minBackoff || 250;
    this.maxBackoff = opts.maxBackoff || 5000;
    this.maxFrameChars = opts.maxFrameChars || 48 * 1024 * 1024;
    this.maxBatch = opts.maxBatch || 2000;
    this.aloneChars = opts.aloneChars || 256 * 1024;
    this.slow = opts.slow || {};
    this.backoff = this.minBackoff;
    this.calls = new Map(); // id -> call, in the order they were made
    this.outbox = [];
    this.ws = null;
    this.ready = false; // open and the token (if any) presented
    this.state = "idle";
    this.nextId = 1;
    this.token = null; // null: not read yet
    this.tokenId = 0;
    this.tokenState = "none";
    this.tokenMessage = "";
    this.flushTimer = null;
    this.reconnectTimer = null;
    this.retryAt = 0;
    this.lastAttempt = 0;
    this.listeners = [];
    this.errors = [];
    this.events = []; // recent connection events, for the pane and for tests
    this.stats = { frames: 0, messages: 0, connects: 0, cancelled: 0, resent: 0 };
  }

  Client.prototype.log = function (what) {
    this.events.push({ at: Date.now(), what: what });
    if (this.events.length > 100) this.events.shift();
  };

  Client.prototype.status = function () {
    var pending = 0, streams = 0;
    this.calls.forEach(function (c) {
      if (c.subscribe) streams++;
      else pending++;
    });
    return {
      state: this.state, server: this.server, tokenState: this.tokenState, tokenMessage: this.tokenMessage,
      retryInMs: this.reconnectTimer ? Math.max(0, this.retryAt - Date.now()) : 0,
      pending: pending, streams: streams
    };
  };

  Client.prototype.onStatus = function (fn) {
    this.listeners.push(fn);
    try { fn(this.status()); } catch (e) { /* listener's problem */ }
  };

  Client.prototype.emit = function () {
    var s = this.status();
    this.listeners.forEach(function (fn) {
      try { fn(s); } catch (e) { /* listener's problem */ }
    });
  };

  Client.prototype.setState = function (state) {
    if (this.state !== state) {
      this.state = state;
      this.emit();
    }
  };

  Client.prototype.host = function () {
    try {
      return new URL(this.server).host;
    } catch (e) {
      return this.server;
    }
  };

  // request sends a call. opts: subscribe, onResult(value, isUpdate),
  // onError({code, message}, isUpdate), onProgress(share). It returns
  // {id, cancel()}.
  Client.prototype.request = function (fn, args, opts) {
    opts = opts || {};
    args = (args || []).slice();
    while (args.length && (args[args.length - 1] === null || args[args.length - 1] === undefined)) args.pop();
    var c = {
      id: this.nextId++, fn: fn, args: args, subscribe: !!opts.subscribe, writes: !!opts.writes,
      onResult: opts.onResult || function () {}, onError: opts.onError || function () {},
      onProgress: opts.onProgress || null,
      json: null, sent: false, answered: false, done: false, timer: null
    };
    this.calls.set(c.id, c);
    this.enqueue(c);
    this.emit();
    var self = this;
    return { id: c.id, cancel: function () { self.cancel(c.id); } };
  };

  // call is request as a promise of the first answer; errors reject with
  // {code, message}.
  Client.prototype.call = function (fn, args, opts) {
    var self = this;
    return new Promise(function (resolve, reject) {
      self.request(fn, args, Object.assign({}, opts || {}, {
        subscribe: false,
        onResult: function (v) { resolve(v); },
        onError: function (e) { reject(e); }
      }));
    });
  };

  Client.prototype.enqueue = function (c) {
    c.sent = false;
    this.outbox.push(c);
    if (this.ready) {
      this.scheduleFlush();
      return;
    }
    // A new call is a reason to try again soon rather than after a long
    // backoff.
    this.backoff = this.minBackoff;
    if (!this.ws && this.reconnectTimer && this.retryAt - Date.now() > this.minBackoff) {
      clearTimeout(this.reconnectTimer);
      this.reconnectTimer = null;
      this.retryAfter(Math.max(0, this.lastAttempt + this.minBackoff - Date.now()));
    }
    this.connect();
    this.armNotRunning(c);
  };

  Client.prototype.armNotRunning = function (c) {
    var self = this;
    if (c.timer || c.done) return;
    c.timer = setTimeout(function () {
      c.timer = null;
      if (c.done || self.ready) return;
      self.log("call " + c.id + ": server not running");
      var err = {
        code: "#N/A",
        message: "veer server not running on " + self.host() + ": start it with 'veer serve' (the add-in keeps trying to reach it)"
      };
      if (!c.subscribe) self.finish(c);
      // A streaming cell stays subscribed: it is re-sent, and updated, as
      // soon as the server is back.
      c.onError(err, false);
      self.emit();
    }, this.notRunningMs);
  };

  Client.prototype.finish = function (c) {
    c.done = true;
    if (c.timer) {
      clearTimeout(c.timer);
      c.timer = null;
    }
    this.calls.delete(c.id);
  };

  Client.prototype.fail = function (c, code, message) {
    this.finish(c);
    c.onError({ code: code, message: message }, false);
  };

  Client.prototype.cancel = function (id) {
    var c = this.calls.get(id);
    if (!c || c.done) return;
    var wasSent = c.sent;
    this.finish(c);
    if (wasSent && this.ready) {
      this.sendFrame(JSON.stringify({ cancel: c.id }), 0);
    }
    this.emit();
  };

  Client.prototype.scheduleFlush = function () {
    var self = this;
    if (this.flushTimer) return;
    this.flushTimer = setTimeout(function () {
      self.flushTimer = null;
      self.flush();
    }, 0);
  };

  Client.prototype.message = function (c) {
    var m = { id: c.id, fn: c.fn, args: c.args };
    if (c.subscribe) m.subscribe = true;
    // A call that saves a model carries the token too, so that a wrong one
    // is named as such in the cell's message.
    if (c.writes && this.token) m.token = this.token;
    return m;
  };

  Client.prototype.sendFrame = function (text, n) {
    try {
      this.ws.send(text);
      this.stats.frames++;
      this.stats.messages += n;
      return true;
    } catch (e) {
      return false;
    }
  };

  // flush sends the waiting calls: quick ones together in batch frames (up
  // to maxBatch calls or maxFrameChars characters each), slow ones alone.
  Client.prototype.flush = function () {
    if (!this.ready || !this.outbox.length) return;
    var queue = this.outbox;
    this.outbox = [];
    var batch = [];
    var chars = 2;
    var self = this;
    function send() {
      if (!batch.length) return;
      var text = batch.length === 1 ? batch[0].json : "[" + batch.map(function (c) { return c.json; }).join(",") + "]";
      self.sendFrame(text, batch.length);
      batch = [];
      chars = 2;
    }
    for (var i = 0; i < queue.length; i++) {
      var c = queue[i];
      if (c.done || c.sent) continue;
      if (c.json === null) {
        try {
          c.json = JSON.stringify(this.message(c));
        } catch (e) {
          this.fail(c, "#VALUE!", c.fn + ": the arguments cannot be sent (" + e.message + ")");
          continue;
        }
      }
      if (c.json.length > this.maxFrameChars) {
        this.fail(c, "#VALUE!", c.fn + ": the arguments are too large to send (" + Math.round(c.json.length / 1048576) +
          " MB; the limit is " + Math.round(this.maxFrameChars / 1048576) + " MB per call): use smaller ranges");
        continue;
      }
      if (c.timer) {
        clearTimeout(c.timer);
        c.timer = null;
      }
      c.sent = true;
      // A slow function or a big range travels alone, so that the quick
      // calls of the same tick are not answered only after it.
      if (this.slow[c.fn] || c.json.length > this.aloneChars) {
        this.sendFrame(c.json, 1);
        continue;
      }
      if (batch.length && (batch.length >= this.maxBatch || chars + c.json.length + 1 > this.maxFrameChars)) send();
      batch.push(c);
      chars += c.json.length + 1;
    }
    send();
  };

  Client.prototype.wsURL = function () {
    return this.server.replace(/^http/, "ws") + "/v1/ws";
  };

  Client.prototype.connect = function () {
    if (this.ws || this.reconnectTimer || typeof root.WebSocket !== "function") return;
    var self = this;
    this.lastAttempt = Date.now();
    this.log("connecting to " + this.wsURL());
    this.setState(this.stats.connects ? "reconnecting" : "connecting");
    var ws;
    try {
      ws = new root.WebSocket(this.wsURL());
    } catch (e) {
      this.scheduleReconnect();
      return;
    }
    this.ws = ws;
    ws.onopen = function () {
      if (self.ws !== ws) return;
      self.stats.connects++;
      self.log("open");
      self.backoff = self.minBackoff;
      self.presentToken(ws);
    };
    ws.onmessage = function (ev) {
      if (self.ws === ws) self.receive(ev.data);
    };
    ws.onclose = function (ev) {
      if (self.ws !== ws) return;
      self.ws = null;
      self.closed(ev);
    };
    ws.onerror = function () { /* a close event follows */ };
  };

  // presentToken sends the install token (if the user gave one) before any
  // call, then the waiting calls.
  Client.prototype.presentToken = function (ws) {
    var self = this;
    var ready = function () {
      if (self.ws !== ws) return;
      self.ready = true;
      self.setState("connected");
      self.resend();
      self.emit();
    };
    var p = this.token === null ? storedToken() : Promise.resolve(this.token);
    p.then(function (tok) {
      if (self.ws !== ws) return;
      self.token = tok || "";
      if (self.token) {
        self.tokenId = self.nextId++;
        self.tokenState = "sent";
        self.sendFrame(JSON.stringify({ id: self.tokenId, token: self.token }), 1);
      } else {
        self.tokenState = "none";
      }
      ready();
    }, ready);
  };

  // setToken stores the token and presents it on the open connection.
  Client.prototype.setToken = function (tok) {
    tok = (tok || "").trim();
    storageSet(TOKEN_KEY, tok);
    this.token = tok;
    if (!tok) {
      this.tokenState = "none";
    } else if (this.ready) {
      this.tokenId = this.nextId++;
      this.tokenState = "sent";
      this.sendFrame(JSON.stringify({ id: this.tokenId, token: tok }), 1);
    }
    // Calls that save models carry the token; re-encode waiting ones.
    this.calls.forEach(function (c) {
      if (c.writes && !c.sent) c.json = null;
    });
    this.emit();
  };

  // setServer points the client at another server address.
  Client.prototype.setServer = function (url) {
    var s = normalizeServer(url);
    storageSet(SERVER_KEY, s === scriptOrigin ? "" : s);
    if (s === this.server) return;
    this.server = s;
    this.backoff = this.minBackoff;
    if (this.reconnectTimer) {
      clearTimeout(this.reconnectTimer);
      this.reconnectTimer = null;
    }
    if (this.ws) {
      this.ws.close(1000, "switching server");
    } else {
      this.connect();
    }
  };

  // resend queues every live call that needs an answer from this
  // connection: unanswered calls and all subscriptions.
  Client.prototype.resend = function () {
    var self = this;
    var again = [];
    this.calls.forEach(function (c) {
      if (!c.done && !c.sent) again.push(c);
    });
    this.outbox = again;
    if (this.stats.connects > 1) this.stats.resent += again.length;
    if (again.length) this.log("sending " + again.length + " waiting call" + (again.length === 1 ? "" : "s"));
    this.flush();
  };

  Client.prototype.closed = function (ev) {
    var self = this;
    this.ready = false;
    var tooBig = ev && ev.code === 1009;
    this.log("closed (" + (ev ? ev.code + (ev.reason ? " " + ev.reason : "") : "?") + ")");
    this.calls.forEach(function (c) {
      if (c.done) return;
      var inFlight = c.sent && !c.answered;
      c.sent = false;
      if (tooBig && inFlight) {
        // The server refused a frame as too large: sending it again would
        // fail again.
        self.fail(c, "#VALUE!", c.fn + ": the server refused the request as too large (" + (ev.reason || "frame too large") + "): use smaller ranges");
        return;
      }
      // A subscription that has shown a value keeps it while the server is
      // away; everything else waits, and gets "not running" if that lasts.
      if (!c.answered) self.armNotRunning(c);
    });
    this.outbox = [];
    if (this.tokenState === "sent") this.tokenState = "none";
    this.setState("disconnected");
    this.scheduleReconnect();
  };

  // scheduleReconnect waits before the next attempt: exponential backoff
  // with jitter, up to maxBackoff, or up to a second while calls wait for
  // an answer (they give up after notRunningMs, so tries must be frequent).
  Client.prototype.scheduleReconnect = function () {
    if (this.reconnectTimer) return;
    var waiting = false;
    this.calls.forEach(function (c) {
      if (!c.done && !c.answered) waiting = true;
    });
    var delay = this.backoff * (0.8 + 0.4 * Math.random());
    this.backoff = Math.min(this.backoff * 2, waiting ? Math.min(1000, this.maxBackoff) : this.maxBackoff);
    this.retryAfter(delay);
  };

  Client.prototype.retryAfter = function (delay) {
    var self = this;
    this.log("retrying in " + Math.round(delay) + " ms");
    this.retryAt = Date.now() + delay;
    this.reconnectTimer = setTimeout(function () {
      self.reconnectTimer = null;
      self.connect();
    }, delay);
    this.emit();
  };

  Client.prototype.receive = function (data) {
    var msg;
    try {
      msg = JSON.parse(data);
    } catch (e) {
      return;
    }
    var list = Array.isArray(msg) ? msg : [msg];
    for (var i = 0; i < list.length; i++) this.answer(list[i]);
    this.emit();
  };

  Client.prototype.answer = function (a) {
    if (!a || typeof a !== "object") return;
    if (a.id === undefined || a.id === null) {
      // A problem with a whole frame; the runtime only sends well-formed
      // frames, so this is a server limit. Keep it for the pane.
      if (a.error) this.noteError("", a.error);
      return;
    }
    if (a.id === this.tokenId) {
      if (a.error) {
        this.tokenState = "refused";
        this.tokenMessage = a.error.message || "the server refused the token";
      } else {
        this.tokenState = "accepted";
        this.tokenMessage = "";
      }
      return;
    }
    if ("cancelled" in a) {
      if (a.cancelled) this.stats.cancelled++;
      var cc = this.calls.get(a.id);
      if (cc) this.finish(cc);
      return;
    }
    var c = this.calls.get(a.id);
    if (!c || c.done) return;
    if ("progress" in a) {
      if (c.onProgress) c.onProgress(a.progress);
      return;
    }
    c.answered = true;
    if (!c.subscribe) this.finish(c);
    if (a.error) {
      this.noteError(c.fn, a.error);
      c.onError(a.error, !!a.update);
    } else {
      c.onResult(a.value === undefined ? null : a.value, !!a.update);
    }
  };

  // noteError keeps the last errors with their full messages for the pane
  // (the host cannot show a message with every error kind).
  Client.prototype.noteError = function (fn, err) {
    this.errors.unshift({ time: new Date(), fn: fn, code: err.code || "#VALUE!", message: err.message || "" });
    if (this.errors.length > 50) this.errors.length = 50;
  };

  // ---- the host's custom functions ------------------------------------

  // hostError turns a server error into the host's error object.
  function hostError(err, fn) {
    var E = hostErrorClass();
    var codes = (root.CustomFunctions && root.CustomFunctions.ErrorCode) || {};
    var code = (err && err.code) || "#VALUE!";
    var m = HOST_KIND[code] || { kind: "invalidValue", message: true, prefix: true };
    var kind = codes[m.kind] || KIND_CODE[m.kind];
    var text = (err && err.message) || "";
    if (m.prefix) text = code + " " + text;
    if (text.length > MAX_MESSAGE) text = text.slice(0, MAX_MESSAGE - 1) + "…";
    if (!E) return { code: kind, message: text };
    return m.message && text ? new E(kind, text) : new E(kind);
  }

  // cellIn converts one cell the host passed to the wire form: blank cells
  // arrive as "" and are sent as null; error cells as {"error": code}.
  function cellIn(x) {
    if (x === "" || x === undefined) return null;
    if (isHostError(x)) return { error: x.code };
    if (x instanceof Date) return x.getTime() / 86400000 + 25569; // serial day number
    if (x !== null && typeof x === "object" && "basicValue" in x) return cellIn(x.basicValue);
    if (typeof x === "number" && !isFinite(x)) return { error: "#NUM!" };
    return x;
  }

  function argIn(a, param) {
    if (a === null || a === undefined) return null;
    if (Array.isArray(a)) {
      var m = a.map(function (row) {
        return Array.isArray(row) ? row.map(cellIn) : cellIn(row);
      });
      // Options ("any") may be text or a two-column range; a single cell is
      // its value.
      if (param && param.type === "any" && m.length === 1 && Array.isArray(m[0]) && m[0].length === 1) return m[0][0];
      return m;
    }
    return cellIn(a);
  }

  function cellOut(x) {
    if (x === null || x === undefined) return "";
    if (typeof x === "object" && !Array.isArray(x) && typeof x.error === "string") return hostError({ code: x.error, message: x.message || "" });
    return x;
  }

  // hostValue shapes a server value for the host: a scalar, or a
  // rectangular 2-D array for functions whose result spills. The value is
  // freshly parsed, so its rows are reused and changed in place (this is
  // the hot path of a 200,000-row spill).
  function hostValue(v, matrix) {
    if (!matrix) {
      while (Array.isArray(v)) v = v.length ? v[0] : null;
      return cellOut(v);
    }
    var rows = Array.isArray(v) ? v : [[v]];
    if (!rows.length) return [[""]];
    var width = 1, i, j, r;
    for (i = 0; i < rows.length; i++) {
      if (!Array.isArray(rows[i])) rows[i] = [rows[i]];
      if (rows[i].length > width) width = rows[i].length;
    }
    for (i = 0; i < rows.length; i++) {
      r = rows[i];
      for (j = 0; j < r.length; j++) {
        if (typeof r[j] !== "number") r[j] = cellOut(r[j]);
      }
      while (r.length < width) r.push("");
    }
    return rows;
  }

  function isErrorValue(x) {
    var E = hostErrorClass();
    return E ? x instanceof E : !!x && typeof x === "object" && typeof x.code === "string";
  }

  // hostFunction makes the JavaScript function the host calls for one
  // catalogue entry: declared parameters (null when omitted) and, last, the
  // invocation object.
  function hostFunction(client, f) {
    var matrix = f.result !== "value";
    return function () {
      var n = arguments.length;
      var inv = n > 0 ? arguments[n - 1] : null;
      var args = [];
      for (var i = 0; i < n - 1; i++) args.push(argIn(arguments[i], f.params[i]));
      if (f.streaming) {
        var h = client.request(f.name, args, {
          subscribe: true, writes: f.writes,
          onResult: function (v) { inv.setResult(hostValue(v, matrix)); },
          onError: function (e) { inv.setResult(hostError(e, f.name)); }
        });
        inv.onCanceled = function () { h.cancel(); };
        return undefined;
      }
      return new Promise(function (resolve, reject) {
        var h = client.request(f.name, args, {
          writes: f.writes,
          onResult: function (v) {
            var out = hostValue(v, matrix);
            if (isErrorValue(out)) reject(out);
            else resolve(out);
          },
          onError: function (e) { reject(hostError(e, f.name)); }
        });
        if (inv) inv.onCanceled = function () { h.cancel(); };
      });
    };
  }

  // ---- start -------------------------------------------------------------

  var catalog = root.veerCatalog || { functions: [], codes: {} };
  var slow = {};
  catalog.functions.forEach(function (f) {
    if (f.slow) slow[f.name] = true;
  });
  var client = new Client({ slow: slow });
  var registered = 0;
  var CF = root.CustomFunctions;
  if (CF && typeof CF.associate === "function") {
    catalog.functions.forEach(function (f) {
      CF.associate(f.id, hostFunction(client, f));
      registered++;
    });
  }
  client.connect();

  root.veer = {
    version: VERSION,
    catalog: catalog,
    client: client,
    registered: registered,
    call: function (fn, args, opts) { return client.call(fn, args, opts); },
    request: function (fn, args, opts) { return client.request(fn, args, opts); },
    status: function () { return client.status(); },
    onStatus: function (fn) { client.onStatus(fn); },
    setToken: function (t) { client.setToken(t); },
    setServer: function (u) { client.setServer(u); },
    recentErrors: function () { return client.errors.slice(); },
    hostError: hostError,
    hostValue: hostValue
  };
})(typeof self !== "undefined" ? self : this);
