package server

import (
	"bytes"
	"fmt"
	"io"
	"log/slog"
	"strconv"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/gorilla/websocket"
)

// TestManyWebsocketClients: 200 concurrent websocket clients, 500 calls
// each (pipelined, up to 50 in flight per client), all answered correctly,
// with zero errors. Loopback only; bounded in time.
func TestManyWebsocketClients(t *testing.T) {
	clients, calls, window := 200, 500, 50
	if testing.Short() || raceEnabled {
		clients, calls = 50, 100
	}
	h := startServer(t, "", func(c *Config) {
		c.Logger = slog.New(slog.NewTextHandler(io.Discard, &slog.HandlerOptions{Level: slog.LevelInfo}))
	})
	start := time.Now()
	cpu0 := processCPU()
	var errs atomic.Int64
	var firstErr sync.Once
	fail := func(format string, a ...any) {
		errs.Add(1)
		firstErr.Do(func() { t.Errorf(format, a...) })
	}
	var wg sync.WaitGroup
	for c := 0; c < clients; c++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			conn, _, err := h.DialRaw()
			if err != nil {
				fail("client %d dial: %v", c, err)
				return
			}
			defer conn.Close()
			sem := make(chan struct{}, window)
			readerDone := make(chan struct{})
			go func() {
				defer close(readerDone)
				seen := make([]bool, calls)
				for n := 0; n < calls; n++ {
					conn.SetReadDeadline(time.Now().Add(20 * time.Second))
					_, b, err := conn.ReadMessage()
					if err != nil {
						fail("client %d read after %d answers: %v", c, n, err)
						return
					}
					// {"id":I,"value":V}
					id, val, ok := parseSimpleAnswer(b)
					if !ok || id < 0 || id >= calls || seen[id] {
						fail("client %d: bad answer %s", c, b)
						return
					}
					seen[id] = true
					if want := strconv.Itoa(id + 1000*c); val != want {
						fail("client %d call %d: value %s; want %s", c, id, val, want)
					}
					<-sem
				}
			}()
			buf := make([]byte, 0, 96)
			for i := 0; i < calls; i++ {
				select {
				case sem <- struct{}{}:
				case <-readerDone:
					return
				}
				buf = fmt.Appendf(buf[:0], `{"id":%d,"fn":"VEER.T.ADD","args":[%d,%d]}`, i, i, 1000*c)
				if err := conn.WriteMessage(websocket.TextMessage, buf); err != nil {
					fail("client %d write: %v", c, err)
					return
				}
			}
			<-readerDone
		}()
	}
	wg.Wait()
	el := time.Since(start)
	if n := errs.Load(); n != 0 {
		t.Fatalf("%d errors", n)
	}
	t.Logf("%d clients x %d calls in %v (%.0f calls/s; %.1f µs CPU per call, clients included)", clients, calls, el, float64(clients*calls)/el.Seconds(), float64((processCPU()-cpu0).Microseconds())/float64(clients*calls))
}

// parseSimpleAnswer reads {"id":<int>,"value":<raw>} without reflection.
func parseSimpleAnswer(b []byte) (int, string, bool) {
	rest, ok := bytes.CutPrefix(b, []byte(`{"id":`))
	if !ok {
		return 0, "", false
	}
	i := bytes.IndexByte(rest, ',')
	if i < 0 {
		return 0, "", false
	}
	id, err := strconv.Atoi(string(rest[:i]))
	if err != nil {
		return 0, "", false
	}
	val, ok := bytes.CutPrefix(rest[i+1:], []byte(`"value":`))
	if !ok || len(val) == 0 || val[len(val)-1] != '}' {
		return 0, "", false
	}
	return id, string(val[:len(val)-1]), true
}
