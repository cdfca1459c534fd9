package scan

import (
	"strings"
	"testing"
	"unicode/utf8"
)

// Sequences follow ECMA-48 (5th edition, 1991), sections 5.3–5.6 and 8.3,
// and the xterm control sequence documentation for OSC 0/8/52.
func TestCleanText(t *testing.T) {
	tests := []struct {
		name, in, want string
	}{
		{"plain", "νμ CC, clear vertex", "νμ CC, clear vertex"},
		{"colour SGR", "\x1b[31mred\x1b[0m text", "red text"},
		{"cursor move and clear", "a\x1b[2J\x1b[10;20Hb", "ab"},
		{"private mode", "x\x1b[?1049hy", "xy"},
		{"OSC title BEL", "\x1b]0;owned\x07ok", "ok"},
		{"OSC hyperlink ST", "\x1b]8;;http://x\x1b\\link\x1b]8;;\x1b\\", "link"},
		{"OSC 52 clipboard", "\x1b]52;c;ZWNobyBoaQ==\x07done", "done"},
		{"DCS", "a\x1bPq#0;2;0;0;0\x1b\\b", "ab"},
		{"APC", "a\x1b_Gf=100;AAAA\x1b\\b", "ab"},
		{"unterminated OSC", "a\x1b]0;title", "a"},
		{"single ESC seq", "a\x1b7b\x1b8c\x1bcd", "abcd"},
		{"charset nF", "a\x1b(0b", "ab"},
		{"trailing ESC", "abc\x1b", "abc"},
		{"8-bit CSI", "a\u009b31mb", "ab"},
		{"8-bit OSC", "a\u009d0;t\u009cb", "ab"},
		{"C0 controls", "a\x00b\x07c\x08d\x7fe", "abcde"},
		{"whitespace", "one\ttwo\nthree\rfour", "one two three four"},
		{"C1 control", "a\u0085b", "ab"},
		{"bidi override", "admin\u202egnp.exe", "admingnp.exe"},
		{"bidi isolate", "a\u2066b\u2069c", "abc"},
		{"invalid utf8", "a\xffb", "a\ufffdb"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := CleanText(tt.in); got != tt.want {
				t.Errorf("CleanText(%q) = %q, want %q", tt.in, got, tt.want)
			}
		})
	}
}

func FuzzCleanText(f *testing.F) {
	for _, s := range []string{"", "plain", "\x1b[31mx", "\x1b]0;t\x07", "\u009b1m", "\u202e", "\xff\xfe", "\x1bP\x1b\\", "a\tb\nc"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		out := CleanText(s)
		if !utf8.ValidString(out) {
			t.Fatalf("CleanText(%q) = %q: invalid UTF-8", s, out)
		}
		for _, r := range out {
			if r < 0x20 || r == 0x7f || (r >= 0x80 && r < 0xa0) || isBidiControl(r) {
				t.Fatalf("CleanText(%q) = %q: keeps control %U", s, out, r)
			}
		}
		if CleanText(out) != out {
			t.Fatalf("CleanText not idempotent on %q", s)
		}
		if len(out) > 3*len(s) {
			t.Fatalf("CleanText(%q) grew to %d bytes", s, len(out))
		}
		if strings.ContainsRune(out, 0x1b) {
			t.Fatalf("ESC survived in %q", out)
		}
	})
}
