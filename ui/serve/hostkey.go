package serve

import (
	"crypto/ed25519"
	"crypto/rand"
	"encoding/pem"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"

	gossh "golang.org/x/crypto/ssh"
)

// LoadHostKey reads the server's private host key from path, or generates
// an Ed25519 key there (mode 0600, parent folder 0700 if it is created) when
// the file does not exist. It refuses a key file that group or others may
// read or write: a leaked host key lets anyone impersonate the server.
func LoadHostKey(path string) (signer gossh.Signer, created bool, err error) {
	fi, err := os.Stat(path)
	switch {
	case errors.Is(err, fs.ErrNotExist):
		signer, err := createHostKey(path)
		return signer, err == nil, err
	case err != nil:
		return nil, false, fmt.Errorf("host key: %w", err)
	case !fi.Mode().IsRegular():
		return nil, false, fmt.Errorf("host key %s: not a regular file", path)
	case fi.Mode().Perm()&0o077 != 0:
		return nil, false, fmt.Errorf("host key %s: mode %04o lets group or others read it; run 'chmod 600 %s'",
			path, fi.Mode().Perm(), path)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, false, fmt.Errorf("host key: %w", err)
	}
	signer, err = gossh.ParsePrivateKey(data)
	if err != nil {
		return nil, false, fmt.Errorf("host key %s: %w", path, err)
	}
	return signer, false, nil
}

// createHostKey writes a new Ed25519 key atomically (temporary file, then
// rename) so that a crash never leaves half a key behind.
func createHostKey(path string) (gossh.Signer, error) {
	_, priv, err := ed25519.GenerateKey(rand.Reader)
	if err != nil {
		return nil, fmt.Errorf("generate host key: %w", err)
	}
	block, err := gossh.MarshalPrivateKey(priv, "tpcscan host key")
	if err != nil {
		return nil, fmt.Errorf("encode host key: %w", err)
	}
	dir := filepath.Dir(path)
	if err := os.MkdirAll(dir, 0o700); err != nil {
		return nil, fmt.Errorf("create host key folder: %w", err)
	}
	tmp, err := os.CreateTemp(dir, ".hostkey-*") // CreateTemp uses mode 0600
	if err != nil {
		return nil, fmt.Errorf("create host key: %w", err)
	}
	defer os.Remove(tmp.Name()) // no-op after the rename
	if err := pem.Encode(tmp, block); err != nil {
		tmp.Close()
		return nil, fmt.Errorf("write host key: %w", err)
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return nil, fmt.Errorf("write host key: %w", err)
	}
	if err := tmp.Close(); err != nil {
		return nil, fmt.Errorf("write host key: %w", err)
	}
	// Link rather than rename: it fails if another process created the key
	// meanwhile, and then we must not overwrite that key.
	if err := os.Link(tmp.Name(), path); err != nil {
		return nil, fmt.Errorf("store host key: %w", err)
	}
	signer, err := gossh.NewSignerFromKey(priv)
	if err != nil {
		return nil, fmt.Errorf("host key: %w", err)
	}
	return signer, nil
}
