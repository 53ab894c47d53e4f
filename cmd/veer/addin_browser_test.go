package main

import (
	"bytes"
	"context"
	"crypto/sha256"
	"crypto/tls"
	"crypto/x509"
	"encoding/base64"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"image/color"
	"math"
	"math/rand/v2"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/chromedp/cdproto/fetch"
	"github.com/chromedp/chromedp"

	"veer/examples"
	"veer/functions/catalog"
	"veer/functions/screening"
	"veer/internal/browsertest"
	"veer/internal/symbols"
	"veer/server"
	"veer/server/servertest"
)

// The browser tests load the REAL add-in runtime (addin/web/veer.js) and
// task pane, served by a REAL veer server running in this process, into
// headless Chromium. A small stand-in for the host's library
// (addin/web/testdata/office-stub.js) registers and calls the functions the
// way the host platform documents (CustomFunctions.associate, invocation
// objects with setResult and onCanceled, CustomFunctions.Error), and records
// anything the platform would refuse. Every expected number comes from the
// same server over plain HTTP (/v1/call): the add-in must add nothing.

// startAddinServer starts a veer server built exactly as `veer serve`
// builds it, plus the test host page at /addin/test/, on addr.
func startAddinServer(t *testing.T, addr, dir string) *liveServer {
	t.Helper()
	return buildAddinServer(t, addr, dir).listen(t)
}

// buildAddinServer builds the server (the demo models take a moment) without
// listening yet.
func buildAddinServer(t *testing.T, addr, dir string) *liveServer {
	t.Helper()
	s, log := buildLive(t, &serverFlags{addr: addr, data: dir, testFiles: os.DirFS(filepath.Join("..", "..", "addin", "web", "testdata"))})
	return &liveServer{s: s, dir: dir, log: log}
}

// listen serves a built server on its address until the test ends; https,
// when set, is a client that trusts the server's certificate.
func (ls *liveServer) listen(t *testing.T) *liveServer {
	t.Helper()
	ln, err := ls.s.Listen()
	for i := 0; err != nil && i < 50; i++ { // the old server's port may take a moment to free
		time.Sleep(20 * time.Millisecond)
		ln, err = ls.s.Listen()
	}
	if err != nil {
		t.Fatal(err)
	}
	if ls.https != nil {
		ls.Server = servertest.ServeTLS(t, ls.s, ln, ls.https)
	} else {
		ls.Server = servertest.Serve(t, ls.s, ln)
	}
	ls.Auth = server.TokenHeader + ": " + ls.s.Token()
	t.Cleanup(func() { ls.stop(t) })
	return ls
}

// call asks the server over HTTP, as a non-browser client, and returns the
// value; an error answer ends the test.
func (ls *liveServer) call(t *testing.T, fn string, args ...any) json.RawMessage {
	t.Helper()
	a := ls.For(t).Call(fn, args...)
	if a.Error != nil {
		t.Fatalf("the server answered %s over HTTP with %s %s", fn, a.Error.Code, a.Error.Message)
	}
	return a.Value
}

// hostResult is what the stand-in host saw in a cell.
type hostResult struct {
	Value json.RawMessage `json:"value"`
	Error *struct {
		Code    string  `json:"code"`
		Message *string `json:"message"`
	} `json:"error"`
	MS float64 `json:"ms"`
}

func (r hostResult) String() string {
	if r.Error != nil {
		m := "<no message>"
		if r.Error.Message != nil {
			m = *r.Error.Message
		}
		return r.Error.Code + " " + m
	}
	return string(r.Value)
}

// js evaluates a script (awaiting a promise) and decodes its result.
func inPage[T any](t *testing.T, ctx context.Context, timeout time.Duration, script string) T {
	t.Helper()
	c, cancel := context.WithTimeout(ctx, timeout)
	defer cancel()
	v, err := chromedp.Run(c, chromedp.Evaluate[T](script, chromedp.EvalAwaitPromise))
	if err != nil {
		t.Fatalf("in the browser: %v\nscript: %.300s", err, script)
	}
	return v
}

func addinJSON(t *testing.T, v any) string {
	t.Helper()
	b, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// hostCall makes the stand-in host call a function as a formula would.
func hostCall(t *testing.T, ctx context.Context, fn string, args ...any) hostResult {
	t.Helper()
	return inPage[hostResult](t, ctx, 30*time.Second, fmt.Sprintf(`testHost.call(%q, %s, 25000)`, fn, addinJSON(t, args)))
}

// oneCol makes a one-column range.
func oneCol[T any](xs ...T) [][]any {
	out := make([][]any, len(xs))
	for i, x := range xs {
		out[i] = []any{x}
	}
	return out
}

// refData generates a synthetic healthy reference cohort (fixed seed): 150
// workers with 6 exams at irregular gaps, a linear age trend, a persistent
// worker effect that decays over the years and measurement noise.
func addinRefData(seed uint64, shift float64) (ids, ages, vals [][]any) {
	r := rand.New(rand.NewPCG(seed, 7))
	for w := 0; w < 150; w++ {
		a := 20 + 35*r.Float64()
		s := r.NormFloat64()
		for k := 0; k < 6; k++ {
			d := 0.5 + 2*r.Float64()
			a += d
			rho := math.Pow(0.6, d)
			s = rho*s + math.Sqrt(1-rho*rho)*r.NormFloat64()
			v := 100 + 0.6*a + shift + 8*s + 6*r.NormFloat64()
			ids = append(ids, []any{fmt.Sprintf("R%03d", w)})
			ages = append(ages, []any{math.Round(a*100) / 100})
			vals = append(vals, []any{math.Round(v*10) / 10})
		}
	}
	return ids, ages, vals
}

func cellNumber(t *testing.T, raw json.RawMessage) float64 {
	t.Helper()
	var v any
	if err := json.Unmarshal(raw, &v); err != nil {
		t.Fatalf("%s: %v", raw, err)
	}
	for {
		a, ok := v.([]any)
		if !ok || len(a) == 0 {
			break
		}
		v = a[0]
	}
	f, ok := v.(float64)
	if !ok {
		t.Fatalf("%s is not a number", raw)
	}
	return f
}

func wantCellError(t *testing.T, r hostResult, code string, parts ...string) {
	t.Helper()
	if r.Error == nil {
		t.Fatalf("got value %s; want the error %s", r.Value, code)
	}
	if r.Error.Code != code {
		t.Fatalf("got %s; want the error kind %s", r, code)
	}
	for _, p := range parts {
		if r.Error.Message == nil || !strings.Contains(*r.Error.Message, p) {
			t.Errorf("the message of %s should mention %q", r, p)
		}
	}
}

// clientEvents returns the runtime's recent connection events.
func clientEvents(t *testing.T, ctx context.Context) string {
	t.Helper()
	return strings.Join(inPage[[]string](t, ctx, time.Second, `(() => { const t0 = veer.client.events.length ? veer.client.events[0].at : 0; return veer.client.events.map(e => "+" + (e.at - t0) + " ms " + e.what); })()`), "\n")
}

func noViolations(t *testing.T, ctx context.Context) {
	t.Helper()
	if v := inPage[[]string](t, ctx, 5*time.Second, `testHost.violations.slice()`); len(v) > 0 {
		t.Errorf("the host platform would refuse what the add-in did:\n  %s", strings.Join(v, "\n  "))
	}
}

// TestWebAddinInBrowser runs the web add-in's runtime against a real
// server in headless Chromium: values, spills, errors, bad input, tokens,
// streaming after a refit, cancellation, a large range, a stopped server
// and a restart.
func TestWebAddinInBrowser(t *testing.T) {
	exe := browsertest.Chromium(t)
	begin := time.Now()
	dir := t.TempDir()
	live := startAddinServer(t, "127.0.0.1:0", dir)
	ctx := browsertest.New(t, exe, 1000, 800)
	exceptions := browsertest.Exceptions(ctx)
	defer func() {
		if e := exceptions(); len(e) > 0 {
			t.Errorf("uncaught exceptions in the page:\n  %s", strings.Join(e, "\n  "))
		}
	}()
	if err := chromedp.Do(ctx, chromedp.Navigate("http://"+live.Addr+"/addin/test/host.html")); err != nil {
		t.Fatal(err)
	}
	n := inPage[int](t, ctx, 10*time.Second, `testHost.ready`)
	if want := catalog.New().Len(); n != want || inPage[int](t, ctx, time.Second, `veer.registered`) != want {
		t.Fatalf("functions.json lists %d functions and veer.js registered %d; the catalogue has %d", n, inPage[int](t, ctx, time.Second, `veer.registered`), want)
	}
	noViolations(t, ctx)
	t.Logf("browser and server up after %v", time.Since(begin).Round(time.Millisecond))

	t.Run("values", func(t *testing.T) {
		r := hostCall(t, ctx, "VEER.ZSCORE", "demo-sbp", oneCol(40), oneCol(130), oneCol("tower"))
		if r.Error != nil || cellNumber(t, r.Value) != cellNumber(t, live.call(t, "VEER.ZSCORE", "demo-sbp", 40, 130, "tower")) {
			t.Errorf("VEER.ZSCORE in the cell gave %s; the server says %s", r, live.call(t, "VEER.ZSCORE", "demo-sbp", 40, 130, "tower"))
		}
		r = hostCall(t, ctx, "VEER.ZSCORE", "demo-sbp", oneCol(30, 40, 50), oneCol(120, 130, 140), oneCol("tower"))
		var got, want [][]float64
		json.Unmarshal(r.Value, &got)
		json.Unmarshal(live.call(t, "VEER.ZSCORE", "demo-sbp", oneCol(30, 40, 50), oneCol(120, 130, 140), "tower"), &want)
		if fmt.Sprint(got) != fmt.Sprint(want) || len(got) != 3 {
			t.Errorf("a column of z-scores spilled %v; the server says %v", got, want)
		}
		// Twenty cells recalculated in the same tick travel in one frame.
		type batch struct{ Frames, N, Errors int }
		b := inPage[batch](t, ctx, 20*time.Second, `(async () => {
			const f0 = veer.client.stats.frames, ids = [];
			for (let i = 0; i < 20; i++) ids.push(testHost.invoke("VEER.ZSCORE", ["demo-sbp", [[30 + i]], [[125]], [["tower"]]]));
			const rs = await Promise.all(ids.map(id => testHost.wait(id, 1, 15000)));
			return {frames: veer.client.stats.frames - f0, n: rs.length, errors: rs.filter(r => r[0].error).length};
		})()`)
		if b.Frames != 1 || b.N != 20 || b.Errors != 0 {
			t.Errorf("20 calls in one tick took %d frames (want 1), %d answers, %d errors", b.Frames, b.N, b.Errors)
		}
		// A slow function travels in a frame of its own: the quick calls of
		// the same tick are answered while it still computes.
		type alone struct {
			Frames, Quick, Errors, Slow int
		}
		a := inPage[alone](t, ctx, 20*time.Second, fmt.Sprintf(`(async () => {
			const f0 = veer.client.stats.frames;
			const slow = testHost.invoke("VEER.LIMIT", [200, "demo-sbp", [["method=bootstrap; reps=100000; seed=%d"]]]);
			const ids = [];
			for (let i = 0; i < 3; i++) ids.push(testHost.invoke("VEER.ZSCORE", ["demo-sbp", [[40 + i]], [[128]], [["tower"]]]));
			const rs = await Promise.all(ids.map(id => testHost.wait(id, 1, 15000)));
			const out = {frames: veer.client.stats.frames - f0, quick: rs.length, errors: rs.filter(r => r[0].error).length, slow: testHost.results(slow).length};
			testHost.cancel(slow);
			return out;
		})()`, time.Now().UnixNano()%1000000+1000000))
		if a.Frames != 2 || a.Quick != 3 || a.Errors != 0 || a.Slow != 0 {
			t.Errorf("a slow call and 3 quick ones in one tick: %d frames (want 2), %d quick answers (%d errors), the slow call answered %d times before them (want 0)", a.Frames, a.Quick, a.Errors, a.Slow)
		}
		noViolations(t, ctx)
	})

	t.Run("spill", func(t *testing.T) {
		r := rand.New(rand.NewPCG(11, 3))
		var ids, ages, vals []any
		for w := 0; w < 3; w++ {
			a := 30 + 10*r.Float64()
			for k := 0; k < 4; k++ {
				a += 0.5 + 2*r.Float64()
				ids = append(ids, fmt.Sprintf("T%d", w))
				ages = append(ages, math.Round(a*100)/100)
				vals = append(vals, math.Round(120+12*r.NormFloat64()+float64(w*8*k)))
			}
		}
		r.Shuffle(len(ids), func(i, j int) {
			ids[i], ids[j] = ids[j], ids[i]
			ages[i], ages[j] = ages[j], ages[i]
			vals[i], vals[j] = vals[j], vals[i]
		})
		res := hostCall(t, ctx, "VEER.CHART", "demo-sbp", oneCol(ids...), oneCol(ages...), oneCol(vals...), oneCol("tower"), [][]any{{"target=20; side=up"}})
		if res.Error != nil {
			t.Fatalf("VEER.CHART: %s", res)
		}
		var got, want [][]any
		json.Unmarshal(res.Value, &got)
		json.Unmarshal(live.call(t, "VEER.CHART", "demo-sbp", oneCol(ids...), oneCol(ages...), oneCol(vals...), "tower", "target=20; side=up"), &want)
		if len(got) != len(ids) || len(got[0]) != 6 {
			t.Fatalf("VEER.CHART spilled %d rows of %d; want %d rows of 6", len(got), len(got[0]), len(ids))
		}
		for i := range want {
			for j := range want[i] {
				w := want[i][j]
				if w == nil {
					w = "" // a blank cell
				}
				if fmt.Sprint(got[i][j]) != fmt.Sprint(w) {
					t.Errorf("row %d column %d: the cell shows %v, the server says %v", i+1, j+1, got[i][j], w)
				}
			}
		}
		noViolations(t, ctx)
	})

	t.Run("errors", func(t *testing.T) {
		// #REF! cannot leave a custom function: #N/A with the code and the
		// server's message.
		wantCellError(t, hostCall(t, ctx, "VEER.ZSCORE", "no-such-model", oneCol(40), oneCol(120)), "#N/A", "#REF!", "no-such-model")
		// #NUM! takes no message in the cell; the pane keeps it.
		wantCellError(t, hostCall(t, ctx, "VEER.CENTILE", "demo-sbp", oneCol(10), 50.0, oneCol("tower")), "#NUM!")
		type noted struct{ Code, Message, Fn string }
		last := inPage[noted](t, ctx, time.Second, `veer.recentErrors()[0]`)
		if last.Code != "#NUM!" || last.Fn != "VEER.CENTILE" || !strings.Contains(last.Message, "outside the reference range") {
			t.Errorf("the pane's error list has %+v; want the #NUM! message of VEER.CENTILE", last)
		}
		// The server names the function once, at the start.
		if !strings.HasPrefix(last.Message, "VEER.CENTILE: ") || strings.Count(last.Message, "VEER.CENTILE") != 1 {
			t.Errorf("message %q should name the function once, at the start", last.Message)
		}
		// Text in a numeric range names the row and the text.
		wantCellError(t, hostCall(t, ctx, "VEER.ZSCORE", "demo-sbp", oneCol(40, 41), oneCol[any](120, "abc"), oneCol("tower")), "#VALUE!", "row 2", "abc")
		// A missing argument.
		wantCellError(t, hostCall(t, ctx, "VEER.ZSCORE", "demo-sbp", oneCol(40)), "#VALUE!", "3 to 6 arguments")
		wantCellError(t, hostCall(t, ctx, "VEER.LIMIT"), "#VALUE!", "target")
		// Blank and error cells give #N/A in their own row only.
		type cells struct {
			Value [][]any `json:"value"`
		}
		c := inPage[cells](t, ctx, 10*time.Second, `testHost.call("VEER.ZSCORE", ["demo-sbp", [[40],[41],[42]], [[120],[""],[new CustomFunctions.Error(CustomFunctions.ErrorCode.notAvailable)]], [["tower"]]])`)
		if len(c.Value) != 3 || !strings.Contains(fmt.Sprint(c.Value[1][0]), "#N/A") || !strings.Contains(fmt.Sprint(c.Value[2][0]), "#N/A") {
			t.Errorf("blank and error cells: got %v; want a z-score, then #N/A, #N/A", c.Value)
		}
		if _, ok := c.Value[0][0].(float64); !ok {
			t.Errorf("row 1 should keep its z-score; got %v", c.Value[0][0])
		}
		noViolations(t, ctx)
	})

	ids1, ages1, vals1 := addinRefData(1, 0)
	ids2, ages2, vals2 := addinRefData(1, 12)
	var refmean int

	t.Run("token", func(t *testing.T) {
		inPage[any](t, ctx, time.Second, `veer.setToken("0123456789abcdef"), null`)
		state := inPage[string](t, ctx, 5*time.Second, `(async () => { for (let i = 0; i < 50 && veer.status().tokenState === "sent"; i++) await new Promise(r => setTimeout(r, 50)); return veer.status().tokenState; })()`)
		if state != "refused" {
			t.Errorf("a wrong token: the status says %q; want refused", state)
		}
		wantCellError(t, hostCall(t, ctx, "VEER.FIT", "wt", ids1, ages1, vals1), "#VALUE!", "token")
		inPage[any](t, ctx, time.Second, fmt.Sprintf(`veer.setToken(%q), null`, live.s.Token()))
		state = inPage[string](t, ctx, 5*time.Second, `(async () => { for (let i = 0; i < 50 && veer.status().tokenState === "sent"; i++) await new Promise(r => setTimeout(r, 50)); return veer.status().tokenState; })()`)
		if state != "accepted" {
			t.Fatalf("the right token: the status says %q; want accepted", state)
		}
	})

	t.Run("streaming after refit", func(t *testing.T) {
		r := hostCall(t, ctx, "VEER.FIT", "wt", ids1, ages1, vals1)
		if r.Error != nil || string(r.Value) != `"wt@v1"` {
			t.Fatalf("VEER.FIT gave %s; want \"wt@v1\"", r)
		}
		refmean = inPage[int](t, ctx, time.Second, `testHost.invoke("VEER.REFMEAN", ["wt", [[40]]])`)
		first := inPage[[]hostResult](t, ctx, 10*time.Second, fmt.Sprintf(`testHost.wait(%d, 1, 8000)`, refmean))
		v1 := cellNumber(t, live.call(t, "VEER.REFMEAN", "wt@v1", 40))
		if cellNumber(t, first[0].Value) != v1 {
			t.Fatalf("VEER.REFMEAN(\"wt\", 40) shows %s; the server says %v", first[0], v1)
		}
		t0 := time.Now()
		if r := hostCall(t, ctx, "VEER.FIT", "wt", ids2, ages2, vals2); string(r.Value) != `"wt@v2"` {
			t.Fatalf("refitting gave %s; want \"wt@v2\"", r)
		}
		both := inPage[[]hostResult](t, ctx, 10*time.Second, fmt.Sprintf(`testHost.wait(%d, 2, 8000)`, refmean))
		v2 := cellNumber(t, live.call(t, "VEER.REFMEAN", "wt@v2", 40))
		if got := cellNumber(t, both[1].Value); got != v2 || v2 == v1 {
			t.Errorf("after the refit the cell shows %v; the server says %v for wt@v2 (was %v)", got, v2, v1)
		}
		t.Logf("the streaming cell updated %v after the refit", time.Since(t0).Round(time.Millisecond))
		noViolations(t, ctx)
	})

	t.Run("200000 rows", func(t *testing.T) {
		type big struct {
			N      int
			Ms     float64
			Sample [][]any
			Error  string
		}
		b := inPage[big](t, ctx, 40*time.Second, `(async () => {
			const n = 200000, ages = new Array(n), vals = new Array(n);
			for (let i = 0; i < n; i++) { ages[i] = [25 + (i % 3500) / 100]; vals[i] = [100 + (i % 61)]; }
			const r = await testHost.call("VEER.ZSCORE", ["demo-sbp", ages, vals, [["tower"]]], 35000);
			if (r.error) return {n: 0, ms: r.ms, sample: [], error: r.error.code + " " + r.error.message};
			return {n: r.value.length, ms: r.ms, sample: [r.value[0], r.value[1], r.value[n - 1]], error: ""};
		})()`)
		if b.Error != "" || b.N != 200000 {
			t.Fatalf("VEER.ZSCORE on 200,000 rows: %d rows, error %q", b.N, b.Error)
		}
		want := live.call(t, "VEER.ZSCORE", "demo-sbp", oneCol(25.0, 25.01, 25+float64(199999%3500)/100), oneCol(100.0, 101, 100+float64(199999%61)), "tower")
		if addinJSON(t, b.Sample) != string(want) {
			t.Errorf("rows 1, 2 and 200,000 show %v; the server says %s", b.Sample, want)
		}
		t.Logf("200,000 rows: %.0f ms from the call to the spilled column", b.Ms)
	})

	t.Run("cancel", func(t *testing.T) {
		// A limit by bootstrap with 100,000 sequences takes seconds;
		// the host cancels it (the user deletes the formula).
		before := inPage[int](t, ctx, time.Second, `veer.client.stats.cancelled`)
		id := inPage[int](t, ctx, time.Second, fmt.Sprintf(`testHost.invoke("VEER.LIMIT", [200, "demo-sbp", [["method=bootstrap; reps=100000; seed=%d"]]])`, time.Now().UnixNano()%1000000))
		time.Sleep(400 * time.Millisecond)
		t0 := time.Now()
		inPage[any](t, ctx, time.Second, fmt.Sprintf(`testHost.cancel(%d), null`, id))
		got := inPage[int](t, ctx, 5*time.Second, fmt.Sprintf(`(async () => { for (let i = 0; i < 80 && veer.client.stats.cancelled === %d; i++) await new Promise(r => setTimeout(r, 25)); return veer.client.stats.cancelled; })()`, before))
		if got != before+1 {
			t.Fatalf("the server acknowledged %d cancellations; want %d", got-before, 1)
		}
		t.Logf("the server acknowledged the cancel after %v", time.Since(t0).Round(time.Millisecond))
		// The server runs in this process: its CPU time shows whether the
		// cancelled computation stopped (reported, not checked: that is the
		// engine's side of cancellation).
		c0 := processCPU()
		time.Sleep(time.Second)
		t.Logf("CPU time of the test process in the second after the cancel: %v", processCPU()-c0)
		if n := inPage[int](t, ctx, time.Second, fmt.Sprintf(`testHost.results(%d).length`, id)); n != 0 {
			t.Errorf("the cancelled cell still got %d results", n)
		}
		noViolations(t, ctx)
	})

	t.Run("server not running", func(t *testing.T) {
		t0 := time.Now()
		live.stop(t)
		t.Logf("the server stopped in %v", time.Since(t0).Round(time.Millisecond))
		r := hostCall(t, ctx, "VEER.ZSCORE", "demo-sbp", oneCol(44), oneCol(131), oneCol("tower"))
		wantCellError(t, r, "#N/A", "veer server not running on "+live.Addr)
		if r.MS > 5000 {
			t.Errorf("the cell waited %.0f ms for the error; want a few seconds", r.MS)
		}
		t.Logf("\"server not running\" after %.0f ms", r.MS)
		if s := inPage[string](t, ctx, time.Second, `veer.status().state`); s == "connected" {
			t.Errorf("the status says connected with the server stopped")
		}
	})

	t.Run("reconnect after restart", func(t *testing.T) {
		// A cell recalculated while the server is down waits; a new server
		// on the same port answers it, and the streaming cell subscribes
		// again.
		live2 := buildAddinServer(t, live.Addr, dir)
		connects := inPage[int](t, ctx, time.Second, `veer.client.stats.connects`)
		id := inPage[int](t, ctx, time.Second, `testHost.invoke("VEER.ZSCORE", ["demo-sbp", [[45]], [[132]], [["tower"]]])`)
		time.Sleep(300 * time.Millisecond)
		t0 := time.Now()
		live2.listen(t)
		got := inPage[[]hostResult](t, ctx, 10*time.Second, fmt.Sprintf(`testHost.wait(%d, 1, 9000)`, id))
		if got[0].Error != nil || cellNumber(t, got[0].Value) != cellNumber(t, live2.call(t, "VEER.ZSCORE", "demo-sbp", 45, 132, "tower")) {
			t.Fatalf("the pending cell got %s after the restart; the runtime's connection log:\n%s", got[0], clientEvents(t, ctx))
		}
		t.Logf("the pending call was answered %v after the new server started", time.Since(t0).Round(time.Millisecond))
		if c := inPage[int](t, ctx, time.Second, `veer.client.stats.connects`); c <= connects {
			t.Errorf("no reconnection counted (%d, was %d)", c, connects)
		}
		if refmean == 0 {
			t.Skip("the streaming cell was not set up")
		}
		ids3, ages3, vals3 := addinRefData(2, 25)
		if r := hostCall(t, ctx, "VEER.FIT", "wt", ids3, ages3, vals3); string(r.Value) != `"wt@v3"` {
			t.Fatalf("fitting on the new server gave %s; want \"wt@v3\" (the token must be presented again)", r)
		}
		v3 := cellNumber(t, live2.call(t, "VEER.REFMEAN", "wt@v3", 40))
		last := inPage[float64](t, ctx, 10*time.Second, fmt.Sprintf(`(async () => {
			for (let i = 0; i < 160; i++) {
				const rs = testHost.results(%d), r = rs[rs.length - 1];
				if (r && r.value && r.value[0][0] === %v) return r.value[0][0];
				await new Promise(r => setTimeout(r, 50));
			}
			const rs = testHost.results(%d), r = rs[rs.length - 1];
			return r && r.value ? r.value[0][0] : -1;
		})()`, refmean, v3, refmean))
		if last != v3 {
			t.Errorf("the streaming cell shows %v after a refit on the restarted server; want %v", last, v3)
		}
		noViolations(t, ctx)
	})
	t.Logf("whole browser test: %v", time.Since(begin).Round(time.Millisecond))
}

// demoWorker picks a worker of the demo workforce whose blood pressure
// really drifts (truth.csv), with at least six exams, whose chart signals,
// and returns the exam table (header first) and the
// worker's row numbers in it.
func demoWorker(t *testing.T, live *liveServer) (table [][]any, worker string, group string, rows []int) {
	t.Helper()
	recs, err := csv.NewReader(bytes.NewReader(examples.WorkforceCSV())).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	h := recs[0]
	idx := map[string]int{}
	for i, c := range h {
		idx[c] = i
	}
	table = [][]any{{"worker", "group", "age", "sbp"}}
	var ids, ages, vals, groups []any
	for _, r := range recs[1:] {
		a, err1 := strconv.ParseFloat(r[idx["age"]], 64)
		v, err2 := strconv.ParseFloat(r[idx["sbp"]], 64)
		if err1 != nil || err2 != nil {
			continue
		}
		table = append(table, []any{r[idx["worker"]], r[idx["group"]], a, v})
		ids, ages, vals, groups = append(ids, r[idx["worker"]]), append(ages, a), append(vals, v), append(groups, r[idx["group"]])
	}
	var out [][]any
	json.Unmarshal(live.call(t, "VEER.CHART", "demo-sbp", oneCol(ids...), oneCol(ages...), oneCol(vals...), oneCol(groups...), "target=20; side=up"), &out)
	count := map[any]int{}
	for _, id := range ids {
		count[id]++
	}
	truth, err := csv.NewReader(bytes.NewReader(examples.TruthCSV())).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	affected := map[any]bool{}
	for _, r := range truth[1:] {
		for j, c := range truth[0] {
			if c == "affected_sbp" && r[j] == "1" {
				affected[r[0]] = true
			}
		}
	}
	for i, r := range out {
		if r[4] == true && count[ids[i]] >= 6 && affected[ids[i]] {
			worker, group = ids[i].(string), groups[i].(string)
			break
		}
	}
	if worker == "" {
		t.Fatal("no demo worker signals")
	}
	for i := 1; i < len(table); i++ {
		if table[i][0] == worker {
			rows = append(rows, i)
		}
	}
	return table, worker, group, rows
}

// officeStub answers the task pane's request for the host library with the
// test stand-in, as if the host had loaded it.
func officeStub(t *testing.T, ctx context.Context) {
	t.Helper()
	stub, err := os.ReadFile(filepath.Join("..", "..", "addin", "web", "testdata", "office-stub.js"))
	if err != nil {
		t.Fatal(err)
	}
	events := chromedp.Events(ctx, fetch.RequestPaused)
	if _, err := chromedp.Call(ctx, fetch.Enable, fetch.EnableParams{Patterns: []*fetch.RequestPattern{{URLPattern: "https://appsforoffice.microsoft.com/*"}}}); err != nil {
		t.Fatal(err)
	}
	go func() {
		for ev, err := range events {
			if err != nil {
				return
			}
			chromedp.Call(ctx, fetch.FulfillRequest, fetch.FulfillRequestParams{
				RequestID: ev.RequestID, ResponseCode: 200,
				ResponseHeaders: []*fetch.HeaderEntry{{Name: "Content-Type", Value: "text/javascript"}},
				Body:            stub,
			})
		}
	}()
}

// TestTaskPaneInBrowser renders the real task pane with a demo worker's
// charts, checks the drawing against the server's numbers and that the
// screenshot shows a chart, and saves the screenshots (in
// VEER_SCREENSHOT_DIR when set).
func TestTaskPaneInBrowser(t *testing.T) {
	exe := browsertest.Chromium(t)
	begin := time.Now()
	live := startAddinServer(t, "127.0.0.1:0", t.TempDir())
	ctx := browsertest.New(t, exe, 520, 900)
	exceptions := browsertest.Exceptions(ctx)
	defer func() {
		if e := exceptions(); len(e) > 0 {
			t.Errorf("uncaught exceptions in the pane:\n  %s", strings.Join(e, "\n  "))
		}
	}()
	officeStub(t, ctx)
	if err := chromedp.Do(ctx, chromedp.Navigate("http://"+live.Addr+"/addin/taskpane.html")); err != nil {
		t.Fatal(err)
	}
	// The pane is a module; the tests reach its exports by importing it
	// again (the same instance the page runs).
	const pane = `(await import(new URL("taskpane.js", location.href).href))`
	inPage[any](t, ctx, 15*time.Second, `(async () => { await `+pane+`.ready; await `+pane+`.selectModel("demo-sbp"); return null; })()`)
	// The pane's page is the add-in's shared runtime: the cell functions
	// are registered there too, as the host expects.
	if n := inPage[int](t, ctx, 10*time.Second, `testHost.ready`); n != catalog.New().Len() {
		t.Errorf("the pane's page registered %d functions; the catalogue has %d", n, catalog.New().Len())
	}
	noViolations(t, ctx)
	type paneState struct {
		Models  []string
		Info    int
		Handle  bool
		Status  string
		Stubbed bool
	}
	ps := inPage[paneState](t, ctx, 5*time.Second, `({
		models: Array.from(document.querySelectorAll("#model option")).map(o => o.value),
		info: document.querySelectorAll("#info tbody tr").length,
		handle: document.querySelector("#info tbody").textContent.includes("demo-sbp@v1"),
		status: document.getElementById("status-text").textContent,
		stubbed: typeof testHost === "object"
	})`)
	if !ps.Stubbed {
		t.Fatal("the pane did not load the host library (the stand-in)")
	}
	if strings.Join(ps.Models, ",") != "demo-fev1,demo-sbp" || ps.Info < 10 || !ps.Handle || !strings.HasPrefix(ps.Status, "Connected to veer on "+live.Addr) {
		t.Errorf("the pane shows models %v, %d diagnostics (handle shown: %v), status %q", ps.Models, ps.Info, ps.Handle, ps.Status)
	}

	table, worker, group, rows := demoWorker(t, live)
	type picked struct {
		Worker string
		Group  string
		Ages   []float64
		Values []float64
	}
	w := inPage[picked](t, ctx, 5*time.Second, fmt.Sprintf(`(async () => %s.workerFromTable(%s, %d, "demo-sbp", {id: "worker", age: "age", value: "", group: "group"}))()`, pane, addinJSON(t, table), rows[len(rows)/2]))
	if w.Worker != worker || w.Group != group || len(w.Ages) != len(rows) {
		t.Fatalf("the selected row gave worker %q (%s) with %d exams; want %q (%s) with %d", w.Worker, w.Group, len(w.Ages), worker, group, len(rows))
	}
	for i, r := range rows {
		if w.Ages[i] != table[r][2].(float64) || w.Values[i] != table[r][3].(float64) {
			t.Fatalf("exam %d: the pane read %v at %v; the table has %v at %v", i+1, w.Values[i], w.Ages[i], table[r][3], table[r][2])
		}
	}
	wjs := addinJSON(t, map[string]any{"model": "demo-sbp", "worker": w.Worker, "group": w.Group, "ages": w.Ages, "values": w.Values, "options": "target=20; side=up"})
	t0 := time.Now()
	inPage[any](t, ctx, 20*time.Second, `(async () => { await `+pane+`.showWorker(`+wjs+`); return null; })()`)
	t.Logf("the worker's charts were drawn in %v", time.Since(t0).Round(time.Millisecond))

	var chart [][]any
	ids := make([]any, len(w.Ages))
	for i := range ids {
		ids[i] = w.Worker
	}
	json.Unmarshal(live.call(t, "VEER.CHART", "demo-sbp", oneCol(ids...), oneCol(addinAnys(w.Ages)...), oneCol(addinAnys(w.Values)...), w.Group, "target=20; side=up"), &chart)
	signals := 0
	for _, r := range chart {
		if r[4] == true {
			signals++
		}
	}
	type drawn struct {
		Readings, Signals, Limits, Bands, Medians int
		Title, Desc, Summary                      string
		// The marks, to compare with the report's (symbols.Legend).
		BandSignals, Outside, Rings      int
		SignalTags, SignalFills, RingInk []string
		LimitDash, LimitInk              string
		BandLegend, StatLegend           []string
	}
	d := inPage[drawn](t, ctx, 5*time.Second, `({
		readings: document.querySelectorAll("#band-chart .reading").length,
		signals: document.querySelectorAll("#stat-chart .signal").length,
		limits: document.querySelectorAll("#stat-chart .limit").length,
		bands: document.querySelectorAll("#band-chart .band polygon").length,
		medians: document.querySelectorAll("#band-chart .median").length,
		title: document.querySelector("#band-chart svg title").textContent,
		desc: document.querySelector("#stat-chart svg desc").textContent,
		summary: document.getElementById("worker-summary").textContent,
		bandSignals: document.querySelectorAll("#band-chart .signal").length,
		outside: document.querySelectorAll("#band-chart .reading.outside").length,
		rings: document.querySelectorAll("#band-chart .outside-ring").length,
		signalTags: [...document.querySelectorAll(".chart .signal")].map((e) => e.tagName),
		signalFills: [...document.querySelectorAll(".chart .signal")].map((e) => e.getAttribute("fill")),
		ringInk: [...document.querySelectorAll(".chart .outside-ring")].map((e) => e.getAttribute("stroke")),
		limitDash: document.querySelector("#stat-chart .limit").getAttribute("stroke-dasharray"),
		limitInk: document.querySelector("#stat-chart .limit").getAttribute("stroke"),
		bandLegend: [...document.querySelectorAll("#band-legend li")].map((e) => e.textContent.trim()),
		statLegend: [...document.querySelectorAll("#stat-legend li")].map((e) => e.textContent.trim())
	})`)
	// One mark, one meaning: the pane draws a signal, a reading outside
	// the central 95% and the limit as the report does, and says so in its
	// keys with the key's words.
	key := symbols.Legend
	if d.BandSignals != signals || d.Rings != d.Outside {
		t.Errorf("reading chart: %d signal marks (want %d), %d rings for %d readings outside the central 95%%", d.BandSignals, signals, d.Rings, d.Outside)
	}
	for i, tag := range d.SignalTags {
		if tag != "path" || d.SignalFills[i] != key.Signal.Fill {
			t.Errorf("signal mark %d: <%s fill=%q>, want the key's diamond filled %s", i+1, tag, d.SignalFills[i], key.Signal.Fill)
		}
	}
	for _, ink := range d.RingInk {
		if ink != key.Outside.Stroke {
			t.Errorf("ring drawn in %s, want %s", ink, key.Outside.Stroke)
		}
	}
	if d.LimitDash != key.Limit.Dash || d.LimitInk != key.Limit.Stroke {
		t.Errorf("limit line %s dashed %q, want %s dashed %q", d.LimitInk, d.LimitDash, key.Limit.Stroke, key.Limit.Dash)
	}
	for _, want := range [][2]any{{d.BandLegend, key.Outside.Meaning}, {d.BandLegend, key.Signal.Meaning}, {d.StatLegend, key.Limit.Meaning}, {d.StatLegend, key.Signal.Meaning}} {
		if !slices.Contains(want[0].([]string), want[1].(string)) {
			t.Errorf("a key lacks %q: %q", want[1], want[0])
		}
	}
	if d.Readings != len(w.Ages) || d.Signals != signals || signals == 0 || d.Limits != 1 || d.Bands < 2 || d.Medians < 1 {
		t.Errorf("drawn: %d readings (want %d), %d signals (server: %d), %d limit lines, %d band areas, %d median lines", d.Readings, len(w.Ages), d.Signals, signals, d.Limits, d.Bands, d.Medians)
	}
	if !strings.Contains(d.Title, w.Worker) || !strings.Contains(d.Desc, "limit") || !strings.Contains(d.Summary, screening.Caution) {
		t.Errorf("text alternatives: title %q, description %q, summary %q", d.Title, d.Desc, d.Summary)
	}

	full, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatal(err)
	}
	band, err := chromedp.Run(ctx, chromedp.Screenshot(chromedp.CSS("#band-chart svg")))
	if err != nil {
		t.Fatal(err)
	}
	stat, err := chromedp.Run(ctx, chromedp.Screenshot(chromedp.CSS("#stat-chart svg")))
	if err != nil {
		t.Fatal(err)
	}
	white := color.RGBA{255, 255, 255, 255}
	bandImg, statImg := browsertest.DecodePNG(t, band), browsertest.DecodePNG(t, stat)
	inkBand, inkStat := browsertest.Ink(bandImg, white, 24), browsertest.Ink(statImg, white, 24)
	// The band's sky blue (#56B4E9 over white) and the signals' vermillion.
	sky := browsertest.Share(bandImg, func(r, g, b uint8) bool { return b > 200 && r < 215 && int(b)-int(r) > 30 })
	verm := browsertest.Share(statImg, func(r, g, b uint8) bool { return r > 180 && g < 140 && b < 70 })
	t.Logf("band chart %v: %.1f%% ink, %.1f%% band blue; statistic chart %v: %.1f%% ink, %.2f%% vermillion",
		bandImg.Bounds().Size(), 100*inkBand, 100*sky, statImg.Bounds().Size(), 100*inkStat, 100*verm)
	if bandImg.Bounds().Dx() < 300 || inkBand < 0.08 || sky < 0.04 {
		t.Errorf("the reference chart looks blank: %.1f%% non-white, %.1f%% band colour", 100*inkBand, 100*sky)
	}
	if inkStat < 0.03 || verm < 0.0005 {
		t.Errorf("the statistic chart looks blank or has no signal marks: %.1f%% non-white, %.2f%% vermillion", 100*inkStat, 100*verm)
	}
	out := os.Getenv("VEER_SCREENSHOT_DIR")
	if out == "" {
		out = t.TempDir()
	}
	for name, b := range map[string][]byte{"taskpane.png": full, "taskpane-band.png": band, "taskpane-chart.png": stat} {
		if err := os.WriteFile(filepath.Join(out, name), b, 0o644); err != nil {
			t.Error(err)
		}
	}
	// Where modules cannot run, the pane's one plain script says so (here
	// run by hand: this browser runs modules, so the page skipped it).
	old := inPage[string](t, ctx, 5*time.Second, `new Promise((resolve, reject) => {
		const s = document.createElement("script");
		s.src = "unsupported.js";
		s.onload = () => resolve(document.getElementById("status").className + ": " + document.getElementById("status-text").textContent);
		s.onerror = () => reject(new Error("unsupported.js did not load"));
		document.head.append(s);
	})`)
	if !strings.HasPrefix(old, "status bad: ") || !strings.Contains(old, "cannot run veer's add-in") {
		t.Errorf("in a webview without modules the status would say %q", old)
	}

	// The status line tells when the server goes away.
	live.stop(t)
	status := inPage[string](t, ctx, 8*time.Second, `(async () => {
		for (let i = 0; i < 120; i++) {
			const s = document.getElementById("status-text").textContent;
			if (s.includes("not running")) return s;
			await new Promise(r => setTimeout(r, 50));
		}
		return document.getElementById("status-text").textContent;
	})()`)
	if !strings.Contains(status, "veer server not running on "+live.Addr) {
		t.Errorf("with the server stopped the status says %q", status)
	}
	t.Logf("screenshots in %s; whole pane test %v", out, time.Since(begin).Round(time.Millisecond))
}

// TestWebAddinOverTLS runs the add-in as spreadsheets load it: the page
// over HTTPS from `veer serve --tls` with the local certificate, and the
// websocket over wss. The browser is told to accept exactly that
// certificate's key, as a user who trusted it would.
func TestWebAddinOverTLS(t *testing.T) {
	exe := browsertest.Chromium(t)
	dir := t.TempDir()
	cfg, leaf, _, err := serverTLS(dir, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	sf := &serverFlags{addr: "127.0.0.1:0", data: dir, tlsConfig: cfg, testFiles: os.DirFS(filepath.Join("..", "..", "addin", "web", "testdata"))}
	s, log := buildLive(t, sf)
	pool := x509.NewCertPool()
	pool.AddCert(leaf)
	live := (&liveServer{s: s, dir: dir, log: log, https: &http.Client{Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}}}}).listen(t)
	_, port, _ := net.SplitHostPort(live.Addr)
	spki := sha256.Sum256(leaf.RawSubjectPublicKeyInfo)
	ctx := browsertest.New(t, exe, 800, 600, chromedp.Flag("ignore-certificate-errors-spki-list", base64.StdEncoding.EncodeToString(spki[:])))
	if err := chromedp.Do(ctx, chromedp.Navigate("https://localhost:"+port+"/addin/test/host.html")); err != nil {
		t.Fatal(err)
	}
	if n := inPage[int](t, ctx, 10*time.Second, `testHost.ready`); n != catalog.New().Len() {
		t.Fatalf("%d functions over HTTPS", n)
	}
	if srv := inPage[string](t, ctx, time.Second, `veer.client.server`); srv != "https://localhost:"+port {
		t.Errorf("the runtime calls %s; want the page's own https origin", srv)
	}
	r := hostCall(t, ctx, "VEER.ZSCORE", "demo-sbp", oneCol(40), oneCol(130), oneCol("tower"))
	if r.Error != nil || cellNumber(t, r.Value) != cellNumber(t, live.call(t, "VEER.ZSCORE", "demo-sbp", 40, 130, "tower")) {
		t.Errorf("over wss the cell shows %s", r)
	}
	if ws := inPage[string](t, ctx, time.Second, `veer.client.socket.url`); !strings.HasPrefix(ws, "wss://localhost:"+port+"/") {
		t.Errorf("the websocket is %s; want wss", ws)
	}
	noViolations(t, ctx)
}

// processCPU returns the CPU time this process has used.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

func addinAnys(xs []float64) []any {
	out := make([]any, len(xs))
	for i, x := range xs {
		out[i] = x
	}
	return out
}
