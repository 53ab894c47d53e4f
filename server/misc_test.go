package server

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"errors"
	"io"
	"log/slog"
	"math/big"
	"net"
	"net/http"
	"path/filepath"
	"strings"
	"testing"
	"testing/fstest"
	"time"

	"github.com/gorilla/websocket"
)

func TestStaticFiles(t *testing.T) {
	h := startServer(t, "", func(c *Config) {
		c.Static = fstest.MapFS{"taskpane.html": {Data: []byte("<html>veer</html>")}}
	})
	if st, b := h.Do("GET", "/addin/taskpane.html", ""); st != 200 || string(b) != "<html>veer</html>" {
		t.Errorf("static file: %d %s", st, b)
	}
	if st, _ := h.Do("GET", "/addin/missing.js", ""); st != 404 {
		t.Errorf("missing static file: %d", st)
	}
	if st, _ := h.Do("GET", "/addin/taskpane.html", "", "Host: evil.example"); st != 403 {
		t.Errorf("static file with a foreign Host: %d", st)
	}
}

func TestDefaultDataDir(t *testing.T) {
	t.Setenv("XDG_DATA_HOME", "/xdg/data")
	if d, err := DefaultDataDir(); err != nil || d != filepath.Join("/xdg/data", "veer") {
		t.Errorf("with XDG_DATA_HOME: %q, %v", d, err)
	}
	t.Setenv("XDG_DATA_HOME", "relative")
	if d, err := DefaultDataDir(); err != nil || !filepath.IsAbs(d) || filepath.Base(d) != "veer" {
		t.Errorf("relative XDG_DATA_HOME must be ignored: %q, %v", d, err)
	}
}

func TestNewRequiresCatalogue(t *testing.T) {
	if _, err := New(Config{DataDir: t.TempDir()}); err == nil {
		t.Error("New without a catalogue succeeded")
	}
}

// testCert returns a self-signed certificate for 127.0.0.1 and localhost,
// its server configuration and a client trusting it.
func testCert(t *testing.T) ([]byte, *tls.Config, *http.Client) {
	t.Helper()
	key, _ := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "veer test"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		IPAddresses: []net.IP{net.ParseIP("127.0.0.1")}, DNSNames: []string{"localhost"},
		KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	cert := tls.Certificate{Certificate: [][]byte{der}, PrivateKey: key}
	pool := x509.NewCertPool()
	parsed, _ := x509.ParseCertificate(der)
	pool.AddCert(parsed)
	client := &http.Client{Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}}, Timeout: 30 * time.Second}
	return der, &tls.Config{Certificates: []tls.Certificate{cert}}, client
}

// TestLoopbackOnly: an address other computers can reach is refused
// unless remote access is allowed explicitly; then TLS is required and
// every request and every call needs the install token, reads included.
func TestLoopbackOnly(t *testing.T) {
	quiet := slog.New(slog.DiscardHandler)
	for _, addr := range []string{"0.0.0.0:0", "[::]:0", ":0", "example.org:7311"} {
		s, err := New(Config{DataDir: t.TempDir(), Catalogue: toyCatalogue(&toyState{}), Addr: addr, Logger: quiet})
		if err != nil {
			t.Fatal(err)
		}
		if ln, err := s.Listen(); !errors.Is(err, ErrNotLoopback) {
			if ln != nil {
				ln.Close()
			}
			t.Errorf("Listen on %s: %v; want ErrNotLoopback", addr, err)
		}
		s.Close()
	}
	// Serve refuses a listener reachable from outside, however made.
	s, err := New(Config{DataDir: t.TempDir(), Catalogue: toyCatalogue(&toyState{}), Logger: quiet})
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "0.0.0.0:0")
	if err != nil {
		t.Skip("cannot listen on 0.0.0.0:", err)
	}
	if err := s.Serve(context.Background(), ln); !errors.Is(err, ErrNotLoopback) {
		t.Errorf("Serve on 0.0.0.0: %v; want ErrNotLoopback", err)
	}
	ln.Close()
	s.Close()
	// Allowed, but without TLS: refused.
	s, _ = New(Config{DataDir: t.TempDir(), Catalogue: toyCatalogue(&toyState{}), Addr: "0.0.0.0:0", AllowRemote: true, Logger: quiet})
	if ln, err := s.Listen(); err == nil || !strings.Contains(err.Error(), "TLS") {
		if ln != nil {
			ln.Close()
		}
		t.Errorf("remote access without TLS: %v", err)
	}
	s.Close()

	// Allowed with TLS: every request needs the token.
	_, tlsCfg, client := testCert(t)
	s, err = New(Config{DataDir: t.TempDir(), Catalogue: toyCatalogue(&toyState{}), Addr: "0.0.0.0:0", AllowRemote: true, TLS: tlsCfg, Logger: quiet})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	ln, err = s.Listen()
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Serve(ctx, ln) }()
	defer func() { cancel(); <-done }()
	_, port, _ := net.SplitHostPort(ln.Addr().String())
	base := "https://127.0.0.1:" + port
	do := func(method, path, body string, token bool) (int, string) {
		req, _ := http.NewRequest(method, base+path, strings.NewReader(body))
		if token {
			req.Header.Set(TokenHeader, s.Token())
		}
		resp, err := client.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		return resp.StatusCode, string(b)
	}
	call := `{"fn":"VEER.T.ADD","args":[1,2]}`
	if st, b := do("POST", "/v1/call", call, false); st != 200 || !strings.Contains(b, "needs the install token") {
		t.Errorf("a read call without the token: %d %s", st, b)
	}
	if st, b := do("POST", "/v1/call", call, true); st != 200 || !strings.Contains(b, `"value":3`) {
		t.Errorf("a read call with the token: %d %s", st, b)
	}
	if st, b := do("POST", "/v1/call", `{"fn":"VEER.T.ADD","args":[1,2],"token":"`+s.Token()+`"}`, false); !strings.Contains(b, `"value":3`) {
		t.Errorf("a call carrying the token: %d %s", st, b)
	}
	for _, path := range []string{"/v1/functions", "/v1/models", "/v1/health"} {
		if st, _ := do("GET", path, "", false); st != http.StatusUnauthorized {
			t.Errorf("GET %s without the token: %d; want 401", path, st)
		}
		if st, _ := do("GET", path, "", true); st != 200 {
			t.Errorf("GET %s with the token: %d", path, st)
		}
	}
	// The websocket: calls fail until the token message.
	d := websocket.Dialer{TLSClientConfig: client.Transport.(*http.Transport).TLSClientConfig}
	c, _, err := d.Dial("wss://127.0.0.1:"+port+"/v1/ws", nil)
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	c.WriteMessage(websocket.TextMessage, []byte(`{"id":1,"fn":"VEER.T.ADD","args":[1,2]}`))
	c.SetReadDeadline(time.Now().Add(10 * time.Second))
	if _, b, err := c.ReadMessage(); err != nil || !strings.Contains(string(b), "needs the install token") {
		t.Errorf("websocket call without the token: %s, %v", b, err)
	}
	c.WriteMessage(websocket.TextMessage, []byte(`{"id":2,"token":"`+s.Token()+`"}`))
	c.ReadMessage()
	c.WriteMessage(websocket.TextMessage, []byte(`{"id":3,"fn":"VEER.T.ADD","args":[1,2]}`))
	if _, b, err := c.ReadMessage(); err != nil || !strings.Contains(string(b), `"value":3`) {
		t.Errorf("websocket call after the token: %s, %v", b, err)
	}
}

// TestTLS: with Config.TLS the server speaks HTTPS and its own origin is
// https://...; plain http origins are then refused.
func TestTLS(t *testing.T) {
	key, _ := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "veer test"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		IPAddresses: []net.IP{net.ParseIP("127.0.0.1")}, DNSNames: []string{"localhost"},
		KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	cert := tls.Certificate{Certificate: [][]byte{der}, PrivateKey: key}
	s, err := New(Config{DataDir: t.TempDir(), Catalogue: toyCatalogue(&toyState{}), TLS: &tls.Config{Certificates: []tls.Certificate{cert}}})
	if err != nil {
		t.Fatal(err)
	}
	ln, _ := net.Listen("tcp", "127.0.0.1:0")
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Serve(ctx, ln) }()
	defer func() { cancel(); <-done }()
	pool := x509.NewCertPool()
	parsed, _ := x509.ParseCertificate(der)
	pool.AddCert(parsed)
	client := &http.Client{Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}}}
	url := "https://" + ln.Addr().String()
	post := func(origin string) int {
		req, _ := http.NewRequest("POST", url+"/v1/call", strings.NewReader(`{"fn":"VEER.T.ADD","args":[1,2]}`))
		if origin != "" {
			req.Header.Set("Origin", origin)
		}
		resp, err := client.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		if resp.StatusCode == 200 && !strings.Contains(string(b), `"value":3`) {
			t.Errorf("answer %s", b)
		}
		return resp.StatusCode
	}
	if st := post(""); st != 200 {
		t.Errorf("https call: %d", st)
	}
	if st := post("https://" + ln.Addr().String()); st != 200 {
		t.Errorf("own https origin: %d", st)
	}
	if st := post("http://" + ln.Addr().String()); st != 403 {
		t.Errorf("http origin on an https server: %d", st)
	}
	if u := s.URLs(); len(u) != 1 || !strings.HasPrefix(u[0], "https://127.0.0.1:") {
		t.Errorf("URLs = %v", u)
	}
}
