package server

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"net"
	"net/http"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"time"

	"github.com/gorilla/websocket"
)

// Server is veer's local function server: HTTP and websocket transport,
// dispatch to the cell catalogue, the model registry, streaming updates and
// the security checks.
type Server struct {
	cfg   Config
	lim   Limits
	log   *slog.Logger
	reg   *Registry
	eng   *engine
	token string

	extraHosts   map[string]bool
	extraOrigins map[string]bool
	handler      http.Handler
	upgrader     websocket.Upgrader

	base       context.Context
	baseCancel context.CancelFunc
	stopWatch  func()

	mu       sync.Mutex
	ports    map[string]bool
	urls     []string
	conns    map[*wsConn]struct{}
	closing  bool
	connDone sync.WaitGroup
}

// New creates a server: it opens (or creates) the data directory, the model
// registry and the install token.
func New(cfg Config) (*Server, error) {
	if cfg.Catalogue == nil {
		return nil, errors.New("server: Config.Catalogue is required")
	}
	if cfg.Logger == nil {
		cfg.Logger = slog.Default()
	}
	if cfg.Addr == "" {
		cfg.Addr = DefaultAddr
	}
	if cfg.DataDir == "" {
		d, err := DefaultDataDir()
		if err != nil {
			return nil, fmt.Errorf("server: no data directory: %w", err)
		}
		cfg.DataDir = d
	}
	tok, err := ReadOrCreateToken(cfg.DataDir)
	if err != nil {
		return nil, fmt.Errorf("server: %w", err)
	}
	reg, err := OpenRegistry(filepath.Join(cfg.DataDir, "models"), cfg.Logger)
	if err != nil {
		return nil, fmt.Errorf("server: %w", err)
	}
	s := &Server{
		cfg: cfg, lim: cfg.Limits.withDefaults(), log: cfg.Logger, reg: reg, token: tok,
		extraHosts: map[string]bool{}, extraOrigins: map[string]bool{},
		ports: map[string]bool{}, conns: map[*wsConn]struct{}{},
	}
	for _, h := range cfg.AllowedHosts {
		s.extraHosts[strings.TrimSuffix(strings.ToLower(strings.TrimSpace(h)), ".")] = true
	}
	for _, o := range cfg.AllowedOrigins {
		s.extraOrigins[normalizeOrigin(o)] = true
	}
	s.base, s.baseCancel = context.WithCancel(context.Background())
	s.eng = newEngine(cfg.Catalogue, reg, s.lim, s.log, s.base)
	s.upgrader = websocket.Upgrader{
		ReadBufferSize:  16 << 10,
		WriteBufferSize: 16 << 10,
		CheckOrigin:     s.originAllowed,
	}
	s.handler = s.guard(s.routes())
	s.stopWatch = reg.Watch(s.modelChanged)
	return s, nil
}

// Registry returns the model registry (for registering built-in models).
func (s *Server) Registry() *Registry { return s.reg }

// Handler returns the HTTP handler with all checks applied (for tests and
// embedding; Serve uses it).
func (s *Server) Handler() http.Handler { return s.handler }

// Token returns the install token (also in DataDir/token).
func (s *Server) Token() string { return s.token }

// DataDir returns the data directory in use.
func (s *Server) DataDir() string { return s.cfg.DataDir }

// URLs returns the base URLs served so far, e.g. "http://127.0.0.1:7311/".
func (s *Server) URLs() []string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return append([]string(nil), s.urls...)
}

// Listen opens a listener on Config.Addr. An address other computers can
// reach is refused unless Config.AllowRemote is set (and then TLS is
// required): health data must not leave this computer by accident.
func (s *Server) Listen() (net.Listener, error) {
	if err := s.checkAddr(s.cfg.Addr); err != nil {
		return nil, err
	}
	ln, err := net.Listen("tcp", s.cfg.Addr)
	if err != nil {
		return nil, err
	}
	if err := s.checkListener(ln); err != nil {
		ln.Close()
		return nil, err
	}
	return ln, nil
}

// ErrNotLoopback is returned (wrapped) by Listen and Serve for an address
// other computers can reach when Config.AllowRemote is not set.
var ErrNotLoopback = errors.New("not a loopback address")

// LoopbackAddr reports whether addr ("host:port") names the loopback
// interface only: localhost, 127.0.0.0/8 or ::1 (not an empty or
// unspecified host, which listens on every interface).
func LoopbackAddr(addr string) bool {
	host, _, err := net.SplitHostPort(addr)
	return err == nil && isLoopbackHost(strings.ToLower(host))
}

// checkAddr refuses, before listening, an address that is not loopback
// (a host name other than localhost, an unspecified or outside address).
func (s *Server) checkAddr(addr string) error {
	if _, _, err := net.SplitHostPort(addr); err != nil {
		return fmt.Errorf("%s is not an address like 127.0.0.1:7311: %v", addr, err)
	}
	if LoopbackAddr(addr) {
		return nil
	}
	return s.remoteAllowed(addr)
}

// checkListener applies the same rule to the address a listener got.
func (s *Server) checkListener(ln net.Listener) error {
	ta, ok := ln.Addr().(*net.TCPAddr)
	if !ok || ta.IP.IsLoopback() {
		return nil
	}
	return s.remoteAllowed(ln.Addr().String())
}

func (s *Server) remoteAllowed(addr string) error {
	if !s.cfg.AllowRemote {
		return fmt.Errorf("refusing to listen on %s, an address other computers can reach (health data must not leave this computer): use 127.0.0.1:PORT, or allow remote access explicitly, which then needs TLS and the install token on every call: %w", addr, ErrNotLoopback)
	}
	if s.cfg.TLS == nil {
		return fmt.Errorf("listening on %s, an address other computers can reach, needs TLS so that health data and the token are encrypted on the network", addr)
	}
	return nil
}

// ListenAndServe listens on Config.Addr and serves until ctx is cancelled.
func (s *Server) ListenAndServe(ctx context.Context) error {
	ln, err := s.Listen()
	if err != nil {
		return err
	}
	return s.Serve(ctx, ln)
}

// Serve serves on ln until ctx is cancelled, then shuts down gracefully: it
// stops accepting connections and messages, lets in-flight calls finish
// (up to Limits.ShutdownTimeout, after which they are cancelled), closes
// websocket connections with "going away", and returns nil. Model saves are
// synchronous, so nothing is left half-written. Serve may be called for
// several listeners; the first to end ends the server.
func (s *Server) Serve(ctx context.Context, ln net.Listener) error {
	if err := s.checkListener(ln); err != nil {
		return err
	}
	scheme := "http"
	if s.cfg.TLS != nil {
		scheme = "https"
		ln = tls.NewListener(ln, s.cfg.TLS)
	}
	if ta, ok := ln.Addr().(*net.TCPAddr); ok {
		port := fmt.Sprint(ta.Port)
		host := ta.IP.String()
		if ta.IP.IsUnspecified() {
			host = "127.0.0.1"
		}
		s.mu.Lock()
		s.ports[port] = true
		s.urls = append(s.urls, scheme+"://"+net.JoinHostPort(host, port)+"/")
		sort.Strings(s.urls)
		s.mu.Unlock()
	}
	hs := &http.Server{
		Handler:           s.handler,
		ReadHeaderTimeout: 10 * time.Second,
		IdleTimeout:       2 * time.Minute,
		MaxHeaderBytes:    64 << 10,
		ErrorLog:          slog.NewLogLogger(s.log.Handler(), slog.LevelDebug),
		BaseContext:       func(net.Listener) context.Context { return s.base },
	}
	errc := make(chan error, 1)
	go func() { errc <- hs.Serve(ln) }()
	s.log.Info("serving", "addr", ln.Addr().String())
	if ta, ok := ln.Addr().(*net.TCPAddr); ok && !ta.IP.IsLoopback() {
		s.log.Warn("listening on an address other computers can reach; every call needs the install token")
	}
	select {
	case err := <-errc:
		if errors.Is(err, http.ErrServerClosed) {
			return nil
		}
		return err
	case <-ctx.Done():
	}
	s.shutdown(hs)
	return nil
}

// shutdown stops hs, lets in-flight work end within ShutdownTimeout and
// closes websocket connections.
func (s *Server) shutdown(hs *http.Server) {
	start := time.Now()
	s.mu.Lock()
	s.closing = true
	conns := make([]*wsConn, 0, len(s.conns))
	for c := range s.conns {
		conns = append(conns, c)
	}
	s.mu.Unlock()
	for _, c := range conns {
		c.stopReading()
	}
	dctx, cancel := context.WithTimeout(context.Background(), s.lim.ShutdownTimeout)
	defer cancel()
	done := make(chan struct{})
	go func() {
		hs.Shutdown(dctx)
		s.connDone.Wait()
		close(done)
	}()
	select {
	case <-done:
	case <-dctx.Done():
		s.log.Warn("shutdown time limit reached; cancelling calls still running")
		s.baseCancel()
		hs.Close()
		<-done
	}
	s.log.Info("stopped", "ms", time.Since(start).Milliseconds())
}

// Close releases the server's resources after Serve has returned:
// remaining computations are cancelled, the registry watch stops and the
// lock on the model directory is released.
func (s *Server) Close() error {
	s.baseCancel()
	s.stopWatch()
	return s.reg.Close()
}

// modelChanged fans a registry change out to websocket subscriptions.
func (s *Server) modelChanged(key string) {
	s.mu.Lock()
	conns := make([]*wsConn, 0, len(s.conns))
	for c := range s.conns {
		conns = append(conns, c)
	}
	s.mu.Unlock()
	for _, c := range conns {
		c.modelChanged(key)
	}
}

// staticFS returns the add-in files.
func (s *Server) staticHandler() http.Handler {
	if s.cfg.Static == nil {
		return http.NotFoundHandler()
	}
	fsys := s.cfg.Static
	if sub, err := fs.Sub(fsys, "."); err == nil {
		fsys = sub
	}
	return http.StripPrefix("/addin/", http.FileServerFS(fsys))
}
