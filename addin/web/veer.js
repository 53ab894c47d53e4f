/*
 * veer.js — the runtime of veer's spreadsheet add-in (an ES2022 module, no
 * build step). It registers every function of veer's catalogue (catalog.js,
 * which the veer server generates) with the host's custom-functions runtime
 * and forwards each cell call to the local veer server through one Client
 * (client.js: batching, streaming, cancelling, reconnecting):
 *
 *   - cell values become the server's wire values (blank cells null, error
 *     cells {"error": code}, dates serial day numbers);
 *   - answers become a value or a rectangular spill;
 *   - server errors become the host's error kinds with the server's message;
 *   - streaming functions set every new answer into the cell; a cell the
 *     host cancels cancels its call.
 *
 * The add-in runs in the host's shared runtime, a webview that loads
 * taskpane.html, which loads this module (see README.md for why a module is
 * safe there). All statistics stay on the server. veer is a screening aid:
 * a signal prompts review by a licensed clinician under local
 * occupational-health rules; it is not a diagnosis.
 *
 * The task pane imports this module: the client it exports is the one that
 * computes the cells.
 */
import catalog from "./catalog.js";
import { Client } from "./client.js";

export const version = "1";

// ---- errors --------------------------------------------------------------

// How veer's error codes (server/README.md) reach the host. The host shows
// a message only with #VALUE! and #N/A, and cannot return #REF! or #NAME?
// from a custom function; it has no #BUSY!. Those arrive as #N/A with the
// original code at the start of the message.
const HOST_KIND = {
  "#VALUE!": { kind: "invalidValue", message: true },
  "#N/A": { kind: "notAvailable", message: true },
  "#NUM!": { kind: "invalidNumber", message: false },
  "#DIV/0!": { kind: "divisionByZero", message: false },
  "#NULL!": { kind: "nullReference", message: false },
  "#REF!": { kind: "notAvailable", message: true, prefix: true },
  "#NAME?": { kind: "notAvailable", message: true, prefix: true },
  "#BUSY!": { kind: "notAvailable", message: true, prefix: true },
};
const UNKNOWN_KIND = { kind: "invalidValue", message: true, prefix: true };
const KIND_CODE = {
  invalidValue: "#VALUE!", notAvailable: "#N/A", invalidNumber: "#NUM!",
  divisionByZero: "#DIV/0!", nullReference: "#NULL!",
};
const MAX_MESSAGE = 1000;

const hostErrorClass = () => globalThis.CustomFunctions?.Error;

// isHostError tells an error cell the host passed in.
function isHostError(x) {
  const E = hostErrorClass();
  if (E && x instanceof E) return true;
  return !!x && typeof x === "object" && !Array.isArray(x) && typeof x.code === "string" && x.code.startsWith("#") && !("error" in x);
}

// hostError turns a server error {code, message} into the host's error
// object.
export function hostError(err) {
  const E = hostErrorClass();
  const codes = globalThis.CustomFunctions?.ErrorCode ?? {};
  const code = err?.code || "#VALUE!";
  const m = HOST_KIND[code] ?? UNKNOWN_KIND;
  const kind = codes[m.kind] ?? KIND_CODE[m.kind];
  let text = err?.message || "";
  if (m.prefix) text = `${code} ${text}`;
  if (text.length > MAX_MESSAGE) text = text.slice(0, MAX_MESSAGE - 1) + "…";
  if (!E) return { code: kind, message: text };
  return m.message && text ? new E(kind, text) : new E(kind);
}

// isErrorValue tells a host error among the cells of a result.
function isErrorValue(x) {
  const E = hostErrorClass();
  return E ? x instanceof E : !!x && typeof x === "object" && typeof x.code === "string";
}

// ---- cells ---------------------------------------------------------------

// cellIn converts one cell the host passed to the wire form: blank cells
// arrive as "" and are sent as null; error cells as {"error": code}.
function cellIn(x) {
  if (x === "" || x === undefined) return null;
  if (isHostError(x)) return { error: x.code };
  if (x instanceof Date) return x.getTime() / 86400000 + 25569; // serial day number
  if (x !== null && typeof x === "object" && "basicValue" in x) return cellIn(x.basicValue);
  if (typeof x === "number" && !Number.isFinite(x)) return { error: "#NUM!" };
  return x;
}

// argIn converts one argument: a value, or a range (2-D array).
function argIn(a, param) {
  if (a == null) return null;
  if (!Array.isArray(a)) return cellIn(a);
  const m = a.map((row) => (Array.isArray(row) ? row.map(cellIn) : cellIn(row)));
  // Options ("any") may be text or a two-column range; a single cell is
  // its value.
  if (param?.type === "any" && m.length === 1 && Array.isArray(m[0]) && m[0].length === 1) return m[0][0];
  return m;
}

function cellOut(x) {
  if (x == null) return "";
  if (typeof x === "object" && !Array.isArray(x) && typeof x.error === "string") return hostError({ code: x.error, message: x.message || "" });
  return x;
}

// hostValue shapes a server value for the host: a scalar, or a rectangular
// 2-D array for functions whose result spills. The value is freshly parsed,
// so its rows are reused and changed in place (this is the hot path of a
// 200,000-row spill).
export function hostValue(v, matrix) {
  if (!matrix) {
    while (Array.isArray(v)) v = v.length ? v[0] : null;
    return cellOut(v);
  }
  const rows = Array.isArray(v) ? v : [[v]];
  if (!rows.length) return [[""]];
  let width = 1;
  for (let i = 0; i < rows.length; i++) {
    if (!Array.isArray(rows[i])) rows[i] = [rows[i]];
    width = Math.max(width, rows[i].length);
  }
  for (const r of rows) {
    for (let j = 0; j < r.length; j++) {
      if (typeof r[j] !== "number") r[j] = cellOut(r[j]);
    }
    while (r.length < width) r.push("");
  }
  return rows;
}

// ---- the host's custom functions -----------------------------------------

// hostFunction makes the JavaScript function the host calls for one
// catalogue entry: declared parameters (null when omitted) and, last, the
// invocation object.
function hostFunction(client, f) {
  const matrix = f.result !== "value";
  return (...given) => {
    const inv = given.length ? given.at(-1) : null;
    const args = given.slice(0, -1).map((a, i) => argIn(a, f.params[i]));
    if (f.streaming) {
      const h = client.request(f.name, args, {
        subscribe: true, writes: f.writes,
        onResult: (v) => inv.setResult(hostValue(v, matrix)),
        onError: (e) => inv.setResult(hostError(e)),
      });
      inv.onCanceled = () => h.cancel();
      return undefined;
    }
    return new Promise((resolve, reject) => {
      const h = client.request(f.name, args, {
        writes: f.writes,
        onResult: (v) => {
          const out = hostValue(v, matrix);
          if (isErrorValue(out)) reject(out);
          else resolve(out);
        },
        onError: (e) => reject(hostError(e)),
      });
      if (inv) inv.onCanceled = () => h.cancel();
    });
  };
}

// register associates every catalogue function with the host, if there is
// one, and returns how many it registered.
function register(client) {
  const CF = globalThis.CustomFunctions;
  if (typeof CF?.associate !== "function") return 0;
  for (const f of catalog.functions) CF.associate(f.id, hostFunction(client, f));
  return catalog.functions.length;
}

// ---- start ---------------------------------------------------------------

export { catalog };

// client is the connection that computes the cells; the task pane shows it.
export const client = new Client({ slow: new Set(catalog.functions.filter((f) => f.slow).map((f) => f.name)) });

// registered is the number of functions registered with the host.
export const registered = register(client);

client.connect();

// The client's calls, for the task pane.
export const call = (fn, args, opts) => client.call(fn, args, opts);
export const request = (fn, args, opts) => client.request(fn, args, opts);
export const status = () => client.status();
export const onStatus = (listener) => client.onStatus(listener);
export const setToken = (tok) => client.setToken(tok);
export const setServer = (url) => client.setServer(url);
export const recentErrors = () => client.recentErrors();
