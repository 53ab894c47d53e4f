package main

import (
	"bytes"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/tls"
	"crypto/x509"
	"encoding/json"
	"encoding/xml"
	"errors"
	"flag"
	"io"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"veer/functions/catalog"
)

// runCmd runs one of this file's commands in-process.
func runCmd(f func(*env, []string) error, args ...string) (stdout, stderr string, err error) {
	var out, errb bytes.Buffer
	err = f(&env{stdout: &out, stderr: &errb, stdin: strings.NewReader("")}, args)
	return out.String(), errb.String(), err
}

// TestAddinManifestCommand checks that `veer addin manifest` prints
// well-formed XML pointing at the given address, and refuses bad ones.
func TestAddinManifestCommand(t *testing.T) {
	for _, c := range []struct {
		args    []string
		base    string
		wantErr bool
	}{
		{[]string{"manifest"}, "https://localhost:7311", false},
		{[]string{"manifest", "--url", "https://localhost:9443"}, "https://localhost:9443", false},
		{[]string{"manifest", "--url", "https://127.0.0.1:8443/"}, "https://127.0.0.1:8443", false},
		{[]string{"manifest", "--url", "localhost:9443"}, "", true},
		{[]string{"manifest", "--url", "https://localhost:9443/addin"}, "", true},
		{[]string{"manifest", "extra"}, "", true},
		{[]string{"nonsense"}, "", true},
		{nil, "", true},
	} {
		out, _, err := runCmd(runAddin, c.args...)
		if c.wantErr {
			var ue usageError
			if !errors.As(err, &ue) {
				t.Errorf("veer addin %v: err = %v; want a usage error", c.args, err)
			}
			continue
		}
		if err != nil {
			t.Fatalf("veer addin %v: %v", c.args, err)
		}
		d := xml.NewDecoder(strings.NewReader(out))
		var root string
		for {
			tok, err := d.Token()
			if err == io.EOF {
				break
			}
			if err != nil {
				t.Fatalf("veer addin %v printed malformed XML: %v", c.args, err)
			}
			if se, ok := tok.(xml.StartElement); ok && root == "" {
				root = se.Name.Local
			}
		}
		if root != "OfficeApp" || !strings.Contains(out, `"`+c.base+`/addin/taskpane.html"`) || !strings.Contains(out, `"`+c.base+`/addin/functions.json"`) {
			t.Errorf("veer addin %v: root %q; the manifest does not point at %s/addin/", c.args, root, c.base)
		}
	}
	if _, _, err := runCmd(runAddin, "--help"); err != nil && !errors.Is(err, flag.ErrHelp) {
		t.Errorf("veer addin --help: %v", err)
	}
}

func TestAddinMetadataCommand(t *testing.T) {
	out, _, err := runCmd(runAddin, "metadata", "--url", "https://localhost:9443")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, `"helpUrl": "https://localhost:9443/addin/help.html#VEER.ZSCORE"`) {
		t.Error("the metadata's help links do not point at the given server")
	}
	if _, _, err := runCmd(runAddin, "metadata", "--url", "nonsense"); err == nil {
		t.Error("a bad --url was accepted")
	}
	var doc struct{ Functions []struct{ ID string } }
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Functions) != catalog.New().Len() {
		t.Errorf("veer addin metadata lists %d functions; the catalogue has %d", len(doc.Functions), catalog.New().Len())
	}
}

// TestCert checks `veer cert`: an ECDSA P-256 self-signed certificate for
// the loopback names only, for server authentication, not a CA, with the
// key readable by the owner only; kept unless --force.
func TestCert(t *testing.T) {
	dir := t.TempDir()
	out, talk, err := runCmd(runCert, "--data", dir)
	if err != nil {
		t.Fatal(err)
	}
	certPath, keyPath := certPaths(dir)
	if strings.TrimSpace(out) != certPath || !strings.Contains(talk, "SHA-256") || !strings.Contains(talk, "certutil") {
		t.Errorf("veer cert printed %q and said %q", out, talk)
	}
	st, err := os.Stat(keyPath)
	if err != nil {
		t.Fatal(err)
	}
	if st.Mode().Perm() != 0o600 {
		t.Errorf("the key has mode %v; want 0600", st.Mode().Perm())
	}
	_, leaf, err := loadCert(dir)
	if err != nil {
		t.Fatal(err)
	}
	pub, ok := leaf.PublicKey.(*ecdsa.PublicKey)
	if !ok || pub.Curve != elliptic.P256() {
		t.Errorf("the key is %T; want ECDSA P-256", leaf.PublicKey)
	}
	if leaf.IsCA || !leaf.BasicConstraintsValid || len(leaf.ExtKeyUsage) != 1 || leaf.ExtKeyUsage[0] != x509.ExtKeyUsageServerAuth {
		t.Errorf("IsCA=%v, ExtKeyUsage=%v; want a server certificate that is no CA", leaf.IsCA, leaf.ExtKeyUsage)
	}
	if err := leaf.CheckSignature(leaf.SignatureAlgorithm, leaf.RawTBSCertificate, leaf.Signature); err != nil || !bytes.Equal(leaf.RawIssuer, leaf.RawSubject) {
		t.Errorf("not self-signed: %v", err)
	}
	var ips []string
	for _, ip := range leaf.IPAddresses {
		ips = append(ips, ip.String())
	}
	if strings.Join(leaf.DNSNames, ",") != "localhost" || strings.Join(ips, ",") != "127.0.0.1,::1" {
		t.Errorf("names %v %v; want localhost, 127.0.0.1 and ::1 only", leaf.DNSNames, ips)
	}
	if days := leaf.NotAfter.Sub(leaf.NotBefore).Hours() / 24; days < certDays || days > certDays+1 {
		t.Errorf("valid for %.1f days; want %d", days, certDays)
	}
	pool := x509.NewCertPool()
	pool.AddCert(leaf)
	for _, name := range []string{"localhost", "127.0.0.1", "::1"} {
		if _, err := leaf.Verify(x509.VerifyOptions{Roots: pool, DNSName: name}); err != nil {
			t.Errorf("a client trusting the certificate refuses %s: %v", name, err)
		}
	}
	if _, err := leaf.Verify(x509.VerifyOptions{Roots: pool, DNSName: "example.org"}); err == nil {
		t.Error("the certificate is valid for example.org")
	}

	// A second run keeps it; --force replaces it.
	if _, talk, err := runCmd(runCert, "--data", dir); err != nil || !strings.Contains(talk, "already exists") {
		t.Errorf("second run: %v, %q", err, talk)
	}
	_, again, _ := loadCert(dir)
	if !again.Equal(leaf) {
		t.Error("the certificate changed without --force")
	}
	if _, _, err := runCmd(runCert, "--data", dir, "--force"); err != nil {
		t.Fatal(err)
	}
	_, forced, _ := loadCert(dir)
	if forced.Equal(leaf) {
		t.Error("--force kept the old certificate")
	}
}

func TestServerTLSCreatesAndRefusesExpired(t *testing.T) {
	dir := t.TempDir()
	now := time.Date(2030, 1, 2, 3, 4, 5, 0, time.UTC)
	cfg, leaf, created, err := serverTLS(dir, now)
	if err != nil || !created || cfg == nil || cfg.MinVersion != tls.VersionTLS12 {
		t.Fatalf("first use: created=%v, err=%v", created, err)
	}
	if _, _, created, err := serverTLS(dir, now.Add(time.Hour)); err != nil || created {
		t.Errorf("second use: created=%v, err=%v; want the same certificate", created, err)
	}
	if _, _, _, err := serverTLS(dir, leaf.NotAfter.Add(time.Hour)); err == nil || !strings.Contains(err.Error(), "expired") || !strings.Contains(err.Error(), "--force") {
		t.Errorf("an expired certificate: err = %v", err)
	}
	os.WriteFile(filepath.Join(dir, certDir, keyName), []byte("garbage"), 0o600)
	if _, _, _, err := serverTLS(dir, now); err == nil || !strings.Contains(err.Error(), "veer cert --force") {
		t.Errorf("a damaged key: err = %v", err)
	}
}

// TestServeTLS serves over HTTPS with the local certificate, as `veer serve
// --tls` does, and calls it as a client that trusts that certificate.
func TestServeTLS(t *testing.T) {
	dir := t.TempDir()
	cfg, leaf, _, err := serverTLS(dir, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	s, log := buildLive(t, &serverFlags{addr: "127.0.0.1:0", data: dir, tlsConfig: cfg})
	pool := x509.NewCertPool()
	pool.AddCert(leaf)
	client := &http.Client{Timeout: 10 * time.Second, Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}}}
	ls := (&liveServer{s: s, dir: dir, log: log, https: client}).listen(t)
	port := strconv.Itoa(ls.port())
	for _, c := range []struct{ url, want string }{
		{"https://localhost:" + port + "/v1/health", ""},
		{"https://127.0.0.1:" + port + "/addin/taskpane.html", "veer.js"},
		{"https://localhost:" + port + "/addin/manifest.xml", "https://localhost:" + port + "/addin/functions.json"},
	} {
		resp, err := client.Get(c.url)
		if err != nil {
			t.Fatalf("GET %s: %v", c.url, err)
		}
		body, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != 200 || !strings.Contains(string(body), c.want) {
			t.Errorf("GET %s: %d, %.120s; want %q", c.url, resp.StatusCode, body, c.want)
		}
	}
	// Plain HTTP on the TLS port is refused.
	if resp, err := http.Get("http://127.0.0.1:" + port + "/v1/health"); err == nil {
		if resp.StatusCode == 200 {
			t.Error("plain HTTP was served on the HTTPS port")
		}
		resp.Body.Close()
	}
}
