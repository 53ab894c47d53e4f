package server

import (
	"crypto/rand"
	"crypto/subtle"
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"runtime"
	"strings"

	"veer/internal/atomicfile"
)

// TokenFile is the name of the install token file inside the data directory.
const TokenFile = "token"

// TokenHeader is the HTTP header that carries the install token.
const TokenHeader = "X-Veer-Token"

// ReadOrCreateToken returns the per-install token kept in dataDir/token,
// creating the directory (0700) and the token (32 random bytes, hex, file
// mode 0600) on first use. Functions that write models need it: HTTP callers
// send it in the X-Veer-Token header, websocket callers in the "token" field
// of a message. Add-ins obtain it the way a local user would: the user runs
// `veer token` (which prints this file) and pastes it into the add-in's
// settings. A token file readable by group or others is tightened to 0600.
func ReadOrCreateToken(dataDir string) (string, error) {
	if err := os.MkdirAll(dataDir, 0o700); err != nil {
		return "", fmt.Errorf("creating data directory: %w", err)
	}
	path := filepath.Join(dataDir, TokenFile)
	for attempt := 0; attempt < 3; attempt++ {
		tok, err := readToken(path)
		if err == nil {
			return tok, nil
		}
		if !errors.Is(err, fs.ErrNotExist) {
			return "", err
		}
		var raw [32]byte
		if _, err := rand.Read(raw[:]); err != nil {
			return "", err
		}
		tok = hex.EncodeToString(raw[:])
		// Link a complete temporary file into place, so two processes
		// starting together agree on one token and nobody reads half a file.
		err = atomicfile.Create(path, []byte(tok+"\n"), 0o600)
		if err == nil {
			return tok, nil
		}
		if !errors.Is(err, fs.ErrExist) {
			return "", fmt.Errorf("creating token: %w", err)
		}
	}
	return "", errors.New("could not create or read the token file")
}

func readToken(path string) (string, error) {
	st, err := os.Stat(path)
	if err != nil {
		return "", err
	}
	if runtime.GOOS != "windows" && st.Mode().Perm()&0o077 != 0 {
		if err := os.Chmod(path, 0o600); err != nil {
			return "", fmt.Errorf("token file %s is readable by others and cannot be fixed: %w", path, err)
		}
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return "", err
	}
	tok := strings.TrimSpace(string(b))
	if len(tok) < 32 {
		return "", fmt.Errorf("token file %s is damaged (too short); delete it and restart to make a new token", path)
	}
	return tok, nil
}

// tokenOK compares a presented token with the install token in constant time.
func tokenOK(want, got string) bool {
	if got == "" || want == "" {
		return false
	}
	return subtle.ConstantTimeCompare([]byte(want), []byte(got)) == 1
}
