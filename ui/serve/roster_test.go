package serve

import (
	"crypto/ed25519"
	"crypto/rand"
	"crypto/rsa"
	"os"
	"path/filepath"
	"strings"
	"testing"

	gossh "golang.org/x/crypto/ssh"
)

// rfcKey is the public key of RFC 8032 section 7.1, TEST 1, written as an
// OpenSSH authorized_keys entry; rfcFingerprint is what OpenSSH 9.2's
// `ssh-keygen -lf` prints for it.
const (
	rfcKey         = "ssh-ed25519 AAAAC3NzaC1lZDI1NTE5AAAAINdamAGCsQq31Uv+08lkBzoO4XLz2qYjJa8CGmj3B1Ea rfc8032-test1"
	rfcFingerprint = "SHA256:bbXpuKG6zhzdmnxq256TlqzFBzRl2f6OOg722cYNbU8"
)

// newKey returns a fresh Ed25519 signer and its authorized_keys text.
func newKey(t testing.TB) (gossh.Signer, string) {
	t.Helper()
	_, priv, err := ed25519.GenerateKey(rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	s, err := gossh.NewSignerFromKey(priv)
	if err != nil {
		t.Fatal(err)
	}
	return s, strings.TrimSpace(string(gossh.MarshalAuthorizedKey(s.PublicKey())))
}

func TestParseRosterReferenceKey(t *testing.T) {
	ro, err := ParseRoster(strings.NewReader("# crew\n\nada coordinator "+rfcKey+"\n"), "crew.txt")
	if err != nil {
		t.Fatal(err)
	}
	list := ro.Scanners()
	if len(list) != 1 {
		t.Fatalf("got %d scanners, want 1", len(list))
	}
	s := list[0]
	if s.Name != "ada" || s.Role != RoleCoordinator || s.Line != 3 || s.Comment != "rfc8032-test1" {
		t.Errorf("got %+v", s)
	}
	// Source: fingerprint printed by OpenSSH 9.2 ssh-keygen -lf for the RFC 8032 TEST 1 key.
	if fp := gossh.FingerprintSHA256(s.Key); fp != rfcFingerprint {
		t.Errorf("fingerprint %s, want %s", fp, rfcFingerprint)
	}
	if got, ok := ro.Lookup(s.Key); !ok || got.Name != "ada" {
		t.Errorf("Lookup = %+v, %v", got, ok)
	}
}

func TestParseRosterSeveralKeys(t *testing.T) {
	_, k1 := newKey(t)
	_, k2 := newKey(t)
	s3, k3 := newKey(t)
	text := "bo scanner " + k1 + "\nbo scanner " + k2 + " second laptop\ncy scanner " + k3 + "\n"
	ro, err := ParseRoster(strings.NewReader(text), "crew")
	if err != nil {
		t.Fatal(err)
	}
	if n := len(ro.Scanners()); n != 3 {
		t.Fatalf("%d entries, want 3", n)
	}
	if got, ok := ro.Lookup(s3.PublicKey()); !ok || got.Name != "cy" {
		t.Errorf("Lookup(k3) = %+v, %v", got, ok)
	}
	stranger, _ := newKey(t)
	if _, ok := ro.Lookup(stranger.PublicKey()); ok {
		t.Error("unknown key found")
	}
}

func TestParseRosterErrors(t *testing.T) {
	_, k := newKey(t)
	_, k2 := newKey(t)
	small, err := rsa.GenerateKey(rand.Reader, 1024)
	if err != nil {
		t.Fatal(err)
	}
	smallPub, _ := gossh.NewPublicKey(&small.PublicKey)
	smallText := strings.TrimSpace(string(gossh.MarshalAuthorizedKey(smallPub)))
	tests := []struct {
		name, text, want string
	}{
		{"empty", "# nobody\n", "crew: no scanners"},
		{"too few fields", "ada scanner\n", "crew:1: want NAME ROLE"},
		{"bad role", "ada admin " + k + "\n", `crew:1: role "admin"`},
		{"bad name", "-ada scanner " + k + "\n", `crew:1: name "-ada"`},
		{"long name", strings.Repeat("a", 33) + " scanner " + k + "\n", "longer than 32"},
		{"bad key", "ada scanner ssh-ed25519 AAAAnotbase64!!\n", `crew:1: public key of "ada"`},
		{"options", "ada scanner no-pty " + k + "\n", "key options"},
		{"dup key", "ada scanner " + k + "\nbo scanner " + k + "\n", `crew:2: key already given to "ada" on line 1`},
		{"role clash", "ada scanner " + k + "\nada coordinator " + k2 + "\n", `crew:2: "ada" is coordinator here but scanner on line 1`},
		{"control", "ada scanner " + k + " \x1b[31mred\n", "crew:1: control character"},
		{"weak rsa", "ada scanner " + smallText + "\n", "shorter than 2048 bits"},
		{"long line", "ada scanner ssh-ed25519 " + strings.Repeat("A", maxLineLen) + "\n", "crew:1: line longer"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseRoster(strings.NewReader(tc.text), "crew")
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("err = %v, want it to contain %q", err, tc.want)
			}
		})
	}
}

func TestLoadRosterMissing(t *testing.T) {
	_, err := LoadRoster(filepath.Join(t.TempDir(), "none"))
	if err == nil || !strings.Contains(err.Error(), "read scanners file") {
		t.Errorf("err = %v", err)
	}
}

func FuzzParseRoster(f *testing.F) {
	f.Add("ada coordinator " + rfcKey + "\n")
	f.Add("# comment\n\nbo scanner " + rfcKey + "\n")
	f.Add("ada scanner ssh-ed25519 AAAA\n")
	f.Add("ada\tscanner\t" + rfcKey + "\r\n")
	f.Add("x scanner from=\"*\" " + rfcKey)
	f.Fuzz(func(t *testing.T, text string) {
		ro, err := ParseRoster(strings.NewReader(text), "fuzz")
		if err != nil {
			if !strings.HasPrefix(err.Error(), "fuzz") {
				t.Errorf("error does not name the file: %v", err)
			}
			return
		}
		for _, s := range ro.Scanners() {
			if checkName(s.Name) != nil || (s.Role != RoleScanner && s.Role != RoleCoordinator) {
				t.Errorf("accepted bad entry %+v", s)
			}
			if got, ok := ro.Lookup(s.Key); !ok || got.Line != s.Line {
				t.Errorf("entry on line %d not found by its key", s.Line)
			}
		}
	})
}

func TestLoadHostKey(t *testing.T) {
	path := filepath.Join(t.TempDir(), "keys", "host_ed25519")
	s1, created, err := LoadHostKey(path)
	if err != nil || !created {
		t.Fatalf("first start: created=%v err=%v", created, err)
	}
	fi, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if fi.Mode().Perm() != 0o600 {
		t.Errorf("key mode %04o, want 0600", fi.Mode().Perm())
	}
	if s1.PublicKey().Type() != gossh.KeyAlgoED25519 {
		t.Errorf("key type %s", s1.PublicKey().Type())
	}
	s2, created, err := LoadHostKey(path)
	if err != nil || created {
		t.Fatalf("second start: created=%v err=%v", created, err)
	}
	if gossh.FingerprintSHA256(s1.PublicKey()) != gossh.FingerprintSHA256(s2.PublicKey()) {
		t.Error("host key changed between starts")
	}
	if err := os.Chmod(path, 0o640); err != nil {
		t.Fatal(err)
	}
	if _, _, err := LoadHostKey(path); err == nil || !strings.Contains(err.Error(), "chmod 600") {
		t.Errorf("group-readable key: err = %v", err)
	}
}

func TestLoadHostKeyCorrupt(t *testing.T) {
	path := filepath.Join(t.TempDir(), "host")
	if err := os.WriteFile(path, []byte("not a key"), 0o600); err != nil {
		t.Fatal(err)
	}
	if _, _, err := LoadHostKey(path); err == nil || !strings.Contains(err.Error(), path) {
		t.Errorf("err = %v, want it to name %s", err, path)
	}
}
