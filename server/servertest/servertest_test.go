package servertest

import (
	"context"
	"errors"
	"net"
	"net/http"
	"strings"
	"testing"
	"time"

	"github.com/gorilla/websocket"
)

// echo is a small Servable: /v1/call answers {"value": <the body>} and
// /v1/ws echoes each frame's "fn" back as a value.
type echo struct {
	closed   bool
	serveErr error
}

func (e *echo) Serve(ctx context.Context, ln net.Listener) error {
	mux := http.NewServeMux()
	mux.HandleFunc("/v1/call", func(w http.ResponseWriter, r *http.Request) {
		if r.Header.Get("X-Test-Token") != "secret" {
			http.Error(w, "no token", http.StatusForbidden)
			return
		}
		w.Write([]byte(`{"value":"` + r.Method + `"}`))
	})
	up := websocket.Upgrader{}
	mux.HandleFunc("/v1/ws", func(w http.ResponseWriter, r *http.Request) {
		c, err := up.Upgrade(w, r, nil)
		if err != nil {
			return
		}
		defer c.Close()
		for {
			_, b, err := c.ReadMessage()
			if err != nil {
				return
			}
			id := strings.TrimSuffix(strings.SplitN(string(b), `"id":`, 2)[1], "}")
			id = strings.SplitN(id, ",", 2)[0]
			c.WriteMessage(websocket.TextMessage, []byte(`{"id":`+id+`,"progress":0.5}`))
			c.WriteMessage(websocket.TextMessage, []byte(`{"id":`+id+`,"value":true}`))
		}
	})
	hs := &http.Server{Handler: mux}
	go func() {
		<-ctx.Done()
		hs.Shutdown(context.Background())
	}()
	if err := hs.Serve(ln); !errors.Is(err, http.ErrServerClosed) {
		return err
	}
	return e.serveErr
}

func (e *echo) Close() error {
	e.closed = true
	return nil
}

func TestServer(t *testing.T) {
	e := &echo{}
	s := Start(t, e)
	if !strings.HasPrefix(s.URL, "http://127.0.0.1:") || !strings.HasSuffix(s.URL, s.Addr) {
		t.Errorf("URL %s, Addr %s", s.URL, s.Addr)
	}
	if st, _ := s.Do("POST", "/v1/call", "{}"); st != http.StatusForbidden {
		t.Errorf("Do without the token: %d", st)
	}
	s.Auth = "X-Test-Token: secret"
	if a := s.Call("VEER.T", 1); string(a.Value) != `"POST"` || a.Code() != "" {
		t.Errorf("Call = %+v", a)
	}
	ws := s.Dial()
	if a := ws.Call(7, "VEER.T"); string(a.Value) != "true" { // the progress frame is skipped
		t.Errorf("websocket Call = %+v", a)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if !e.closed {
		t.Error("Close did not close the server")
	}
	if err := s.Close(); err != nil { // a second Close does nothing
		t.Error(err)
	}
}

func TestCloseReportsServeError(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	s := Serve(t, &echo{serveErr: errors.New("broken")}, ln)
	if err := s.Close(); err == nil || !strings.Contains(err.Error(), "broken") {
		t.Errorf("Close = %v; want Serve's error", err)
	}
}

func TestEventually(t *testing.T) {
	start := time.Now()
	Eventually(t, time.Second, "a moment to pass", func() bool { return time.Since(start) > 20*time.Millisecond })
}
