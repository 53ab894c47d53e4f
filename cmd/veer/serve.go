package main

import (
	"context"
	"crypto/tls"
	"errors"
	"flag"
	"fmt"
	"io/fs"
	"log/slog"
	"net"
	"net/url"
	"os"
	"os/signal"
	"strings"
	"syscall"
	"time"

	"veer/addin/web"
	"veer/examples"
	"veer/functions/catalog"
	"veer/functions/refcurve"
	"veer/functions/screening"
	"veer/server"
)

// stringList collects a repeatable string flag.
type stringList []string

func (s *stringList) String() string     { return strings.Join(*s, ",") }
func (s *stringList) Set(v string) error { *s = append(*s, v); return nil }

// builtinModels fits the demo models from the embedded synthetic data, so
// a fresh server has models to try at once. They are named demo-<marker>.
func builtinModels() (map[string][]byte, error) {
	ref, err := tableFromBytes(examples.ReferenceCSV(), "reference.csv")
	if err != nil {
		return nil, err
	}
	out := map[string][]byte{}
	for _, mk := range demoMarkers() {
		rows, err := readRows(ref, "reference.csv", examColumns{id: "worker", time: "age", value: mk.column, group: "group"})
		if err != nil {
			return nil, err
		}
		name := "demo-" + mk.name
		m, err := screening.Fit(context.Background(), rows, screening.FitOptions{Name: name, Curves: refcurve.Options{Transform: mk.transform}})
		if err != nil {
			return nil, err
		}
		doc, err := m.Encode()
		if err != nil {
			return nil, err
		}
		out[name] = doc
	}
	return out, nil
}

// serverFlags are the flags that locate and configure the server.
type serverFlags struct {
	addr, data  string
	origins     stringList
	hosts       stringList
	verbose     bool
	tls         bool
	allowRemote bool

	// Not flags. tlsConfig is set by runServe for --tls; testFiles, when
	// set, is served at /addin/test/ (the browser tests' stand-in host).
	tlsConfig *tls.Config
	testFiles fs.FS
}

func (f *serverFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&f.addr, "addr", server.DefaultAddr, "address to listen on (keep it on 127.0.0.1: health data must not leave this computer)")
	fs.StringVar(&f.data, "data", "", "folder for models and the install token (default: "+defaultDataDir()+")")
	fs.Var(&f.origins, "origin", "extra browser origin allowed to call the server, e.g. https://localhost:7312 (repeatable)")
	fs.BoolVar(&f.verbose, "verbose", false, "log every call (function names, timings and sizes; never values or ids)")
	fs.BoolVar(&f.tls, "tls", false, "serve HTTPS with the local certificate (created by 'veer cert' or on first use), as spreadsheet add-ins need")
	fs.BoolVar(&f.allowRemote, "allow-remote", false, "allow an --addr other computers can reach; needs --tls, and every call then needs the token from 'veer token'")
	fs.Var(&f.hosts, "host", "extra host name clients use to reach the server, e.g. screening.example.internal (repeatable; with --allow-remote)")
}

// dataDir returns the data folder the flags name, or the default.
func (f *serverFlags) dataDir() (string, error) {
	if f.data != "" {
		return f.data, nil
	}
	return server.DefaultDataDir()
}

// addinBase returns the base URL the add-in manifest points at for a
// server listening on addr: localhost (the name in the local certificate)
// and the port.
func addinBase(addr string, tls bool) string {
	_, port, err := net.SplitHostPort(addr)
	if err != nil || port == "" {
		port = "7311"
	}
	scheme := "http"
	if tls {
		scheme = "https"
	}
	return scheme + "://localhost:" + port
}

func newServer(e *env, f *serverFlags) (*server.Server, error) {
	level := slog.LevelInfo
	if !f.verbose {
		level = slog.LevelWarn
	}
	logger := slog.New(slog.NewTextHandler(e.stderr, &slog.HandlerOptions{Level: level}))
	dir, err := f.dataDir()
	if err != nil {
		return nil, err
	}
	cat := catalog.New()
	// The add-in's manifest names the port the server really got.
	var s *server.Server
	base := func() string {
		if s != nil {
			for _, u := range s.URLs() {
				if pu, err := url.Parse(u); err == nil && pu.Port() != "" {
					return addinBase(pu.Host, f.tlsConfig != nil)
				}
			}
		}
		return addinBase(f.addr, f.tlsConfig != nil)
	}
	opt := web.SiteOptions{BaseURL: base}
	if f.testFiles != nil {
		opt.Mount = map[string]fs.FS{"test": f.testFiles}
	}
	site, err := web.Site(cat.Listing(), opt)
	if err != nil {
		return nil, fmt.Errorf("building the add-in files: %v", err)
	}
	s, err = server.New(server.Config{
		Addr: f.addr, DataDir: dir, Catalogue: cat,
		AllowedOrigins: f.origins, AllowedHosts: f.hosts, Logger: logger,
		TLS: f.tlsConfig, Static: site, AllowRemote: f.allowRemote,
	})
	if err != nil {
		return nil, err
	}
	models, err := builtinModels()
	if err != nil {
		return nil, fmt.Errorf("building the demo models: %v", err)
	}
	for _, name := range []string{"demo-sbp", "demo-fev1"} {
		if _, err := s.Registry().AddBuiltin(name, models[name]); err != nil {
			return nil, err
		}
	}
	return s, nil
}

func runServe(e *env, args []string) error {
	fs := newFlags(e, "serve", "[--addr 127.0.0.1:PORT] [--data DIR] [--tls] [--allow-remote --host NAME]")
	var sf serverFlags
	sf.register(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if sf.allowRemote && !sf.tls {
		return usagef("--allow-remote needs --tls: health data and the token must be encrypted on the network")
	}
	if !sf.allowRemote && !server.LoopbackAddr(sf.addr) {
		return notLoopback(sf.addr)
	}
	if sf.tls {
		dir, err := sf.dataDir()
		if err != nil {
			return err
		}
		cfg, leaf, created, err := serverTLS(dir, time.Now())
		if err != nil {
			return err
		}
		sf.tlsConfig = cfg
		certPath, _ := certPaths(dir)
		if created {
			fmt.Fprintf(e.stderr, "Created the local certificate %s.\nTrust it once (see 'veer cert'), or the spreadsheet will refuse the add-in.\n", certPath)
		}
		if left := time.Until(leaf.NotAfter); left < 30*24*time.Hour {
			fmt.Fprintf(e.stderr, "The local certificate expires on %s: run 'veer cert --force' and trust the new one.\n", leaf.NotAfter.Format("2006-01-02"))
		}
	}
	s, err := newServer(e, &sf)
	if err != nil {
		return err
	}
	defer s.Close()
	ln, err := s.Listen()
	if errors.Is(err, server.ErrNotLoopback) {
		return notLoopback(sf.addr)
	}
	if err != nil {
		return fmt.Errorf("cannot listen on %s: %v", sf.addr, err)
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	done := make(chan error, 1)
	go func() { done <- s.Serve(ctx, ln) }()
	scheme := "http"
	if sf.tlsConfig != nil {
		scheme = "https"
	}
	fmt.Fprintf(e.stdout, "%s://%s/\n", scheme, ln.Addr().String())
	fmt.Fprintf(e.stderr, "veer is serving on %s://%s/ (models in %s); press Ctrl+C to stop.\n", scheme, ln.Addr().String(), s.DataDir())
	base := addinBase(ln.Addr().String(), sf.tlsConfig != nil)
	fmt.Fprintf(e.stderr, "Spreadsheet add-in: %s/addin/ (manifest: %s/addin/manifest.xml).\n", base, base)
	if sf.tlsConfig == nil {
		fmt.Fprintln(e.stderr, "Spreadsheets load add-ins only over HTTPS: use --tls for the web add-in.")
	}
	fmt.Fprintln(e.stderr, "Built-in models: demo-sbp, demo-fev1. Writing (fitting) needs the token printed by 'veer token'.")
	fmt.Fprintln(e.stderr, screening.Caution)
	err = <-done
	fmt.Fprintln(e.stderr, "veer stopped.")
	return err
}

// notLoopback refuses an address other computers can reach.
func notLoopback(addr string) error {
	return usagef("refusing to listen on %s: other computers could reach it, and health data must not leave this computer; use --addr 127.0.0.1:PORT, or add --allow-remote --tls (every call then needs the token from 'veer token')", addr)
}

func runToken(e *env, args []string) error {
	fs := newFlags(e, "token", "[--data DIR]")
	data := fs.String("data", "", "the server's data folder (default: "+defaultDataDir()+")")
	err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	dir := *data
	if dir == "" {
		if dir, err = server.DefaultDataDir(); err != nil {
			return err
		}
	}
	tok, err := server.ReadOrCreateToken(dir)
	if err != nil {
		return err
	}
	fmt.Fprintln(e.stdout, tok)
	fmt.Fprintln(e.stderr, "Paste this token into the add-in's settings to let it fit models. Keep it private.")
	return nil
}

// defaultDataDir names the default data folder for help texts.
func defaultDataDir() string {
	d, err := server.DefaultDataDir()
	if err != nil {
		return "a folder under your home directory"
	}
	return d
}
