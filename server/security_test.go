package server

import (
	"encoding/json"
	"fmt"
	"net"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/gorilla/websocket"

	"veer/server/servertest"
)

// TestHostHeaderDNSRebinding: a Host header naming anything but this
// computer's loopback interface and port is refused, over HTTP and for the
// websocket upgrade.
func TestHostHeaderDNSRebinding(t *testing.T) {
	h := startServer(t, "", func(c *Config) { c.AllowedHosts = []string{"veer.internal"} })
	_, port, _ := net.SplitHostPort(h.Addr)
	tests := []struct {
		host string
		ok   bool
	}{
		{"127.0.0.1:" + port, true},
		{"localhost:" + port, true},
		{"LOCALHOST:" + port, true},
		{"[::1]:" + port, true},
		{"127.0.0.2:" + port, true},
		{"veer.internal:" + port, true},
		{"evil.example:" + port, false},
		{"evil.example", false},
		{"127.0.0.1.evil.example:" + port, false},
		{"localhost.evil.example:" + port, false},
		{"192.168.1.20:" + port, false},
		{"0.0.0.0:" + port, false},
		{"127.0.0.1:1", false},
		{"localhost", false}, // port 80 is not served
	}
	for _, tt := range tests {
		st, b := h.Do("GET", "/v1/functions", "", "Host: "+tt.host)
		if (st == 200) != tt.ok {
			t.Errorf("GET with Host %q: %d %.100s; want ok=%v", tt.host, st, b, tt.ok)
		}
		if !tt.ok {
			if st != 403 || !strings.Contains(string(b), "Host") {
				t.Errorf("Host %q: status %d body %s; want 403 naming the Host header", tt.host, st, b)
			}
			st, _ = h.Do("POST", "/v1/call", `{"fn":"VEER.T.ADD","args":[1]}`, "Host: "+tt.host)
			if st != 403 {
				t.Errorf("POST with Host %q: %d; want 403", tt.host, st)
			}
			// The websocket upgrade, with the Host header forged on the wire.
			conn, err := net.Dial("tcp", h.Addr)
			if err != nil {
				t.Fatal(err)
			}
			fmt.Fprintf(conn, "GET /v1/ws HTTP/1.1\r\nHost: %s\r\nUpgrade: websocket\r\nConnection: Upgrade\r\nSec-WebSocket-Key: dGhlIHNhbXBsZSBub25jZQ==\r\nSec-WebSocket-Version: 13\r\n\r\n", tt.host)
			conn.SetReadDeadline(time.Now().Add(5 * time.Second))
			buf := make([]byte, 64)
			n, _ := conn.Read(buf)
			conn.Close()
			if !strings.HasPrefix(string(buf[:n]), "HTTP/1.1 403") {
				t.Errorf("websocket upgrade with Host %q answered %q; want 403", tt.host, buf[:n])
			}
		}
	}
}

// TestOriginCheck: browsers' cross-site requests (other origins, "null")
// are refused over HTTP and for the websocket upgrade (cross-site websocket
// hijacking); the server's own origin, configured add-in origins and
// requests without Origin (non-browser clients) are allowed.
func TestOriginCheck(t *testing.T) {
	h := startServer(t, "", func(c *Config) { c.AllowedOrigins = []string{"https://addin.example.org/"} })
	_, port, _ := net.SplitHostPort(h.Addr)
	tests := []struct {
		origin string
		ok     bool
	}{
		{"", true},
		{"http://127.0.0.1:" + port, true},
		{"http://localhost:" + port, true},
		{"http://[::1]:" + port, true},
		{"https://addin.example.org", true},
		{"HTTPS://ADDIN.EXAMPLE.ORG", true},
		{"https://evil.example", false},
		{"http://evil.example:" + port, false},
		{"https://addin.example.org.evil.example", false},
		{"http://addin.example.org", false}, // wrong scheme
		{"null", false},
		{"http://127.0.0.1:1", false},                 // another local web server
		{"https://127.0.0.1:" + port, false},          // wrong scheme for this server
		{"http://127.0.0.1:" + port + "/path", false}, // not an origin
		{"file://", false},
	}
	for _, tt := range tests {
		var hdr []string
		if tt.origin != "" {
			hdr = append(hdr, "Origin: "+tt.origin)
		}
		st, b := h.Do("POST", "/v1/call", `{"fn":"VEER.T.ADD","args":[1,2]}`, hdr...)
		if (st == 200) != tt.ok {
			t.Errorf("POST with Origin %q: %d %s; want ok=%v", tt.origin, st, b, tt.ok)
		}
		if !tt.ok && (st != 403 || strings.Contains(string(b), `"value"`)) {
			t.Errorf("Origin %q: refused request leaked a value or wrong status %d: %s", tt.origin, st, b)
		}
		if tt.ok && tt.origin != "" {
			// CORS lets the allowed page read the answer.
			st, _ := h.Do("OPTIONS", "/v1/call", "", "Origin: "+tt.origin, "Access-Control-Request-Method: POST", "Access-Control-Request-Headers: x-veer-token")
			if st != 204 {
				t.Errorf("preflight from %q: %d", tt.origin, st)
			}
		}
		if st, _ := h.Do("GET", "/v1/models", "", hdr...); (st == 200) != tt.ok {
			t.Errorf("GET /v1/models with Origin %q: %d", tt.origin, st)
		}
		c, resp, err := h.DialRaw(hdr...)
		if tt.ok {
			if err != nil {
				t.Errorf("websocket with Origin %q refused: %v", tt.origin, err)
				continue
			}
			c.Close()
		} else {
			if err == nil {
				c.Close()
				t.Errorf("websocket with Origin %q accepted (cross-site websocket hijacking)", tt.origin)
			} else if resp == nil || resp.StatusCode != 403 {
				t.Errorf("websocket with Origin %q: %v; want 403", tt.origin, err)
			}
		}
	}
	// The CORS headers name the allowed origin only.
	req := fmt.Sprintf("Origin: https://addin.example.org")
	_, _ = h.Do("POST", "/v1/call", `{"fn":"VEER.T.ADD","args":[1]}`, req)
	st, _ := h.Do("OPTIONS", "/v1/call", "", "Origin: https://evil.example")
	if st != 403 {
		t.Errorf("preflight from evil origin: %d; want 403", st)
	}
}

// TestWritesNeedToken: functions that write models, PUT and DELETE need the
// install token; a wrong token is refused; reads do not need it.
func TestWritesNeedToken(t *testing.T) {
	h := startServer(t, "")
	fit := `{"fn":"VEER.T.FIT","args":["m",[1,2,3]]}`
	tests := []struct {
		name    string
		headers []string
		body    string
		ok      bool
		part    string
	}{
		{"no token", nil, fit, false, "needs the install token"},
		{"wrong token", []string{TokenHeader + ": " + strings.Repeat("0", 64)}, fit, false, "the token sent is wrong"},
		{"wrong token in body", nil, `{"fn":"VEER.T.FIT","args":["m",[1,2,3]],"token":"nope"}`, false, "token sent is wrong"},
		{"right token in header", []string{h.tokenHeader()}, fit, true, ""},
		{"right token in body", nil, `{"fn":"VEER.T.FIT","args":["m",[1,2,4]],"token":"` + h.s.Token() + `"}`, true, ""},
	}
	for _, tt := range tests {
		st, b := h.Do("POST", "/v1/call", tt.body, tt.headers...)
		var a servertest.Answer
		json.Unmarshal(b, &a)
		if tt.ok != (a.Error == nil) || (!tt.ok && !strings.Contains(a.Error.Message, tt.part)) || st != 200 {
			t.Errorf("%s: %d %s", tt.name, st, b)
		}
	}
	// Reads need no token.
	if st, b := h.Do("POST", "/v1/call", `{"fn":"VEER.T.READ","args":["m",0]}`); st != 200 || strings.Contains(string(b), "error") {
		t.Errorf("read without token: %d %s", st, b)
	}
	// PUT and DELETE of models.
	if st, _ := h.Do("PUT", "/v1/models/up", `{"a":1}`); st != 401 {
		t.Errorf("PUT without token: %d", st)
	}
	if st, b := h.Do("PUT", "/v1/models/up", `{"a":1}`, h.tokenHeader()); st != 201 || !strings.Contains(string(b), `"up@v1"`) {
		t.Errorf("PUT with token: %d %s", st, b)
	}
	if st, b := h.Do("PUT", "/v1/models/up", `{"a":1}`, h.tokenHeader()); st != 200 || !strings.Contains(string(b), `"created":false`) {
		t.Errorf("PUT of identical content: %d %s", st, b)
	}
	if st, _ := h.Do("DELETE", "/v1/models/up", "", TokenHeader+": x"); st != 401 {
		t.Errorf("DELETE with wrong token: %d", st)
	}
	if st, _ := h.Do("DELETE", "/v1/models/up", "", h.tokenHeader()); st != 200 {
		t.Errorf("DELETE with token: %d", st)
	}
	if st, _ := h.Do("GET", "/v1/models/up", ""); st != 404 {
		t.Errorf("GET deleted model: %d", st)
	}
	// Websocket: refused without the token, accepted with it in the message.
	ws := h.Dial()
	if a := ws.Call(1, "VEER.T.FIT", "w", []float64{1, 2}); a.Code() != "#VALUE!" || !strings.Contains(a.Error.Message, "veer token") {
		t.Errorf("ws fit without token: %+v", a)
	}
	ws.Send(map[string]any{"id": 2, "fn": "VEER.T.FIT", "args": []any{"w", []float64{1, 2}}, "token": h.s.Token()})
	if a := ws.Next(5 * time.Second); string(a.Value) != `"w@v1"` {
		t.Errorf("ws fit with token: %+v", a)
	}
	ws2 := h.Dial()
	ws2.Send(map[string]any{"id": 1, "token": "wrong"})
	if a := ws2.Next(5 * time.Second); a.Code() != "#VALUE!" {
		t.Errorf("ws wrong token message: %+v", a)
	}
}

// TestTokenFile: the token is created once with owner-only permissions,
// is stable, and a loosened file is tightened.
func TestTokenFile(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "data")
	tok, err := ReadOrCreateToken(dir)
	if err != nil || len(tok) != 64 {
		t.Fatalf("token %q, %v", tok, err)
	}
	again, _ := ReadOrCreateToken(dir)
	if again != tok {
		t.Error("token changed on second read")
	}
	if runtime.GOOS != "windows" {
		st, _ := os.Stat(filepath.Join(dir, TokenFile))
		if st.Mode().Perm() != 0o600 {
			t.Errorf("token file mode %v; want 0600", st.Mode().Perm())
		}
		dst, _ := os.Stat(dir)
		if dst.Mode().Perm() != 0o700 {
			t.Errorf("data dir mode %v; want 0700", dst.Mode().Perm())
		}
		os.Chmod(filepath.Join(dir, TokenFile), 0o644)
		if again, _ := ReadOrCreateToken(dir); again != tok {
			t.Error("token changed after chmod")
		}
		st, _ = os.Stat(filepath.Join(dir, TokenFile))
		if st.Mode().Perm() != 0o600 {
			t.Errorf("loosened token file left at %v", st.Mode().Perm())
		}
	}
	os.WriteFile(filepath.Join(dir, TokenFile), []byte("short"), 0o600)
	if _, err := ReadOrCreateToken(dir); err == nil {
		t.Error("damaged token accepted")
	}
	other, _ := ReadOrCreateToken(t.TempDir())
	if other == tok {
		t.Error("two installs got the same token")
	}
}

// TestLimits: each limit answers a clear error and the server keeps serving.
func TestLimits(t *testing.T) {
	h := startServer(t, "", func(c *Config) {
		c.Limits = Limits{
			MaxRequestBytes: 4096, MaxRows: 50, MaxCells: 120, MaxBatch: 5,
			MaxConcurrent: 1, MaxConcurrentSlow: 1, QuickCells: 10, CallTimeout: 300 * time.Millisecond, SlowCallTimeout: time.Second,
		}
	})
	big := `{"fn":"VEER.T.ECHO","args":["` + strings.Repeat("x", 5000) + `"]}`
	st, b := h.Do("POST", "/v1/call", big)
	if st != 413 || !strings.Contains(string(b), "larger than the limit of 4 KiB") {
		t.Errorf("oversized body: %d %s", st, b)
	}
	ws := h.Dial()
	ws.SendRaw([]byte(big))
	ws.SetReadDeadline(time.Now().Add(5 * time.Second))
	_, _, err := ws.ReadMessage()
	var ce *websocket.CloseError
	if !errorsAs(err, &ce) || ce.Code != websocket.CloseMessageTooBig || !strings.Contains(ce.Text, "limit") {
		t.Errorf("oversized frame: %v; want close 1009 with a reason", err)
	}
	if a := h.Dial().Call(1, "VEER.T.ADD", 1, 1); string(a.Value) != "2" {
		t.Errorf("new connection after an oversized frame: %+v", a)
	}

	rows := make([]float64, 51)
	a := h.Call("VEER.T.MEAN", rows)
	if a.Code() != "#VALUE!" || !strings.Contains(a.Error.Message, "VEER.T.MEAN: argument 'values' has 51 rows; the limit is 50") {
		t.Errorf("rows limit: %+v", a)
	}
	a = h.Call("VEER.T.CUSUM", make([]float64, 45), make([]float64, 45), make([]float64, 45))
	if a.Code() != "#VALUE!" || !strings.Contains(a.Error.Message, "more than 120 cells") {
		t.Errorf("cells limit: %+v", a)
	}
	st, b = h.Do("POST", "/v1/call", `[{"fn":"VEER.T.ADD","args":[1]},{"fn":"VEER.T.ADD","args":[1]},{"fn":"VEER.T.ADD","args":[1]},{"fn":"VEER.T.ADD","args":[1]},{"fn":"VEER.T.ADD","args":[1]},{"fn":"VEER.T.ADD","args":[1]}]`)
	if st != 400 || !strings.Contains(string(b), "more than 5 calls") {
		t.Errorf("batch limit: %d %s", st, b)
	}

	// Time per call.
	if a := h.Call("VEER.T.SLOW", 5); a.Code() != "#BUSY!" || !strings.Contains(a.Error.Message, "time limit of 1s") {
		t.Errorf("slow call over its time limit: %+v", a)
	}
	// Concurrency: one slot per lane. The slow lane's slot is held by a
	// slow call; a quick call is answered at once in its own lane, while a
	// call with more than QuickCells cells waits in the slow lane for its
	// whole time limit and gets #BUSY!.
	done := make(chan servertest.Answer)
	go func() { done <- h.Call("VEER.T.SLOW", 0.6, "hold") }()
	servertest.Eventually(t, 5*time.Second, "the slot to be taken", func() bool { return h.st.slowStarts.Load() == 2 })
	start := time.Now()
	if a := h.Call("VEER.T.ADD", 40, 2); string(a.Value) != "42" {
		t.Errorf("a quick call while the slow lane is full: %+v", a)
	}
	if el := time.Since(start); el > 250*time.Millisecond {
		t.Errorf("a quick call waited %v behind a slow one", el)
	}
	if a := h.Call("VEER.T.MEAN", []float64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11}); a.Code() != "#BUSY!" || !strings.Contains(a.Error.Message, "computation slots for slow calls stayed busy") {
		t.Errorf("a large call while the slow lane is full: %+v", a)
	}
	if a := <-done; string(a.Value) != "0.6" {
		t.Errorf("slot holder: %+v", a)
	}
	// #BUSY! is not cached: the same call succeeds now.
	if a := h.Call("VEER.T.MEAN", []float64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11}); string(a.Value) != "6" {
		t.Errorf("after the slot is free: %+v", a)
	}
}

// TestQuickCellsLane: a call of a function not marked Slow with more than
// QuickCells cells waits in the slow lane, so it cannot hold up lookups.
func TestQuickCellsLane(t *testing.T) {
	h := startServer(t, "", func(c *Config) {
		c.Limits = Limits{MaxConcurrent: 1, MaxConcurrentSlow: 1, QuickCells: 10, CallTimeout: 300 * time.Millisecond, SlowCallTimeout: 3 * time.Second}
	})
	done := make(chan servertest.Answer)
	go func() { done <- h.Call("VEER.T.SLOW", 1, "hold") }()
	servertest.Eventually(t, 5*time.Second, "the slot to be taken", func() bool { return h.st.slowStarts.Load() == 1 })
	if a := h.Call("VEER.T.MEAN", make([]float64, 11)); a.Code() != "#BUSY!" || !strings.Contains(a.Error.Message, "slow calls") {
		t.Errorf("a large call of a quick function while the slow lane is full: %+v", a)
	}
	if a := h.Call("VEER.T.MEAN", make([]float64, 10)); string(a.Value) != "0" {
		t.Errorf("a small call: %+v", a)
	}
	<-done
}

func errorsAs(err error, target **websocket.CloseError) bool {
	ce, ok := err.(*websocket.CloseError)
	if ok {
		*target = ce
	}
	return ok
}

// TestLogsCarryNoValues: logs name functions and sizes but never cell
// values, ids or model names.
func TestLogsCarryNoValues(t *testing.T) {
	h := startServer(t, "")
	secretID, secretVal, secretModel := "WORKER-7731-SECRET", 987.654321, "site-secret-model"
	h.Call("VEER.T.CUSUM", []string{secretID, secretID}, []float64{30, 31}, []float64{secretVal, 1})
	h.Call("VEER.T.FIT", secretModel, []float64{secretVal, 1})
	h.Call("VEER.T.READ", secretModel, secretVal)
	h.Call("VEER.T.FAIL", "#N/A", "message with "+secretID)
	h.Call("VEER.T.PANIC")
	ws := h.Dial()
	ws.Send(map[string]any{"id": secretID, "fn": "VEER.T.ADD", "args": []any{secretVal}})
	ws.Next(5 * time.Second)
	h.Close()
	logs := h.logs.String()
	for _, s := range []string{secretID, "987.65", secretModel, "message with"} {
		if strings.Contains(logs, s) {
			t.Errorf("logs contain %q:\n%s", s, logs)
		}
	}
	for _, s := range []string{`"fn":"VEER.T.CUSUM"`, `"fn":"VEER.T.PANIC"`, `"ms":`, `"bytes_in":`} {
		if !strings.Contains(logs, s) {
			t.Errorf("logs lack %s:\n%s", s, logs)
		}
	}
}
