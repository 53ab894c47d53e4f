/*
 * client.js — the add-in's connection to the local veer server (an ES2022
 * module, no build step). One websocket carries every call:
 *
 *   - calls made in the same tick go out as one batch frame (a call to a
 *     slow function, or one with a big range, gets a frame of its own, so it
 *     does not hold up the answers of quick ones);
 *   - a subscribed call is answered again whenever the server pushes an
 *     update (after a model is refitted);
 *   - cancel() sends {"cancel": id};
 *   - when the connection drops, the client reconnects with exponential
 *     backoff, presents the install token again and re-sends waiting calls
 *     and subscriptions; a call that cannot reach any server within a few
 *     seconds gets "veer server not running on ..." instead of hanging.
 *
 * The client knows nothing of spreadsheets: veer.js adapts it to the host's
 * custom functions, and the task pane uses it directly.
 */

const TOKEN_KEY = "veer.token";
const SERVER_KEY = "veer.server";
const DEFAULT_SERVER = "https://localhost:7311";

// The server that served this file: the veer server serves the add-in
// itself, so by default that is also the server to call.
const scriptOrigin = (() => {
  try {
    const here = new URL(import.meta.url);
    if (/^https?:$/.test(here.protocol)) return here.origin;
    if (/^https?:$/.test(globalThis.location?.protocol)) return globalThis.location.origin;
  } catch { /* fall through */ }
  return DEFAULT_SERVER;
})();

// ---- settings ------------------------------------------------------------

const ignore = () => {};

function storageGet(key) {
  try {
    return globalThis.localStorage?.getItem(key) ?? null;
  } catch {
    return null;
  }
}

// storageSet keeps a setting in the page's storage and in the host's own
// storage, which the add-in's runtimes share; "" removes it.
function storageSet(key, value) {
  for (const store of [() => globalThis.localStorage, () => globalThis.OfficeRuntime?.storage]) {
    try {
      const s = store();
      if (!s) continue;
      // The host's storage answers with a promise.
      Promise.resolve(value ? s.setItem(key, value) : s.removeItem(key)).catch(ignore);
    } catch { /* private mode or not available: this session only */ }
  }
}

async function storedToken() {
  const t = storageGet(TOKEN_KEY);
  if (t) return t;
  try {
    return (await globalThis.OfficeRuntime?.storage?.getItem(TOKEN_KEY)) || "";
  } catch {
    return "";
  }
}

function normalizeServer(url) {
  const u = new URL(url);
  if (u.protocol !== "http:" && u.protocol !== "https:") throw new Error("the server address must start with http:// or https://");
  return u.origin;
}

function notify(listener, status) {
  try {
    listener(status);
  } catch { /* the listener's problem */ }
}

// ---- the client ----------------------------------------------------------

// Client is one connection to a veer server. Options (all optional):
// server, notRunningMs (3000), minBackoff and maxBackoff (250 and 5000 ms),
// maxFrameChars, maxBatch, aloneChars (limits of a batch frame) and slow (a
// Set of function names that always travel alone).
export class Client {
  // Statistics the pane and the tests read.
  stats = { frames: 0, messages: 0, connects: 0, cancelled: 0, resent: 0 };
  // Recent connection events ({at, what}), for the pane and for tests.
  events = [];

  #server;
  #opts;
  #backoff;
  #calls = new Map(); // id -> call, in the order they were made
  #outbox = [];
  #ws = null;
  #ready = false; // open and the token (if any) presented
  #state = "idle";
  #nextId = 1;
  #token = null; // null: not read yet
  #tokenId = 0;
  #tokenState = "none";
  #tokenMessage = "";
  #flushTimer = null;
  #reconnectTimer = null;
  #retryAt = 0;
  #lastAttempt = 0;
  #listeners = [];
  #errors = [];

  constructor({
    server, notRunningMs = 3000, minBackoff = 250, maxBackoff = 5000,
    maxFrameChars = 48 * 1024 * 1024, maxBatch = 2000, aloneChars = 256 * 1024, slow = new Set(),
  } = {}) {
    this.#server = normalizeServer(server || storageGet(SERVER_KEY) || scriptOrigin);
    this.#opts = { notRunningMs, minBackoff, maxBackoff, maxFrameChars, maxBatch, aloneChars, slow };
    this.#backoff = minBackoff;
  }

  // server is the origin of the veer server ("https://localhost:7311").
  get server() { return this.#server; }

  // socket is the current websocket, or null.
  get socket() { return this.#ws; }

  status() {
    let pending = 0, streams = 0;
    for (const c of this.#calls.values()) {
      if (c.subscribe) streams++;
      else pending++;
    }
    return {
      state: this.#state, server: this.#server, tokenState: this.#tokenState, tokenMessage: this.#tokenMessage,
      retryInMs: this.#reconnectTimer ? Math.max(0, this.#retryAt - Date.now()) : 0,
      pending, streams,
    };
  }

  // onStatus calls listener with the status now and on every change.
  onStatus(listener) {
    this.#listeners.push(listener);
    notify(listener, this.status());
  }

  // recentErrors returns the last errors (newest first) with their full
  // messages, for the pane: the host cannot show a message with every
  // error kind.
  recentErrors() { return this.#errors.slice(); }

  // request sends a call. Options: subscribe, writes (the call saves on the
  // server: it carries the token), onResult(value, isUpdate),
  // onError({code, message}, isUpdate), onProgress(share). It returns
  // {id, cancel()}.
  request(fn, args, { subscribe = false, writes = false, onResult, onError, onProgress } = {}) {
    args = [...(args ?? [])];
    while (args.length && args.at(-1) == null) args.pop();
    const c = {
      id: this.#nextId++, fn, args, subscribe: !!subscribe, writes: !!writes,
      onResult: onResult ?? ignore, onError: onError ?? ignore, onProgress: onProgress ?? null,
      json: null, sent: false, answered: false, done: false, timer: null,
    };
    this.#calls.set(c.id, c);
    this.#enqueue(c);
    this.#emit();
    return { id: c.id, cancel: () => this.cancel(c.id) };
  }

  // call is request as a promise of the first answer; errors reject with
  // {code, message}.
  call(fn, args, opts) {
    return new Promise((resolve, reject) => {
      this.request(fn, args, { ...opts, subscribe: false, onResult: resolve, onError: reject });
    });
  }

  cancel(id) {
    const c = this.#calls.get(id);
    if (!c || c.done) return;
    const wasSent = c.sent;
    this.#finish(c);
    if (wasSent && this.#ready) this.#sendFrame(JSON.stringify({ cancel: c.id }), 0);
    this.#emit();
  }

  // setToken stores the install token and presents it on the open
  // connection.
  setToken(tok) {
    tok = (tok || "").trim();
    storageSet(TOKEN_KEY, tok);
    this.#token = tok;
    if (!tok) this.#tokenState = "none";
    else if (this.#ready) this.#sendToken();
    // Calls that save models carry the token; re-encode waiting ones.
    for (const c of this.#calls.values()) {
      if (c.writes && !c.sent) c.json = null;
    }
    this.#emit();
  }

  // setServer points the client at another server address.
  setServer(url) {
    const s = normalizeServer(url);
    storageSet(SERVER_KEY, s === scriptOrigin ? "" : s);
    if (s === this.#server) return;
    this.#server = s;
    this.#backoff = this.#opts.minBackoff;
    if (this.#reconnectTimer) {
      clearTimeout(this.#reconnectTimer);
      this.#reconnectTimer = null;
    }
    if (this.#ws) this.#ws.close(1000, "switching server");
    else this.connect();
  }

  // connect opens the websocket unless it is open or a retry is scheduled.
  connect() {
    if (this.#ws || this.#reconnectTimer || typeof globalThis.WebSocket !== "function") return;
    this.#lastAttempt = Date.now();
    this.#log(`connecting to ${this.#wsURL()}`);
    this.#setState(this.stats.connects ? "reconnecting" : "connecting");
    let ws;
    try {
      ws = new WebSocket(this.#wsURL());
    } catch {
      this.#scheduleReconnect();
      return;
    }
    this.#ws = ws;
    ws.onopen = () => {
      if (this.#ws !== ws) return;
      this.stats.connects++;
      this.#log("open");
      this.#backoff = this.#opts.minBackoff;
      this.#presentToken(ws);
    };
    ws.onmessage = (ev) => {
      if (this.#ws === ws) this.#receive(ev.data);
    };
    ws.onclose = (ev) => {
      if (this.#ws !== ws) return;
      this.#ws = null;
      this.#closed(ev);
    };
    ws.onerror = ignore; // a close event follows
  }

  // ---- internals ----------------------------------------------------------

  #log(what) {
    this.events.push({ at: Date.now(), what });
    if (this.events.length > 100) this.events.shift();
  }

  #emit() {
    const s = this.status();
    for (const listener of this.#listeners) notify(listener, s);
  }

  #setState(state) {
    if (this.#state === state) return;
    this.#state = state;
    this.#emit();
  }

  #host() {
    try {
      return new URL(this.#server).host;
    } catch {
      return this.#server;
    }
  }

  #wsURL() {
    return this.#server.replace(/^http/, "ws") + "/v1/ws";
  }

  #enqueue(c) {
    c.sent = false;
    this.#outbox.push(c);
    if (this.#ready) {
      this.#scheduleFlush();
      return;
    }
    // A new call is a reason to try again soon rather than after a long
    // backoff.
    const { minBackoff } = this.#opts;
    this.#backoff = minBackoff;
    if (!this.#ws && this.#reconnectTimer && this.#retryAt - Date.now() > minBackoff) {
      clearTimeout(this.#reconnectTimer);
      this.#reconnectTimer = null;
      this.#retryAfter(Math.max(0, this.#lastAttempt + minBackoff - Date.now()));
    }
    this.connect();
    this.#armNotRunning(c);
  }

  // armNotRunning gives a call "server not running" if no connection is
  // ready within notRunningMs.
  #armNotRunning(c) {
    if (c.timer || c.done) return;
    c.timer = setTimeout(() => {
      c.timer = null;
      if (c.done || this.#ready) return;
      this.#log(`call ${c.id}: server not running`);
      const err = {
        code: "#N/A",
        message: `veer server not running on ${this.#host()}: start it with 'veer serve' (the add-in keeps trying to reach it)`,
      };
      // A streaming cell stays subscribed: it is re-sent, and updated, as
      // soon as the server is back.
      if (!c.subscribe) this.#finish(c);
      c.onError(err, false);
      this.#emit();
    }, this.#opts.notRunningMs);
  }

  #finish(c) {
    c.done = true;
    clearTimeout(c.timer);
    c.timer = null;
    this.#calls.delete(c.id);
  }

  #fail(c, code, message) {
    this.#finish(c);
    c.onError({ code, message }, false);
  }

  #scheduleFlush() {
    this.#flushTimer ??= setTimeout(() => {
      this.#flushTimer = null;
      this.#flush();
    }, 0);
  }

  #message(c) {
    const m = { id: c.id, fn: c.fn, args: c.args };
    if (c.subscribe) m.subscribe = true;
    // A call that saves a model carries the token too, so that a wrong one
    // is named as such in the cell's message.
    if (c.writes && this.#token) m.token = this.#token;
    return m;
  }

  #sendFrame(text, n) {
    try {
      this.#ws.send(text);
      this.stats.frames++;
      this.stats.messages += n;
      return true;
    } catch {
      return false;
    }
  }

  #sendToken() {
    this.#tokenId = this.#nextId++;
    this.#tokenState = "sent";
    this.#sendFrame(JSON.stringify({ id: this.#tokenId, token: this.#token }), 1);
  }

  // flush sends the waiting calls: quick ones together in batch frames (up
  // to maxBatch calls or maxFrameChars characters each), slow ones alone.
  #flush() {
    if (!this.#ready || !this.#outbox.length) return;
    const { maxFrameChars, maxBatch, aloneChars, slow } = this.#opts;
    const queue = this.#outbox;
    this.#outbox = [];
    let batch = [];
    let chars = 2;
    const send = () => {
      if (!batch.length) return;
      const text = batch.length === 1 ? batch[0].json : `[${batch.map((c) => c.json).join(",")}]`;
      this.#sendFrame(text, batch.length);
      batch = [];
      chars = 2;
    };
    for (const c of queue) {
      if (c.done || c.sent) continue;
      if (c.json === null) {
        try {
          c.json = JSON.stringify(this.#message(c));
        } catch (e) {
          this.#fail(c, "#VALUE!", `${c.fn}: the arguments cannot be sent (${e.message})`);
          continue;
        }
      }
      if (c.json.length > maxFrameChars) {
        const mb = (n) => Math.round(n / 1048576);
        this.#fail(c, "#VALUE!", `${c.fn}: the arguments are too large to send (${mb(c.json.length)} MB; the limit is ${mb(maxFrameChars)} MB per call): use smaller ranges`);
        continue;
      }
      clearTimeout(c.timer);
      c.timer = null;
      c.sent = true;
      // A slow function or a big range travels alone, so that the quick
      // calls of the same tick are not answered only after it.
      if (slow.has(c.fn) || c.json.length > aloneChars) {
        this.#sendFrame(c.json, 1);
        continue;
      }
      if (batch.length && (batch.length >= maxBatch || chars + c.json.length + 1 > maxFrameChars)) send();
      batch.push(c);
      chars += c.json.length + 1;
    }
    send();
  }

  // presentToken sends the install token (if the user gave one) before any
  // call, then the waiting calls.
  async #presentToken(ws) {
    const tok = await (this.#token ?? storedToken());
    if (this.#ws !== ws) return;
    this.#token = tok || "";
    if (this.#token) this.#sendToken();
    else this.#tokenState = "none";
    this.#ready = true;
    this.#setState("connected");
    this.#resend();
    this.#emit();
  }

  // resend queues every live call that needs an answer from this
  // connection: unanswered calls and all subscriptions.
  #resend() {
    const again = [...this.#calls.values()].filter((c) => !c.done && !c.sent);
    this.#outbox = again;
    if (this.stats.connects > 1) this.stats.resent += again.length;
    if (again.length) this.#log(`sending ${again.length} waiting call${again.length === 1 ? "" : "s"}`);
    this.#flush();
  }

  #closed(ev) {
    this.#ready = false;
    const tooBig = ev?.code === 1009;
    this.#log(`closed (${ev ? ev.code + (ev.reason ? " " + ev.reason : "") : "?"})`);
    for (const c of [...this.#calls.values()]) {
      if (c.done) continue;
      const inFlight = c.sent && !c.answered;
      c.sent = false;
      if (tooBig && inFlight) {
        // The server refused a frame as too large: sending it again would
        // fail again.
        this.#fail(c, "#VALUE!", `${c.fn}: the server refused the request as too large (${ev.reason || "frame too large"}): use smaller ranges`);
        continue;
      }
      // A subscription that has shown a value keeps it while the server is
      // away; everything else waits, and gets "not running" if that lasts.
      if (!c.answered) this.#armNotRunning(c);
    }
    this.#outbox = [];
    if (this.#tokenState === "sent") this.#tokenState = "none";
    this.#setState("disconnected");
    this.#scheduleReconnect();
  }

  // scheduleReconnect waits before the next attempt: exponential backoff
  // with jitter, up to maxBackoff, or up to a second while calls wait for
  // an answer (they give up after notRunningMs, so tries must be frequent).
  #scheduleReconnect() {
    if (this.#reconnectTimer) return;
    const { maxBackoff } = this.#opts;
    const waiting = [...this.#calls.values()].some((c) => !c.done && !c.answered);
    const delay = this.#backoff * (0.8 + 0.4 * Math.random());
    this.#backoff = Math.min(this.#backoff * 2, waiting ? Math.min(1000, maxBackoff) : maxBackoff);
    this.#retryAfter(delay);
  }

  #retryAfter(delay) {
    this.#log(`retrying in ${Math.round(delay)} ms`);
    this.#retryAt = Date.now() + delay;
    this.#reconnectTimer = setTimeout(() => {
      this.#reconnectTimer = null;
      this.connect();
    }, delay);
    this.#emit();
  }

  #receive(data) {
    let msg;
    try {
      msg = JSON.parse(data);
    } catch {
      return;
    }
    for (const a of Array.isArray(msg) ? msg : [msg]) this.#answer(a);
    this.#emit();
  }

  #answer(a) {
    if (!a || typeof a !== "object") return;
    if (a.id == null) {
      // A problem with a whole frame; the client only sends well-formed
      // frames, so this is a server limit. Keep it for the pane.
      if (a.error) this.#noteError("", a.error);
      return;
    }
    if (a.id === this.#tokenId) {
      this.#tokenState = a.error ? "refused" : "accepted";
      this.#tokenMessage = a.error ? a.error.message || "the server refused the token" : "";
      return;
    }
    const c = this.#calls.get(a.id);
    if ("cancelled" in a) {
      if (a.cancelled) this.stats.cancelled++;
      if (c) this.#finish(c);
      return;
    }
    if (!c || c.done) return;
    if ("progress" in a) {
      c.onProgress?.(a.progress);
      return;
    }
    c.answered = true;
    if (!c.subscribe) this.#finish(c);
    if (a.error) {
      this.#noteError(c.fn, a.error);
      c.onError(a.error, !!a.update);
    } else {
      c.onResult(a.value === undefined ? null : a.value, !!a.update);
    }
  }

  #noteError(fn, err) {
    this.#errors.unshift({ time: new Date(), fn, code: err.code || "#VALUE!", message: err.message || "" });
    if (this.#errors.length > 50) this.#errors.length = 50;
  }
}
