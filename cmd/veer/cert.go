package main

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/sha256"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"errors"
	"fmt"
	"io/fs"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"strings"
	"time"

	"veer/internal/atomicfile"
	"veer/server"
)

// The local certificate that lets `veer serve --tls` speak HTTPS on
// loopback, as spreadsheet hosts require for add-ins. It is a self-signed
// certificate for localhost, 127.0.0.1 and ::1 — no certificate authority
// is created, so trusting it lets the user's computer trust this one
// certificate and nothing else.
const (
	certDir  = "tls"
	certName = "localhost.crt"
	keyName  = "localhost.key"
	// certDays is the validity. 825 days is the longest some systems
	// accept for a server certificate trusted by a user (common practice).
	certDays = 825
)

func certPaths(dataDir string) (cert, key string) {
	return filepath.Join(dataDir, certDir, certName), filepath.Join(dataDir, certDir, keyName)
}

// createCert makes a new ECDSA P-256 key and a self-signed certificate for
// the loopback names, valid from an hour before now for certDays, and
// writes them into dataDir/tls (the key with mode 0600). It replaces
// existing files.
func createCert(dataDir string, now time.Time) (*x509.Certificate, error) {
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		return nil, err
	}
	serial, err := rand.Int(rand.Reader, new(big.Int).Lsh(big.NewInt(1), 127))
	if err != nil {
		return nil, err
	}
	tmpl := &x509.Certificate{
		SerialNumber:          serial,
		Subject:               pkix.Name{CommonName: "veer on localhost", Organization: []string{"veer (this computer only)"}},
		NotBefore:             now.Add(-time.Hour),
		NotAfter:              now.Add(certDays * 24 * time.Hour),
		KeyUsage:              x509.KeyUsageDigitalSignature,
		ExtKeyUsage:           []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
		BasicConstraintsValid: true,
		IsCA:                  false,
		DNSNames:              []string{"localhost"},
		IPAddresses:           []net.IP{net.ParseIP("127.0.0.1"), net.IPv6loopback},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		return nil, err
	}
	pkcs8, err := x509.MarshalPKCS8PrivateKey(key)
	if err != nil {
		return nil, err
	}
	dir := filepath.Join(dataDir, certDir)
	if err := os.MkdirAll(dir, 0o700); err != nil {
		return nil, err
	}
	certPath, keyPath := certPaths(dataDir)
	if err := atomicfile.WriteFile(keyPath, pem.EncodeToMemory(&pem.Block{Type: "PRIVATE KEY", Bytes: pkcs8}), 0o600); err != nil {
		return nil, err
	}
	if err := atomicfile.WriteFile(certPath, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o644); err != nil {
		return nil, err
	}
	return x509.ParseCertificate(der)
}

// loadCert reads the certificate and key from dataDir/tls.
func loadCert(dataDir string) (tls.Certificate, *x509.Certificate, error) {
	certPath, keyPath := certPaths(dataDir)
	pair, err := tls.LoadX509KeyPair(certPath, keyPath)
	if err != nil {
		return tls.Certificate{}, nil, err
	}
	leaf, err := x509.ParseCertificate(pair.Certificate[0])
	if err != nil {
		return tls.Certificate{}, nil, err
	}
	pair.Leaf = leaf
	return pair, leaf, nil
}

// serverTLS returns the TLS configuration for `veer serve --tls`, creating
// the certificate first if there is none (created reports that, so the user
// can be told to trust it).
func serverTLS(dataDir string, now time.Time) (cfg *tls.Config, leaf *x509.Certificate, created bool, err error) {
	pair, leaf, err := loadCert(dataDir)
	if errors.Is(err, fs.ErrNotExist) {
		if _, err = createCert(dataDir, now); err != nil {
			return nil, nil, false, fmt.Errorf("creating the local certificate: %v", err)
		}
		created = true
		pair, leaf, err = loadCert(dataDir)
	}
	if err != nil {
		return nil, nil, false, fmt.Errorf("reading the local certificate in %s: %v (run 'veer cert --force' to make a new one)", filepath.Join(dataDir, certDir), err)
	}
	if now.After(leaf.NotAfter) {
		return nil, nil, false, fmt.Errorf("the local certificate expired on %s: run 'veer cert --force' and trust the new one", leaf.NotAfter.Format("2006-01-02"))
	}
	cfg = &tls.Config{MinVersion: tls.VersionTLS12, Certificates: []tls.Certificate{pair}}
	return cfg, leaf, created, nil
}

func fingerprint(c *x509.Certificate) string {
	sum := sha256.Sum256(c.Raw)
	parts := make([]string, len(sum))
	for i, b := range sum {
		parts[i] = fmt.Sprintf("%02X", b)
	}
	return strings.Join(parts, ":")
}

func runCert(e *env, args []string) error {
	fs := newFlags(e, "cert", "[--data DIR] [--force]")
	data := fs.String("data", "", "the server's data folder (default: "+defaultDataDir()+")")
	force := fs.Bool("force", false, "replace an existing certificate (you must trust the new one)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	dir := *data
	if dir == "" {
		var err error
		if dir, err = server.DefaultDataDir(); err != nil {
			return err
		}
	}
	certPath, _ := certPaths(dir)
	if _, leaf, err := loadCert(dir); err == nil && !*force {
		fmt.Fprintln(e.stdout, certPath)
		fmt.Fprintf(e.stderr, "A certificate already exists (valid until %s, SHA-256 %s).\nUse --force to replace it.\n", leaf.NotAfter.Format("2006-01-02"), fingerprint(leaf))
		certHelp(e, certPath)
		return nil
	}
	leaf, err := createCert(dir, time.Now())
	if err != nil {
		return err
	}
	fmt.Fprintln(e.stdout, certPath)
	fmt.Fprintf(e.stderr, "Created a certificate for localhost, 127.0.0.1 and ::1, valid until %s.\nSHA-256 fingerprint: %s\n", leaf.NotAfter.Format("2006-01-02"), fingerprint(leaf))
	certHelp(e, certPath)
	return nil
}

func certHelp(e *env, certPath string) {
	fmt.Fprintf(e.stderr, `Trust it once so the spreadsheet accepts https://localhost (see addin/web/README.md):
  Windows: certutil -user -addstore Root "%[1]s"
  macOS:   security add-trusted-cert -r trustRoot -k ~/Library/Keychains/login.keychain-db "%[1]s"
  Linux:   sudo cp "%[1]s" /usr/local/share/ca-certificates/veer-localhost.crt && sudo update-ca-certificates
Then run 'veer serve --tls'. The key next to it must stay private.
`, certPath)
}
