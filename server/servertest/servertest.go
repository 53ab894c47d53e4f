// Package servertest runs a veer server on a loopback port for tests and
// talks to it the way a client does, over HTTP and the websocket, much as
// net/http/httptest does for a plain handler:
//
//	s, _ := server.New(cfg)
//	ts := servertest.Start(t, s)           // stopped when the test ends
//	ts.Auth = server.TokenHeader + ": " + s.Token()
//	a := ts.Call("VEER.ZSCORE", "demo-sbp", 40, 150)
//	ws := ts.Dial()
//	a = ws.Call(1, "VEER.ZSCORE", "demo-sbp", 40, 150)
//
// It does not import package server, so that the server's own tests can use
// it; anything with the server's Serve and Close methods can be run.
package servertest

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"io"
	"net"
	"net/http"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/gorilla/websocket"

	"veer/functions/cell"
)

// Servable is a server servertest can run: *server.Server is one.
type Servable interface {
	// Serve serves on ln until ctx is cancelled, then shuts down
	// gracefully and returns.
	Serve(ctx context.Context, ln net.Listener) error
	// Close releases what the server holds after Serve has returned.
	Close() error
}

// StopTimeout bounds how long Close waits for a graceful shutdown.
const StopTimeout = 30 * time.Second

// Server is a Servable serving on a listener in this process.
type Server struct {
	// URL is the base address, "http://127.0.0.1:PORT" ("https://..." for
	// a server that speaks TLS, when started with ServeTLS).
	URL string
	// Addr is the listener's address, "127.0.0.1:PORT".
	Addr string
	// Client makes the requests of Do, Post, Call and Batch.
	Client *http.Client
	// Auth is a header ("Name: value") that Post, Call and Batch send,
	// such as the install token; Do sends only the headers it is given.
	Auth string

	t   testing.TB
	run *running
}

// running is the serving goroutine of a Server, shared by its For views.
type running struct {
	srv    Servable
	cancel context.CancelFunc
	done   chan error
	once   sync.Once
	err    error
}

// Start serves srv on a new loopback port and stops it when the test (and
// its subtests) end. Failures end the test.
func Start(t testing.TB, srv Servable) *Server {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	s := Serve(t, srv, ln)
	t.Cleanup(func() {
		if err := s.Close(); err != nil {
			t.Error(err)
		}
	})
	return s
}

// Serve serves srv on ln. Unlike Start it leaves stopping to the caller
// (Close), so a server can outlive one test (shared by a package's tests)
// or be stopped and started again on its port. t is the test its methods
// fail; For gives a view for another test.
func Serve(t testing.TB, srv Servable, ln net.Listener) *Server {
	ctx, cancel := context.WithCancel(context.Background())
	r := &running{srv: srv, cancel: cancel, done: make(chan error, 1)}
	go func() { r.done <- srv.Serve(ctx, ln) }()
	addr := ln.Addr().String()
	return &Server{
		URL:    "http://" + addr,
		Addr:   addr,
		Client: &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: 64}, Timeout: 2 * time.Minute},
		t:      t,
		run:    r,
	}
}

// ServeTLS is Serve for a server that speaks TLS on its listener: URL
// starts with https:// and client (which trusts the server's certificate)
// makes the requests.
func ServeTLS(t testing.TB, srv Servable, ln net.Listener, client *http.Client) *Server {
	s := Serve(t, srv, ln)
	s.URL = "https://" + s.Addr
	s.Client = client
	return s
}

// For returns a view of s whose methods fail t: for a server shared by
// several tests.
func (s *Server) For(t testing.TB) *Server {
	c := *s
	c.t = t
	return &c
}

// Shutdown starts a graceful shutdown (Serve's context is cancelled) and
// returns at once, so a test can watch in-flight calls finish; Close waits
// for it.
func (s *Server) Shutdown() { s.run.cancel() }

// Close shuts the server down gracefully, waits for Serve to return (at
// most StopTimeout) and closes it. It returns Serve's error, and does the
// work once however often it is called.
func (s *Server) Close() error {
	r := s.run
	r.once.Do(func() {
		r.cancel()
		select {
		case err := <-r.done:
			if err != nil {
				r.err = errors.New("servertest: Serve returned " + err.Error())
			}
		case <-time.After(StopTimeout):
			r.err = errors.New("servertest: Serve did not return within " + StopTimeout.String() + " of the shutdown")
		}
		r.srv.Close()
		s.Client.CloseIdleConnections()
	})
	return r.err
}

// setHeaders adds headers given as "Name: value"; a Host header sets the
// request's host.
func setHeaders(req *http.Request, headers []string) {
	for _, hv := range headers {
		if hv == "" {
			continue
		}
		k, v, _ := strings.Cut(hv, ":")
		if strings.EqualFold(k, "Host") {
			req.Host = strings.TrimSpace(v)
			continue
		}
		req.Header.Set(k, strings.TrimSpace(v))
	}
}

// Do sends a request with the given headers ("Name: value") and returns the
// status and body.
func (s *Server) Do(method, path, body string, headers ...string) (int, []byte) {
	s.t.Helper()
	req, err := http.NewRequest(method, s.URL+path, strings.NewReader(body))
	if err != nil {
		s.t.Fatal(err)
	}
	setHeaders(req, headers)
	resp, err := s.Client.Do(req)
	if err != nil {
		s.t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		s.t.Fatal(err)
	}
	return resp.StatusCode, b
}

// Post sends body to POST /v1/call with Auth and the given headers and
// returns the answer; a status other than 200 ends the test.
func (s *Server) Post(body []byte, headers ...string) []byte {
	s.t.Helper()
	status, b := s.Do("POST", "/v1/call", string(body), append([]string{"Content-Type: application/json", s.Auth}, headers...)...)
	if status != http.StatusOK {
		s.t.Fatalf("POST /v1/call %.200s: status %d: %.300s", body, status, b)
	}
	return b
}

// Call makes one call over HTTP and decodes its answer.
func (s *Server) Call(fn string, args ...any) Answer {
	s.t.Helper()
	var a Answer
	decode(s.t, s.Post(marshal(s.t, NewCall(fn, args...))), &a)
	return a
}

// Batch makes several calls in one request and decodes the answers, which
// must be as many as the calls.
func (s *Server) Batch(calls ...Call) []Answer {
	s.t.Helper()
	var out []Answer
	decode(s.t, s.Post(marshal(s.t, calls)), &out)
	if len(out) != len(calls) {
		s.t.Fatalf("%d answers for %d calls", len(out), len(calls))
	}
	return out
}

// Call is one call message.
type Call struct {
	ID        any    `json:"id,omitempty"`
	Fn        string `json:"fn"`
	Args      []any  `json:"args"`
	Subscribe bool   `json:"subscribe,omitempty"`
	Token     string `json:"token,omitempty"`
}

// NewCall returns the call of fn with args (never a null args list).
func NewCall(fn string, args ...any) Call {
	if args == nil {
		args = []any{}
	}
	return Call{Fn: fn, Args: args}
}

// Answer is one decoded answer message.
type Answer struct {
	ID        json.RawMessage `json:"id,omitempty"`
	Value     json.RawMessage `json:"value,omitempty"`
	Error     *cell.Error     `json:"error,omitempty"`
	Update    bool            `json:"update,omitempty"`
	Progress  *float64        `json:"progress,omitempty"`
	Cancelled *bool           `json:"cancelled,omitempty"`
}

// Code returns the error code of the answer, or "" for a value.
func (a Answer) Code() cell.Code {
	if a.Error == nil {
		return ""
	}
	return a.Error.Code
}

// Decode returns the answer's value decoded into Go values; an error
// answer ends the test.
func (a Answer) Decode(t testing.TB) any {
	t.Helper()
	if a.Error != nil {
		t.Fatalf("the answer is the error %v", a.Error)
	}
	var v any
	if err := json.Unmarshal(a.Value, &v); err != nil {
		t.Fatalf("value %.300s: %v", a.Value, err)
	}
	return v
}

// Conn is a websocket connection to the server.
type Conn struct {
	*websocket.Conn
	// Timeout bounds how long Call waits for its answer.
	Timeout time.Duration
	t       testing.TB
}

// Dial opens the websocket /v1/ws with the given headers ("Name: value");
// it is closed when the test ends.
func (s *Server) Dial(headers ...string) *Conn {
	s.t.Helper()
	c, resp, err := s.DialRaw(headers...)
	if err != nil {
		status := 0
		if resp != nil {
			status = resp.StatusCode
		}
		s.t.Fatalf("dial: %v (status %d)", err, status)
	}
	s.t.Cleanup(func() { c.Close() })
	return &Conn{Conn: c, Timeout: time.Minute, t: s.t}
}

// DialRaw opens the websocket and returns what the dialer returns, for
// tests of refused connections.
func (s *Server) DialRaw(headers ...string) (*websocket.Conn, *http.Response, error) {
	hdr := http.Header{}
	for _, hv := range headers {
		k, v, _ := strings.Cut(hv, ":")
		hdr.Set(k, strings.TrimSpace(v))
	}
	d := websocket.Dialer{HandshakeTimeout: 5 * time.Second}
	return d.Dial("ws"+strings.TrimPrefix(s.URL, "http")+"/v1/ws", hdr)
}

// Send sends v as JSON in one frame.
func (c *Conn) Send(v any) {
	c.t.Helper()
	c.SendRaw(marshal(c.t, v))
}

// SendRaw sends b in one text frame.
func (c *Conn) SendRaw(b []byte) {
	c.t.Helper()
	if err := c.WriteMessage(websocket.TextMessage, b); err != nil {
		c.t.Fatal(err)
	}
}

// Read returns the next frame, whatever it holds.
func (c *Conn) Read(timeout time.Duration) []byte {
	c.t.Helper()
	c.SetReadDeadline(time.Now().Add(timeout))
	_, b, err := c.ReadMessage()
	if err != nil {
		c.t.Fatalf("reading the websocket: %v", err)
	}
	return b
}

// Frame returns the next frame that is not a progress message.
func (c *Conn) Frame(timeout time.Duration) []byte {
	c.t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		b := c.Read(time.Until(deadline))
		if bytes.HasPrefix(bytes.TrimSpace(b), []byte("{")) {
			var a Answer
			if json.Unmarshal(b, &a) == nil && a.Progress != nil {
				continue
			}
		}
		return b
	}
}

// Next returns the next answer that is not a progress message.
func (c *Conn) Next(timeout time.Duration) Answer {
	c.t.Helper()
	var a Answer
	decode(c.t, c.Frame(timeout), &a)
	return a
}

// Call sends one call with an id and returns its answer, which must be the
// next one.
func (c *Conn) Call(id int, fn string, args ...any) Answer {
	c.t.Helper()
	call := NewCall(fn, args...)
	call.ID = id
	c.Send(call)
	a := c.Next(c.Timeout)
	if string(a.ID) != strconv.Itoa(id) {
		c.t.Fatalf("answer id %s; want %d", a.ID, id)
	}
	return a
}

func marshal(t testing.TB, v any) []byte {
	t.Helper()
	b, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func decode(t testing.TB, b []byte, v any) {
	t.Helper()
	if err := json.Unmarshal(b, v); err != nil {
		t.Fatalf("answer %.300s: %v", b, err)
	}
}

// LogBuffer collects a server's log written from many goroutines.
type LogBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *LogBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

// String returns what has been written so far.
func (l *LogBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// Eventually polls cond every few milliseconds until it holds; after
// timeout it ends the test, naming what it waited for.
func Eventually(t testing.TB, timeout time.Duration, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(5 * time.Millisecond)
	}
}
