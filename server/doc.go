// Package server is veer's local function server: it answers spreadsheet
// cell calls over HTTP and a websocket, dispatching to the cell catalogue
// (package functions/cell), keeps fitted models in a versioned, checksummed
// registry on disk, pushes new answers to subscribed cells when a model gets
// a new version, and guards all of it so that only the user's own
// spreadsheet can read the results.
//
// # Protocol
//
// A call names a function and its arguments as spreadsheets send them
// (numbers, text, true/false, null for blank, {"error": "#N/A"} for error
// values, ranges as arrays of rows; a flat array is one column):
//
//	{"id": 7, "fn": "VEER.SCORE", "args": ["bp", [[41], [43]], "side=up"], "subscribe": true}
//
// and is answered with a value (a spill is an array of rows) or an error:
//
//	{"id": 7, "value": [[0.4], [1.2]]}
//	{"id": 7, "error": {"code": "#N/A", "message": "..."}}
//
// HTTP: POST /v1/call takes one call object or a JSON array of them (a
// batch) and answers one answer or an array in the same order, with status
// 200 even for error answers. "id" is optional and echoed. Transport
// problems get an error status with the same error body: 400 (not JSON, or
// a batch over the limit), 403 (Host or Origin refused), 413 (body over the
// size limit). Other endpoints: GET /v1/functions (the catalogue listing),
// GET /v1/models (models and versions), GET /v1/models/{name or handle} (a
// stored document, handle in X-Veer-Handle), PUT /v1/models/{name} and
// DELETE /v1/models/{name} (token required; 401 without), GET /v1/health,
// and GET /addin/... (static add-in files when Config.Static is set).
//
// Websocket (GET /v1/ws): each text frame holds one message or an array of
// messages (a batch, answered by one frame holding the array of answers in
// order). Messages:
//
//	{"id": 7, "fn": ..., "args": [...]}        a call; answered with the same id
//	{"id": 7, ..., "subscribe": true}          also answered again, with
//	                                           "update": true, whenever a model
//	                                           the call read by bare name gets
//	                                           a new version or is deleted
//	{"id": 7, "progress": 0.4}                 (server) progress of a slow call
//	{"cancel": 7}                              cancels call or subscription 7;
//	                                           answered {"id": 7, "cancelled": true},
//	                                           or false when it had already
//	                                           finished; a cancelled call gets
//	                                           no other answer
//	{"id": 1, "token": "..."}                  presents the install token for
//	                                           the connection; answered
//	                                           {"id": 1, "value": true}
//
// A call may also carry "token". A new call reusing the id of a call in
// progress or a subscription replaces (cancels) it. Subscriptions are kept
// only for functions marked Streaming and only when the call read a model by
// bare name; a call naming an exact handle ("bp@v3") never changes. Closing
// the connection cancels its calls. A frame over the size limit closes the
// connection with code 1009 and a reason; shutdown closes with 1001.
//
// # Results, cache and sharing
//
// Results are cached by function, exact arguments and the versions of the
// models the computation read; a cached answer is reused while every model
// reference resolves to the same version, so a recalculating spreadsheet
// sees the same numbers and a refit invalidates exactly the answers that
// depend on the model. Identical concurrent calls share one computation,
// which is cancelled only when every caller has gone. #BUSY! answers (time
// limit, busy, cancelled) are not cached. A function that saves a model
// (Writes) is re-run once its handle is no longer the latest version, so
// refitting earlier data makes it the latest again.
//
// # Security
//
//   - Loopback: the default address is 127.0.0.1; the Host header must name
//     a loopback address or localhost (or Config.AllowedHosts) and a port
//     the server listens on, which defeats DNS rebinding.
//   - Origin: requests without an Origin header come from non-browser
//     clients (the CLI, curl, the LibreOffice extension) and are allowed;
//     browsers always send Origin on cross-site requests and websocket
//     upgrades, and those are allowed only from the server's own origin or
//     Config.AllowedOrigins (exact). This blocks cross-site request forgery
//     and cross-site websocket hijacking by a web page in the user's browser.
//   - Writes (functions marked Writes, PUT and DELETE of models) need the
//     per-install token stored in DataDir/token (0600), sent as the
//     X-Veer-Token header or the "token" field. Add-ins obtain it like a
//     local user: run `veer token` and paste it into the add-in's settings.
//   - Limits (Limits): frame/body size, rows per argument, cells per call,
//     calls per batch, concurrent computations, time per call, in-flight
//     messages and subscriptions per connection. Each answers a clear error.
//   - Logs carry function names, timings, sizes and error codes; never cell
//     values, ids, model names or messages.
//
// veer is a screening aid: a signal prompts review by a licensed clinician
// under local occupational-health rules; it is not a diagnosis.
package server
