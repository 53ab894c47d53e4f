// Package browsertest starts Debian's Chromium headless for tests that
// check veer's pages in a real browser (the web add-in and its task pane),
// and measures how much of a screenshot is drawn.
//
// A test that needs the browser calls Chromium first: it skips with a clear
// message when Chromium is missing, unless VEER_REQUIRE_ALL=1 (as in CI),
// which turns a missing browser into a failure.
package browsertest
