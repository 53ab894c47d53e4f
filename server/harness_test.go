package server

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"net"
	"net/http"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/gorilla/websocket"
)

// syncBuffer collects log output from many goroutines.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// harness is a real server on a loopback port.
type harness struct {
	t      testing.TB
	s      *Server
	st     *toyState
	dir    string
	base   string // http://127.0.0.1:port
	host   string // 127.0.0.1:port
	logs   *syncBuffer
	cancel context.CancelFunc
	done   chan error
	client *http.Client
}

func startServer(t testing.TB, dir string, configure ...func(*Config)) *harness {
	t.Helper()
	if dir == "" {
		dir = t.TempDir()
	}
	h := &harness{t: t, st: &toyState{}, dir: dir, logs: &syncBuffer{}}
	cfg := Config{
		DataDir:   dir,
		Catalogue: toyCatalogue(h.st),
		Logger:    slog.New(slog.NewJSONHandler(h.logs, &slog.HandlerOptions{Level: slog.LevelDebug})),
	}
	for _, c := range configure {
		c(&cfg)
	}
	s, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	h.s, h.cancel, h.done = s, cancel, make(chan error, 1)
	h.host = ln.Addr().String()
	h.base = "http://" + h.host
	go func() { h.done <- s.Serve(ctx, ln) }()
	h.client = &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: 64}, Timeout: 30 * time.Second}
	t.Cleanup(h.stop)
	return h
}

// stop shuts the server down and waits for Serve to return.
func (h *harness) stop() {
	if h.cancel == nil {
		return
	}
	h.cancel()
	select {
	case err := <-h.done:
		if err != nil {
			h.t.Errorf("Serve returned %v", err)
		}
	case <-time.After(20 * time.Second):
		h.t.Errorf("Serve did not return after shutdown")
	}
	h.s.Close()
	h.cancel = nil
}

// do sends an HTTP request with optional headers ("Name: value").
func (h *harness) do(method, path, body string, headers ...string) (int, []byte) {
	h.t.Helper()
	req, err := http.NewRequest(method, h.base+path, strings.NewReader(body))
	if err != nil {
		h.t.Fatal(err)
	}
	for _, hv := range headers {
		k, v, _ := strings.Cut(hv, ":")
		if strings.EqualFold(k, "Host") {
			req.Host = strings.TrimSpace(v)
			continue
		}
		req.Header.Set(k, strings.TrimSpace(v))
	}
	resp, err := h.client.Do(req)
	if err != nil {
		h.t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, b
}

func (h *harness) post(body string, headers ...string) (int, []byte) {
	h.t.Helper()
	return h.do("POST", "/v1/call", body, headers...)
}

func (h *harness) tokenHeader() string { return TokenHeader + ": " + h.s.Token() }

// answer is a decoded answer message.
type answer struct {
	ID        json.RawMessage `json:"id,omitempty"`
	Value     json.RawMessage `json:"value,omitempty"`
	Error     *struct{ Code, Message string }
	Update    bool     `json:"update,omitempty"`
	Progress  *float64 `json:"progress,omitempty"`
	Cancelled *bool    `json:"cancelled,omitempty"`
}

func (a answer) code() string {
	if a.Error == nil {
		return ""
	}
	return a.Error.Code
}

// callHTTP posts one call and decodes the answer.
func (h *harness) callHTTP(fn string, args ...any) answer {
	h.t.Helper()
	body, _ := json.Marshal(map[string]any{"fn": fn, "args": args})
	status, b := h.post(string(body), h.tokenHeader())
	if status != 200 {
		h.t.Fatalf("POST %s: status %d: %s", body, status, b)
	}
	var a answer
	if err := json.Unmarshal(b, &a); err != nil {
		h.t.Fatalf("answer %s: %v", b, err)
	}
	return a
}

// wsClient is a test websocket client.
type wsClient struct {
	t testing.TB
	c *websocket.Conn
}

func (h *harness) dial(headers ...string) *wsClient {
	h.t.Helper()
	c, resp, err := h.dialRaw(headers...)
	if err != nil {
		status := 0
		if resp != nil {
			status = resp.StatusCode
		}
		h.t.Fatalf("dial: %v (status %d)", err, status)
	}
	w := &wsClient{t: h.t, c: c}
	h.t.Cleanup(func() { c.Close() })
	return w
}

func (h *harness) dialRaw(headers ...string) (*websocket.Conn, *http.Response, error) {
	hdr := http.Header{}
	for _, hv := range headers {
		k, v, _ := strings.Cut(hv, ":")
		hdr.Set(k, strings.TrimSpace(v))
	}
	d := websocket.Dialer{HandshakeTimeout: 5 * time.Second}
	return d.Dial("ws://"+h.host+"/v1/ws", hdr)
}

func (w *wsClient) sendJSON(v any) {
	w.t.Helper()
	b, err := json.Marshal(v)
	if err != nil {
		w.t.Fatal(err)
	}
	w.sendRaw(b)
}

func (w *wsClient) sendRaw(b []byte) {
	w.t.Helper()
	if err := w.c.WriteMessage(websocket.TextMessage, b); err != nil {
		w.t.Fatal(err)
	}
}

// read returns the next frame (raw).
func (w *wsClient) read(timeout time.Duration) []byte {
	w.t.Helper()
	w.c.SetReadDeadline(time.Now().Add(timeout))
	_, b, err := w.c.ReadMessage()
	if err != nil {
		w.t.Fatalf("reading websocket: %v", err)
	}
	return b
}

// next returns the next single answer, skipping progress messages.
func (w *wsClient) next(timeout time.Duration) answer {
	w.t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		b := w.read(time.Until(deadline))
		var a answer
		if err := json.Unmarshal(b, &a); err != nil {
			w.t.Fatalf("frame %s: %v", b, err)
		}
		if a.Progress != nil {
			continue
		}
		return a
	}
}

func (w *wsClient) call(id int, fn string, args ...any) answer {
	w.t.Helper()
	w.sendJSON(map[string]any{"id": id, "fn": fn, "args": args})
	a := w.next(10 * time.Second)
	if string(a.ID) != itoa(id) {
		w.t.Fatalf("answer id %s; want %d", a.ID, id)
	}
	return a
}

func itoa(i int) string {
	b, _ := json.Marshal(i)
	return string(b)
}

// eventually polls cond until it holds or the timeout passes.
func eventually(t testing.TB, timeout time.Duration, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(5 * time.Millisecond)
	}
}
