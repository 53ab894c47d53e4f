// Package web is veer's add-in for spreadsheets that host JavaScript
// add-ins (a custom-functions runtime plus a task pane). It holds the static
// files (veer.js, the task pane, the icons) embedded in the binary, and
// generates from the function catalogue everything that must stay in step
// with it: the custom-functions metadata (functions.json), the runtime's
// function table (catalog.js), a help page and the add-in manifest. There is
// no second, hand-written list of functions.
//
// `veer serve` serves Site at /addin/; `veer addin manifest` prints the
// manifest. The add-in is a thin client: every cell call goes to the local
// veer server over one websocket, and the statistics stay on the server.
//
// veer is a screening aid: a signal prompts review by a licensed clinician
// under local occupational-health rules; it is not a diagnosis.
package web
