package serve

import (
	"bufio"
	"bytes"
	"crypto/rsa"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	gossh "golang.org/x/crypto/ssh"
)

// Role says what a scanner may do in a session.
type Role string

// Roles of the scanners file.
const (
	RoleScanner     Role = "scanner"     // scans the events assigned to them
	RoleCoordinator Role = "coordinator" // also sees progress, adjudication and the dashboard
)

// Scanner is one line of the scanners file: a person, their role, and one
// of their public keys.
type Scanner struct {
	Name    string
	Role    Role
	Key     gossh.PublicKey
	Comment string // the key's comment, for the server's logs only
	Line    int    // line in the scanners file, for messages
}

// Roster maps authorised public keys to scanners. It is read once and is
// safe for concurrent use because it is never modified.
type Roster struct {
	byKey map[string]Scanner // key: the key's wire encoding
	list  []Scanner
}

// Limits of the scanners file, so that a wrong file given by mistake (a
// disk image, a log) fails fast with a clear message.
const (
	maxNameLen  = 32
	maxLineLen  = 16 << 10 // an RSA-16384 key is about 2.9 kB of base64
	minRSABits  = 2048     // common practice: NIST SP 800-57 Part 1 rejects shorter RSA keys after 2013
	maxRosterSz = 10000
)

// LoadRoster reads a scanners file.
func LoadRoster(path string) (*Roster, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read scanners file: %w", err)
	}
	defer f.Close()
	return ParseRoster(f, path)
}

// ParseRoster reads the scanners file format: one authorised key per line,
//
//	NAME ROLE KEYTYPE BASE64 [COMMENT]
//
// where NAME is 1–32 letters, digits, '.', '_' or '-' (starting with a
// letter or digit), ROLE is "scanner" or "coordinator" and the rest is a
// public key as in an OpenSSH authorized_keys line, without options. Blank
// lines and lines starting with '#' are ignored. A person may have several
// keys (one line each, same role); a key may appear only once. Errors name
// the file and line.
func ParseRoster(r io.Reader, name string) (*Roster, error) {
	ro := &Roster{byKey: map[string]Scanner{}}
	roles := map[string]Scanner{} // first line of each name, to check roles agree
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 4096), maxLineLen)
	line := 0
	for sc.Scan() {
		line++
		text := strings.TrimSpace(sc.Text())
		if text == "" || strings.HasPrefix(text, "#") {
			continue
		}
		s, err := parseScannerLine(text)
		if err != nil {
			return nil, fmt.Errorf("%s:%d: %w", name, line, err)
		}
		s.Line = line
		wire := string(s.Key.Marshal())
		if prev, dup := ro.byKey[wire]; dup {
			return nil, fmt.Errorf("%s:%d: key already given to %q on line %d", name, line, prev.Name, prev.Line)
		}
		if first, seen := roles[s.Name]; seen && first.Role != s.Role {
			return nil, fmt.Errorf("%s:%d: %q is %s here but %s on line %d", name, line, s.Name, s.Role, first.Role, first.Line)
		} else if !seen {
			roles[s.Name] = s
		}
		if len(ro.list) == maxRosterSz {
			return nil, fmt.Errorf("%s:%d: more than %d keys", name, line, maxRosterSz)
		}
		ro.byKey[wire] = s
		ro.list = append(ro.list, s)
	}
	if err := sc.Err(); err != nil {
		if errors.Is(err, bufio.ErrTooLong) {
			return nil, fmt.Errorf("%s:%d: line longer than %d bytes", name, line+1, maxLineLen)
		}
		return nil, fmt.Errorf("read %s: %w", name, err)
	}
	if len(ro.list) == 0 {
		return nil, fmt.Errorf("%s: no scanners: add lines 'NAME ROLE ssh-ed25519 AAAA...'", name)
	}
	return ro, nil
}

// parseScannerLine parses one non-blank, non-comment line.
func parseScannerLine(text string) (Scanner, error) {
	for _, r := range text {
		if r < 0x20 && r != '\t' || r >= 0x7f && r <= 0x9f {
			return Scanner{}, fmt.Errorf("control character %q in line", r)
		}
	}
	fields := strings.Fields(text)
	if len(fields) < 4 {
		return Scanner{}, fmt.Errorf("want NAME ROLE KEYTYPE BASE64 [COMMENT], got %d fields", len(fields))
	}
	if err := checkName(fields[0]); err != nil {
		return Scanner{}, err
	}
	role := Role(fields[1])
	if role != RoleScanner && role != RoleCoordinator {
		return Scanner{}, fmt.Errorf("role %q: want %q or %q", fields[1], RoleScanner, RoleCoordinator)
	}
	keyText := strings.Join(fields[2:], " ")
	key, comment, options, rest, err := gossh.ParseAuthorizedKey([]byte(keyText))
	if err != nil {
		return Scanner{}, fmt.Errorf("public key of %q: %w", fields[0], err)
	}
	if len(options) > 0 {
		return Scanner{}, fmt.Errorf("public key of %q: key options (%s) are not supported", fields[0], strings.Join(options, ","))
	}
	if len(bytes.TrimSpace(rest)) > 0 {
		return Scanner{}, fmt.Errorf("public key of %q: one key per line", fields[0])
	}
	if err := checkKey(key); err != nil {
		return Scanner{}, fmt.Errorf("public key of %q: %w", fields[0], err)
	}
	return Scanner{Name: fields[0], Role: role, Key: key, Comment: comment}, nil
}

// checkName keeps names plain: they are shown on other scanners' screens
// and written into labels and exports.
func checkName(n string) error {
	if len(n) > maxNameLen {
		return fmt.Errorf("name %.40q: longer than %d characters", n, maxNameLen)
	}
	for i, r := range n {
		ok := r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' ||
			i > 0 && (r == '.' || r == '_' || r == '-')
		if !ok {
			return fmt.Errorf("name %q: use letters, digits, '.', '_' or '-', starting with a letter or digit", n)
		}
	}
	return nil
}

// checkKey refuses certificates (they need a CA policy we do not have) and
// weak RSA keys.
func checkKey(k gossh.PublicKey) error {
	switch k.Type() {
	case gossh.KeyAlgoED25519, gossh.KeyAlgoECDSA256, gossh.KeyAlgoECDSA384, gossh.KeyAlgoECDSA521,
		gossh.KeyAlgoSKED25519, gossh.KeyAlgoSKECDSA256:
		return nil
	case gossh.KeyAlgoRSA:
		ck, ok := k.(gossh.CryptoPublicKey)
		if !ok {
			return errors.New("unreadable RSA key")
		}
		if pk, ok := ck.CryptoPublicKey().(*rsa.PublicKey); !ok || pk.N.BitLen() < minRSABits {
			return fmt.Errorf("RSA key shorter than %d bits", minRSABits)
		}
		return nil
	default:
		return fmt.Errorf("key type %s is not accepted (use ssh-ed25519, ecdsa or rsa)", k.Type())
	}
}

// Lookup returns the scanner a public key belongs to.
func (r *Roster) Lookup(key gossh.PublicKey) (Scanner, bool) {
	if r == nil || key == nil {
		return Scanner{}, false
	}
	s, ok := r.byKey[string(key.Marshal())]
	return s, ok
}

// Scanners returns every line of the roster in file order.
func (r *Roster) Scanners() []Scanner {
	return append([]Scanner(nil), r.list...)
}
