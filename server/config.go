package server

import (
	"crypto/tls"
	"errors"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"runtime"
	"time"

	"veer/functions/cell"
)

// DefaultAddr is the address veer listens on unless told otherwise: loopback
// only, a fixed port so add-ins know where to connect.
const DefaultAddr = "127.0.0.1:7311"

// Config configures a Server. Only Catalogue is required.
type Config struct {
	// Addr to listen on in ListenAndServe and Listen; default DefaultAddr.
	Addr string
	// DataDir holds models and the install token; default DefaultDataDir().
	DataDir string
	// Catalogue of cell functions served.
	Catalogue *cell.Catalogue
	// AllowedOrigins are browser origins besides the server's own that may
	// call it, e.g. the origin the web add-in is served from
	// ("https://addin.example.org"). Exact match of scheme://host[:port].
	AllowedOrigins []string
	// AllowedHosts are extra Host header names (without port) accepted
	// besides the loopback names localhost, 127.0.0.1 and ::1, e.g. a name
	// used with TLS. Never add names an outside party controls.
	AllowedHosts []string
	// Limits on requests and work; zero fields take their defaults.
	Limits Limits
	// Logger for function names, timings and sizes (never values or ids);
	// default slog.Default().
	Logger *slog.Logger
	// TLS, if set, makes Serve speak HTTPS (and the server's own origins
	// https://...).
	TLS *tls.Config
	// Static, if set, is served read-only at /addin/ (the web add-in files).
	Static fs.FS
	// AllowRemote lets the server listen on an address other computers
	// can reach. Without it Listen and Serve refuse any address that is
	// not loopback. With it the server needs TLS, and every call (every
	// /v1/ request and every websocket message) needs the install token,
	// reads included.
	AllowRemote bool
}

// Limits bound every input path. Zero values mean the default shown.
type Limits struct {
	// MaxRequestBytes bounds an HTTP request body and a websocket frame
	// (default 64 MiB).
	MaxRequestBytes int64
	// MaxRows bounds the rows (or, for a one-row range, the columns) of one
	// range argument (default 1,000,000).
	MaxRows int
	// MaxCells bounds the cells of all arguments of one call (default
	// 8,000,000).
	MaxCells int
	// MaxBatch bounds the calls in one batch (default 100,000).
	MaxBatch int
	// Computations run in two lanes, so quick lookups never queue behind
	// slow work: the slow lane takes calls of functions marked Slow and
	// calls with more than QuickCells cells; the quick lane all others.
	// MaxConcurrent bounds the quick lane's computations running at once
	// (default 2 x GOMAXPROCS, at least 4), MaxConcurrentSlow the slow
	// lane's (default GOMAXPROCS, at least 2); further calls wait for a
	// slot of their lane within their time limit.
	MaxConcurrent     int
	MaxConcurrentSlow int
	// QuickCells is the most cells a call of a function not marked Slow
	// may have to run in the quick lane (default 20,000).
	QuickCells int
	// CallTimeout bounds one computation, including the wait for a slot
	// (default 60 s).
	CallTimeout time.Duration
	// SlowCallTimeout is CallTimeout for functions marked Slow (default 10 min).
	SlowCallTimeout time.Duration
	// CacheEntries and CacheBytes bound the result cache (default 100,000
	// entries, 256 MiB).
	CacheEntries int
	CacheBytes   int64
	// OnceEntries bounds the Env.Once cache (default 1,024 entries).
	OnceEntries int
	// MaxInflightPerConn bounds messages a websocket connection has in
	// progress; reading pauses beyond it (default 256).
	MaxInflightPerConn int
	// MaxSubscriptionsPerConn bounds live streaming subscriptions of one
	// websocket connection (default 100,000).
	MaxSubscriptionsPerConn int
	// ShutdownTimeout bounds the wait for in-flight calls at shutdown
	// before they are cancelled (default 30 s).
	ShutdownTimeout time.Duration
}

// withDefaults fills zero fields.
func (l Limits) withDefaults() Limits {
	def := func(p *int, v int) {
		if *p <= 0 {
			*p = v
		}
	}
	def64 := func(p *int64, v int64) {
		if *p <= 0 {
			*p = v
		}
	}
	defD := func(p *time.Duration, v time.Duration) {
		if *p <= 0 {
			*p = v
		}
	}
	def64(&l.MaxRequestBytes, 64<<20)
	def(&l.MaxRows, 1_000_000)
	def(&l.MaxCells, 8_000_000)
	def(&l.MaxBatch, 100_000)
	def(&l.MaxConcurrent, max(4, 2*runtime.GOMAXPROCS(0)))
	def(&l.MaxConcurrentSlow, max(2, runtime.GOMAXPROCS(0)))
	def(&l.QuickCells, 20_000)
	defD(&l.CallTimeout, 60*time.Second)
	defD(&l.SlowCallTimeout, 10*time.Minute)
	def(&l.CacheEntries, 100_000)
	def64(&l.CacheBytes, 256<<20)
	def(&l.OnceEntries, 1024)
	def(&l.MaxInflightPerConn, 256)
	def(&l.MaxSubscriptionsPerConn, 100_000)
	defD(&l.ShutdownTimeout, 30*time.Second)
	return l
}

// DefaultDataDir returns the per-user data directory: $XDG_DATA_HOME/veer
// when XDG_DATA_HOME is set, ~/.local/share/veer on Linux and other Unix
// systems, and os.UserConfigDir()/veer on macOS and Windows (Application
// Support, AppData\Roaming).
func DefaultDataDir() (string, error) {
	if x := os.Getenv("XDG_DATA_HOME"); x != "" && filepath.IsAbs(x) {
		return filepath.Join(x, "veer"), nil
	}
	switch runtime.GOOS {
	case "windows", "darwin", "ios", "plan9":
		d, err := os.UserConfigDir()
		if err != nil {
			return "", err
		}
		return filepath.Join(d, "veer"), nil
	}
	home, err := os.UserHomeDir()
	if err != nil {
		return "", err
	}
	if home == "" {
		return "", errors.New("no home directory: pass a data directory")
	}
	return filepath.Join(home, ".local", "share", "veer"), nil
}
