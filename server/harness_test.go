package server

import (
	"log/slog"
	"testing"

	"veer/server/servertest"
)

// harness is a real server with the toy catalogue on a loopback port,
// stopped when the test ends.
type harness struct {
	*servertest.Server
	s    *Server
	st   *toyState
	dir  string
	logs *servertest.LogBuffer
}

func startServer(t testing.TB, dir string, configure ...func(*Config)) *harness {
	t.Helper()
	if dir == "" {
		dir = t.TempDir()
	}
	h := &harness{st: &toyState{}, dir: dir, logs: &servertest.LogBuffer{}}
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
	h.s = s
	h.Server = servertest.Start(t, s)
	h.Auth = h.tokenHeader()
	return h
}

func (h *harness) tokenHeader() string { return TokenHeader + ": " + h.s.Token() }
