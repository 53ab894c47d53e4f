/*
 * unsupported.js — the one plain (ES5) script of the add-in. The task pane
 * loads it with "nomodule", so it runs only in a webview that cannot run
 * JavaScript modules: Internet Explorer's, which some older versions of the
 * spreadsheet still use for add-ins. veer's runtime and pane are modules and
 * do not run there at all; instead of "Starting…" for ever, the status line
 * says what to do.
 */
(function () {
  var status = document.getElementById("status");
  var text = document.getElementById("status-text");
  if (!status || !text) return;
  status.className = "status bad";
  text.textContent = "This version of the spreadsheet shows add-ins in an old web view (Internet Explorer) that cannot run veer's add-in: update the spreadsheet program, or install Microsoft Edge WebView2 (on Windows).";
})();
