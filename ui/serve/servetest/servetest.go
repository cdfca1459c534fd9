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

// Stream collects a session's output and lets a reader wait for text.
type Stream struct {
	mu     sync.Mutex
	buf    bytes.Buffer
	cursor int           // WaitFor searches from here
	grew   chan struct{} // closed and replaced on every write
}

// NewStream returns an empty stream.
func NewStream() *Stream { return &Stream{grew: make(chan struct{})} }

func (s *Stream) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.buf.Write(p)
	close(s.grew)
	s.grew = make(chan struct{})
	return len(p), nil
}

// WaitFor waits until want appears after the previous match and moves
// past it. The error quotes the end of the output.
func (s *Stream) WaitFor(want string, d time.Duration) error {
	_, err := s.wait(d, func(b []byte) (int, int) {
		i := bytes.Index(b, []byte(want))
		return i, len(want)
	}, want)
	return err
}

// WaitForFunc waits until find reports a match (start index and length,
// or -1) in the output after the previous match, and returns the match.
func (s *Stream) WaitForFunc(d time.Duration, what string, find func([]byte) (int, int)) ([]byte, error) {
	return s.wait(d, find, what)
}

func (s *Stream) wait(d time.Duration, find func([]byte) (int, int), what string) ([]byte, error) {
	deadline := time.NewTimer(d)
	defer deadline.Stop()
	for {
		s.mu.Lock()
		rest := s.buf.Bytes()[s.cursor:]
		i, n := find(rest)
		var match []byte
		if i >= 0 {
			match = append(match, rest[i:i+n]...)
			s.cursor += i + n
		}
		grew, tail := s.grew, s.buf.Bytes()[max(0, s.buf.Len()-300):]
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

// Trim forgets the output before the last match, so that a long run keeps
// only what it has not read yet.
func (s *Stream) Trim() {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.buf.Next(s.cursor)
	rest := append([]byte(nil), s.buf.Bytes()...)
	s.buf.Reset()
	s.buf.Write(rest)
	s.cursor = 0
}
