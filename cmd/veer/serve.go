package main

import (
	"context"
	"flag"
	"fmt"
	"log/slog"
	"os"
	"os/signal"
	"strings"
	"syscall"

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
		m, err := screening.Fit(rows, screening.FitOptions{Name: name, Curves: refcurve.Options{Transform: mk.transform}})
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
	addr, data string
	origins    stringList
	verbose    bool
}

func (f *serverFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&f.addr, "addr", server.DefaultAddr, "address to listen on (keep it on 127.0.0.1: health data must not leave this computer)")
	fs.StringVar(&f.data, "data", "", "folder for models and the install token (default: "+defaultDataDir()+")")
	fs.Var(&f.origins, "origin", "extra browser origin allowed to call the server, e.g. https://localhost:7312 (repeatable)")
	fs.BoolVar(&f.verbose, "verbose", false, "log every call (function names, timings and sizes; never values or ids)")
}

func newServer(e *env, f *serverFlags) (*server.Server, error) {
	level := slog.LevelInfo
	if !f.verbose {
		level = slog.LevelWarn
	}
	logger := slog.New(slog.NewTextHandler(e.stderr, &slog.HandlerOptions{Level: level}))
	dir := f.data
	if dir == "" {
		var err error
		if dir, err = server.DefaultDataDir(); err != nil {
			return nil, err
		}
	}
	s, err := server.New(server.Config{
		Addr: f.addr, DataDir: dir, Catalogue: catalog.New(),
		AllowedOrigins: f.origins, Logger: logger,
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
	fs := newFlags(e, "serve", "[--addr 127.0.0.1:PORT] [--data DIR]")
	var sf serverFlags
	sf.register(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	s, err := newServer(e, &sf)
	if err != nil {
		return err
	}
	defer s.Close()
	ln, err := s.Listen()
	if err != nil {
		return fmt.Errorf("cannot listen on %s: %v", sf.addr, err)
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	done := make(chan error, 1)
	go func() { done <- s.Serve(ctx, ln) }()
	fmt.Fprintf(e.stdout, "http://%s/\n", ln.Addr().String())
	fmt.Fprintf(e.stderr, "veer is serving on http://%s/ (models in %s); press Ctrl+C to stop.\n", ln.Addr().String(), s.DataDir())
	fmt.Fprintln(e.stderr, "Built-in models: demo-sbp, demo-fev1. Writing (fitting) needs the token printed by 'veer token'.")
	fmt.Fprintln(e.stderr, caution)
	err = <-done
	fmt.Fprintln(e.stderr, "veer stopped.")
	return err
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
