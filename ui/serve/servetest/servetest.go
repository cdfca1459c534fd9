// Package servetest holds SSH client helpers for testing the scanning
// station's server: dial with a key, open a terminal session as `ssh -t`
// does, and wait for text in what the server draws. Waits have deadlines
// for failures only; nothing here sleeps.
package servetest

import (
	"bytes"
	"fmt"
	"io"
	"net"
	"sync"
	"time"

	gossh "golang.org/x/crypto/ssh"
)

// Dial opens an SSH connection to addr, checking the server's host key.
// The raw TCP connection is returned too, so that a test can drop it.
func Dial(addr string, hostKey gossh.PublicKey, user string, timeout time.Duration, auth ...gossh.AuthMethod) (*gossh.Client, net.Conn, error) {
	conn, err := net.DialTimeout("tcp", addr, timeout)
	if err != nil {
		return nil, nil, err
	}
	cc, chans, reqs, err := gossh.NewClientConn(conn, addr, &gossh.ClientConfig{
		User: user, Auth: auth, HostKeyCallback: gossh.FixedHostKey(hostKey), Timeout: timeout,
	})
	if err != nil {
		conn.Close()
		return nil, nil, err
	}
	return gossh.NewClient(cc, chans, reqs), conn, nil
}

// Terminal is a client session with a pty.
type Terminal struct {
	Session *gossh.Session
	In      io.WriteCloser
	Out     *Stream
}

// Open starts a shell session with a pty of the given type and size; env
// is sent first, as OpenSSH's SendEnv does.
func Open(c *gossh.Client, term string, env map[string]string, w, h int) (*Terminal, error) {
	s, err := c.NewSession()
	if err != nil {
		return nil, err
	}
	for k, v := range env {
		if err := s.Setenv(k, v); err != nil {
			return nil, fmt.Errorf("setenv %s: %w", k, err)
		}
	}
	if err := s.RequestPty(term, h, w, gossh.TerminalModes{}); err != nil {
		return nil, err
	}
	in, err := s.StdinPipe()
	if err != nil {
		return nil, err
	}
	out := NewStream()
	s.Stdout, s.Stderr = out, out
	if err := s.Shell(); err != nil {
		return nil, err
	}
	return &Terminal{Session: s, In: in, Out: out}, nil
}

// Stream collects a session's output and lets a reader wait for text,
// either in the raw bytes or in the text with escape sequences removed
// (a UI may style each character on its own).
type Stream struct {
	mu     sync.Mutex
	buf    bytes.Buffer
	cursor int // WaitFor searches from here
	plain  bytes.Buffer
	pcur   int // WaitForText searches from here
	strip  Stripper
	grew   chan struct{} // closed and replaced on every write
}

// NewStream returns an empty stream.
func NewStream() *Stream { return &Stream{grew: make(chan struct{})} }

func (s *Stream) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.buf.Write(p)
	s.plain.Write(s.strip.Strip(p))
	close(s.grew)
	s.grew = make(chan struct{})
	return len(p), nil
}

// WaitForText waits until want appears in the text without escape
// sequences, after the previous WaitForText match.
func (s *Stream) WaitForText(want string, d time.Duration) error {
	_, err := s.wait(d, true, func(b []byte) (int, int) {
		return bytes.Index(b, []byte(want)), len(want)
	}, want)
	return err
}

// WaitForTextFunc is WaitForFunc on the text without escape sequences.
func (s *Stream) WaitForTextFunc(d time.Duration, what string, find func([]byte) (int, int)) ([]byte, error) {
	return s.wait(d, true, find, what)
}

// Stripper removes ANSI escape sequences (ECMA-48 CSI, OSC, DCS, SOS, PM,
// APC and two-byte ESC sequences) from a byte stream split anywhere.
type Stripper struct{ state int }

// Strip returns p without escape sequences, carrying state across calls.
func (st *Stripper) Strip(p []byte) []byte {
	const (
		text = iota
		esc
		csi
		str
		strEsc
	)
	out := make([]byte, 0, len(p))
	for _, b := range p {
		switch st.state {
		case text:
			if b == 0x1b {
				st.state = esc
			} else {
				out = append(out, b)
			}
		case esc:
			switch b {
			case '[':
				st.state = csi
			case ']', 'P', 'X', '^', '_':
				st.state = str
			default:
				st.state = text
			}
		case csi:
			if b >= 0x40 && b <= 0x7e {
				st.state = text
			}
		case str:
			if b == 0x07 {
				st.state = text
			} else if b == 0x1b {
				st.state = strEsc
			}
		case strEsc:
			st.state = str
			if b == '\\' {
				st.state = text
			}
		}
	}
	return out
}

// WaitFor waits until want appears in the raw output after the previous
// WaitFor match and moves past it. The error quotes the end of the output.
func (s *Stream) WaitFor(want string, d time.Duration) error {
	_, err := s.wait(d, false, func(b []byte) (int, int) {
		return bytes.Index(b, []byte(want)), len(want)
	}, want)
	return err
}

// WaitForFunc waits until find reports a match (start index and length,
// or -1) in the raw output after the previous match, and returns it.
func (s *Stream) WaitForFunc(d time.Duration, what string, find func([]byte) (int, int)) ([]byte, error) {
	return s.wait(d, false, find, what)
}

func (s *Stream) wait(d time.Duration, plain bool, find func([]byte) (int, int), what string) ([]byte, error) {
	deadline := time.NewTimer(d)
	defer deadline.Stop()
	buf, cur := &s.buf, &s.cursor
	if plain {
		buf, cur = &s.plain, &s.pcur
	}
	for {
		s.mu.Lock()
		rest := buf.Bytes()[*cur:]
		i, n := find(rest)
		var match []byte
		if i >= 0 {
			match = append(match, rest[i:i+n]...)
			*cur += i + n
		}
		grew, tail := s.grew, buf.Bytes()[max(0, buf.Len()-300):]
		s.mu.Unlock()
		if i >= 0 {
			return match, nil
		}
		select {
		case <-grew:
		case <-deadline.C:
			return nil, fmt.Errorf("no %q in the output after %s; it ends with %q", what, d, tail)
		}
	}
}

// Len returns the number of bytes received so far.
func (s *Stream) Len() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.buf.Len()
}

// String returns everything received so far.
func (s *Stream) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.buf.String()
}

// Trim forgets the output before the last matches, so that a long run
// keeps only what it has not read yet.
func (s *Stream) Trim() {
	s.mu.Lock()
	defer s.mu.Unlock()
	for _, b := range []struct {
		buf *bytes.Buffer
		cur *int
	}{{&s.buf, &s.cursor}, {&s.plain, &s.pcur}} {
		rest := append([]byte(nil), b.buf.Bytes()[*b.cur:]...)
		b.buf.Reset()
		b.buf.Write(rest)
		*b.cur = 0
	}
}
