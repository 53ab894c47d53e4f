package server

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"io"
	"math/big"
	"net"
	"net/http"
	"path/filepath"
	"strings"
	"testing"
	"testing/fstest"
	"time"
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
