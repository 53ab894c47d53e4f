package server

import (
	"encoding/json"
	"net/http"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/gorilla/websocket"

	"veer/server/servertest"
)

// TestStreamingUpdateAfterRefit: a subscribed call naming a model by bare
// name is answered again (same id, "update": true) when the model is refit;
// a call pinned to a handle, or not subscribed, is not.
func TestStreamingUpdateAfterRefit(t *testing.T) {
	h := startServer(t, "")
	if a := h.Call("VEER.T.FIT", "bp", []float64{1, 2, 3}); string(a.Value) != `"bp@v1"` {
		t.Fatalf("fit: %+v", a)
	}
	ws := h.Dial()
	ws.Send(map[string]any{"id": 1, "fn": "VEER.T.READ", "args": []any{"bp", 10}, "subscribe": true})
	ws.Send(map[string]any{"id": 2, "fn": "VEER.T.READ", "args": []any{"bp@v1", 10}, "subscribe": true})
	ws.Send(map[string]any{"id": 3, "fn": "VEER.T.READ", "args": []any{"bp", 20}})
	ws.Send(map[string]any{"id": 4, "fn": "VEER.T.READ", "args": []any{"later", 1}, "subscribe": true})
	got := map[string]servertest.Answer{}
	for len(got) < 4 {
		a := ws.Next(5 * time.Second)
		got[string(a.ID)] = a
	}
	if string(got["1"].Value) != "8" || string(got["2"].Value) != "8" || string(got["3"].Value) != "18" || got["4"].Code() != "#REF!" {
		t.Fatalf("first answers: %+v", got)
	}

	// Refit over HTTP: only id 1 is answered again, with the new mean 20.
	if a := h.Call("VEER.T.FIT", "bp", []float64{10, 20, 30}); string(a.Value) != `"bp@v2"` {
		t.Fatalf("refit: %+v", a)
	}
	a := ws.Next(5 * time.Second)
	if string(a.ID) != "1" || !a.Update || string(a.Value) != "-10" {
		t.Fatalf("update after refit = %+v; want id 1, update, -10", a)
	}
	// A model that did not exist yet: the subscribed call is answered when
	// it is fitted.
	h.Call("VEER.T.FIT", "later", []float64{0, 2})
	a = ws.Next(5 * time.Second)
	if string(a.ID) != "4" || !a.Update || string(a.Value) != "0" {
		t.Fatalf("update after first fit = %+v; want id 4, update, 0", a)
	}
	// Saving identical content adds no version and sends no update; the
	// next frame is the answer to a fresh call.
	h.Call("VEER.T.FIT", "bp", []float64{10, 20, 30})
	if a := ws.Call(5, "VEER.T.ADD", 1, 1); string(a.Value) != "2" {
		t.Fatalf("after identical refit, next frame = %+v", a)
	}
	// Cancelling a subscription acknowledges and stops its updates.
	ws.Send(map[string]any{"cancel": 1})
	if a := ws.Next(5 * time.Second); string(a.ID) != "1" || a.Cancelled == nil || !*a.Cancelled {
		t.Fatalf("cancel ack = %+v", a)
	}
	h.Call("VEER.T.FIT", "bp", []float64{100, 200})
	if a := ws.Call(6, "VEER.T.ADD", 2, 2); string(a.Value) != "4" {
		t.Fatalf("after cancelled subscription, next frame = %+v", a)
	}
	// Deleting a model answers its subscribers with #REF!.
	if st, b := h.Do("DELETE", "/v1/models/later", "", h.tokenHeader()); st != 200 {
		t.Fatalf("delete: %d %s", st, b)
	}
	a = ws.Next(5 * time.Second)
	if string(a.ID) != "4" || !a.Update || a.Code() != "#REF!" {
		t.Fatalf("update after delete = %+v", a)
	}
}

// TestCancellation: a slow call reports progress, a cancel stops the
// computation (its context is done), is acknowledged, and the call gets no
// answer; the connection keeps working.
func TestCancellation(t *testing.T) {
	h := startServer(t, "")
	ws := h.Dial()
	ws.Send(map[string]any{"id": "slow-1", "fn": "VEER.T.SLOW", "args": []any{30}})
	var progress []float64
	for len(progress) < 2 {
		b := ws.Read(5 * time.Second)
		var a servertest.Answer
		json.Unmarshal(b, &a)
		if a.Progress == nil || string(a.ID) != `"slow-1"` {
			t.Fatalf("expected progress for slow-1, got %s", b)
		}
		progress = append(progress, *a.Progress)
	}
	if !(progress[1] > progress[0]) {
		t.Errorf("progress does not increase: %v", progress)
	}
	ws.Send(map[string]any{"cancel": "slow-1"})
	for {
		a := ws.Next(5 * time.Second)
		if a.Cancelled != nil {
			if string(a.ID) != `"slow-1"` || !*a.Cancelled {
				t.Fatalf("cancel ack = %+v", a)
			}
			break
		}
		t.Fatalf("unexpected answer before the cancel ack: %+v", a)
	}
	servertest.Eventually(t, 5*time.Second, "the slow computation to stop", func() bool { return h.st.slowAborted.Load() == 1 })
	if a := ws.Call(2, "VEER.T.ADD", 1, 2); string(a.Value) != "3" {
		t.Fatalf("after cancel: %+v", a)
	}
	// Cancelling an unknown or finished call says so.
	ws.Send(map[string]any{"cancel": 2})
	if a := ws.Next(5 * time.Second); a.Cancelled == nil || *a.Cancelled {
		t.Fatalf("cancel of a finished call = %+v", a)
	}
	// Closing the connection cancels its calls too.
	ws.Send(map[string]any{"id": 3, "fn": "VEER.T.SLOW", "args": []any{31}})
	servertest.Eventually(t, 5*time.Second, "the second slow call to start", func() bool { return h.st.slowStarts.Load() == 2 })
	ws.Close()
	servertest.Eventually(t, 5*time.Second, "the computation of a closed connection to stop", func() bool { return h.st.slowAborted.Load() == 2 })
}

// TestCancelledNeverCached: a call cancelled by its client (a websocket
// cancel, an HTTP client that gives up) is never kept as an answer, even
// when the cell function words the stop as an error of its own: an
// identical call afterwards computes afresh. A call waiting in Env.Once
// for a computation whose caller went away computes itself.
func TestCancelledNeverCached(t *testing.T) {
	h := startServer(t, "")
	ws := h.Dial()
	waitProgress := func(id string) {
		t.Helper()
		for {
			b := ws.Read(10 * time.Second)
			var a servertest.Answer
			json.Unmarshal(b, &a)
			if a.Progress != nil && string(a.ID) == `"`+id+`"` {
				return
			}
		}
	}
	// 1. A websocket cancel.
	ws.Send(map[string]any{"id": "a", "fn": "VEER.T.SLOWNUM", "args": []any{1.5, "ws"}})
	waitProgress("a")
	ws.Send(map[string]any{"cancel": "a"})
	servertest.Eventually(t, 10*time.Second, "the cancelled computation to stop", func() bool { return h.st.slowAborted.Load() == 1 })
	if a := h.Call("VEER.T.SLOWNUM", 1.5, "ws"); string(a.Value) != "1.5" {
		t.Errorf("the identical call after a cancel: %+v; want it computed afresh", a)
	}
	if n := h.st.slowStarts.Load(); n != 2 {
		t.Errorf("%d computations; want 2 (the cancelled one and a fresh one)", n)
	}
	// 2. An HTTP client that stops waiting.
	impatient := &http.Client{Timeout: 200 * time.Millisecond}
	if resp, err := impatient.Post(h.URL+"/v1/call", "application/json", strings.NewReader(`{"fn":"VEER.T.SLOWNUM","args":[1.5,"http"]}`)); err == nil {
		resp.Body.Close()
		t.Fatal("the impatient client got an answer")
	}
	servertest.Eventually(t, 10*time.Second, "the abandoned computation to stop", func() bool { return h.st.slowAborted.Load() == 2 })
	if a := h.Call("VEER.T.SLOWNUM", 1.5, "http"); string(a.Value) != "1.5" {
		t.Errorf("the identical call after a client timeout: %+v; want it computed afresh", a)
	}
	// 3. Env.Once: B waits for A's computation; A is cancelled; B computes.
	ws.Send(map[string]any{"id": "A", "fn": "VEER.T.SLOWONCE", "args": []any{1.5, "once", 1}})
	waitProgress("A")
	ws.Send(map[string]any{"id": "B", "fn": "VEER.T.SLOWONCE", "args": []any{1.5, "once", 2}})
	time.Sleep(50 * time.Millisecond)
	ws.Send(map[string]any{"cancel": "A"})
	for {
		a := ws.Next(20 * time.Second)
		if string(a.ID) != `"B"` || a.Progress != nil || a.Cancelled != nil {
			continue
		}
		if string(a.Value) != "1.5" {
			t.Errorf("the call that waited for a cancelled computation: %+v; want it computed afresh", a)
		}
		break
	}
	if a := h.Call("VEER.T.SLOWONCE", 1.5, "once", 2); string(a.Value) != "1.5" {
		t.Errorf("the same call again: %+v", a)
	}
}

// TestSharedComputationAndCache: identical concurrent calls share one
// computation; later identical calls are answered from the cache; a waiter
// that leaves does not cancel the computation others wait for.
func TestSharedComputationAndCache(t *testing.T) {
	h := startServer(t, "")
	const n = 8
	var wg sync.WaitGroup
	answers := make([]servertest.Answer, n)
	for i := range n {
		wg.Add(1)
		go func() {
			defer wg.Done()
			answers[i] = h.Call("VEER.T.SLOW", 0.3, "same")
		}()
	}
	// One more caller over the websocket joins and leaves early.
	ws := h.Dial()
	ws.Send(map[string]any{"id": 1, "fn": "VEER.T.SLOW", "args": []any{0.3, "same"}})
	time.Sleep(50 * time.Millisecond)
	ws.Send(map[string]any{"cancel": 1})
	wg.Wait()
	for i, a := range answers {
		if string(a.Value) != "0.3" {
			t.Errorf("caller %d: %+v", i, a)
		}
	}
	if s := h.st.slowStarts.Load(); s != 1 {
		t.Errorf("%d computations for %d identical concurrent calls; want 1", s, n+1)
	}
	if a := h.Call("VEER.T.SLOW", 0.3, "same"); string(a.Value) != "0.3" || h.st.slowStarts.Load() != 1 {
		t.Errorf("repeat call recomputed (starts %d): %+v", h.st.slowStarts.Load(), a)
	}
	// A model is parsed once per version across calls (Env.Once).
	h.Call("VEER.T.FIT", "m", []float64{1, 3})
	for i := range 5 {
		if a := h.Call("VEER.T.READ", "m", i); string(a.Value) != strconv.Itoa(i-2) {
			t.Errorf("read %d = %+v", i, a)
		}
	}
	if p := h.st.modelParses.Load(); p != 1 {
		t.Errorf("model parsed %d times; want 1", p)
	}
	// Fitting the same data again is answered from the cache while the
	// version is the latest; after another fit it runs again and restores
	// the data as the latest version.
	fits := h.st.fits.Load()
	h.Call("VEER.T.FIT", "m", []float64{1, 3})
	if h.st.fits.Load() != fits {
		t.Error("identical fit recomputed")
	}
	h.Call("VEER.T.FIT", "m", []float64{5, 7})
	if a := h.Call("VEER.T.FIT", "m", []float64{1, 3}); string(a.Value) != `"m@v3"` {
		t.Errorf("fit of earlier data after a change = %s; want m@v3", a.Value)
	}
}

// TestRestartKeepsModels: models and handles survive a restart of the server.
func TestRestartKeepsModels(t *testing.T) {
	dir := t.TempDir()
	h := startServer(t, dir)
	h.Call("VEER.T.FIT", "fev", []float64{1, 2, 3})
	h.Call("VEER.T.FIT", "fev", []float64{4, 5, 6})
	tok := h.s.Token()
	h.Close()

	h2 := startServer(t, dir)
	if h2.s.Token() != tok {
		t.Error("token changed across restart")
	}
	if a := h2.Call("VEER.T.READ", "fev", 5); string(a.Value) != "0" {
		t.Errorf("latest after restart: %+v", a)
	}
	if a := h2.Call("VEER.T.READ", "fev@v1", 5); string(a.Value) != "3" {
		t.Errorf("v1 after restart: %+v", a)
	}
	if a := h2.Call("VEER.T.FIT", "fev", []float64{4, 5, 6}); string(a.Value) != `"fev@v2"` {
		t.Errorf("refit of the same data after restart: %+v; want the same handle", a)
	}
	st, b := h2.Do("GET", "/v1/models/fev@v1", "")
	if st != 200 || !strings.Contains(string(b), `"mean":2`) {
		t.Errorf("GET model v1: %d %s", st, b)
	}
}

// TestGracefulShutdown: cancelling Serve's context lets in-flight HTTP and
// websocket calls finish and be answered, then closes websockets with
// "going away" and returns.
func TestGracefulShutdown(t *testing.T) {
	h := startServer(t, "")
	ws := h.Dial()
	ws.Send(map[string]any{"id": 1, "fn": "VEER.T.SLOW", "args": []any{0.4, "ws"}})
	httpDone := make(chan servertest.Answer, 1)
	go func() { httpDone <- h.Call("VEER.T.SLOW", 0.4, "http") }()
	servertest.Eventually(t, 5*time.Second, "both calls to start", func() bool { return h.st.slowStarts.Load() == 2 })
	h.Shutdown()
	select {
	case a := <-httpDone:
		if string(a.Value) != "0.4" {
			t.Errorf("HTTP call during shutdown: %+v", a)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("HTTP call not answered during shutdown")
	}
	if a := ws.Next(10 * time.Second); string(a.Value) != "0.4" {
		t.Errorf("websocket call during shutdown: %+v", a)
	}
	ws.SetReadDeadline(time.Now().Add(10 * time.Second))
	_, _, err := ws.ReadMessage()
	if !websocket.IsCloseError(err, websocket.CloseGoingAway) {
		t.Errorf("after shutdown the websocket read %v; want close 1001 (going away)", err)
	}
	if err := h.Close(); err != nil { // Serve returns, with no error
		t.Error(err)
	}
	if h.st.slowAborted.Load() != 0 {
		t.Error("a call was aborted by a graceful shutdown")
	}
	if _, err := http.Get(h.URL + "/v1/health"); err == nil {
		t.Error("server still accepts connections after shutdown")
	}
}
