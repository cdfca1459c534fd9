package scan

import (
	"strings"
	"unicode/utf8"
)

// CleanText makes a string from a file or another user safe to print on a
// terminal: it removes escape sequences (CSI, OSC, DCS, SOS, PM, APC and
// two-byte ESC sequences, in their 7-bit and 8-bit forms), every other C0
// and C1 control character and DEL, and the Unicode bidirectional controls
// that can make text read differently from how it is stored. Tabs,
// newlines and carriage returns become spaces; invalid UTF-8 becomes U+FFFD.
// A scanner's comment can therefore never move another scanner's cursor,
// change their colours, set their window title or write to their clipboard.
func CleanText(s string) string {
	if isPlain(s) {
		return s
	}
	var b strings.Builder
	b.Grow(len(s))
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		switch {
		case r == utf8.RuneError && n <= 1:
			b.WriteRune(utf8.RuneError)
			i += max(n, 1)
		case r == 0x1b:
			i = skipEscape(s, i+1)
		case r == 0x9b: // 8-bit CSI
			i = skipCSI(s, i+n)
		case r == 0x90, r == 0x9d, r == 0x98, r == 0x9e, r == 0x9f: // 8-bit DCS, OSC, SOS, PM, APC
			i = skipString(s, i+n)
		case r == '\t', r == '\n', r == '\r':
			b.WriteByte(' ')
			i += n
		case r < 0x20, r == 0x7f, r >= 0x80 && r < 0xa0, isBidiControl(r):
			i += n
		default:
			b.WriteString(s[i : i+n])
			i += n
		}
	}
	return b.String()
}

// isPlain reports whether s is printable ASCII, the common case.
func isPlain(s string) bool {
	for i := 0; i < len(s); i++ {
		if c := s[i]; c < 0x20 || c >= 0x7f {
			return false
		}
	}
	return true
}

// isBidiControl reports the Unicode explicit directional formatting
// characters (Unicode Standard Annex #9, section 2) and the implicit marks.
func isBidiControl(r rune) bool {
	switch {
	case r >= 0x202a && r <= 0x202e, // LRE, RLE, PDF, LRO, RLO
		r >= 0x2066 && r <= 0x2069,            // LRI, RLI, FSI, PDI
		r == 0x200e, r == 0x200f, r == 0x061c: // LRM, RLM, ALM
		return true
	}
	return false
}

// skipEscape returns the index just past the escape sequence whose ESC
// ended right before i (ECMA-48, section 5.3).
func skipEscape(s string, i int) int {
	if i >= len(s) {
		return i
	}
	switch s[i] {
	case '[':
		return skipCSI(s, i+1)
	case ']', 'P', 'X', '^', '_': // OSC, DCS, SOS, PM, APC
		return skipString(s, i+1)
	}
	// nF sequences: intermediates 0x20–0x2F, then one final byte.
	for i < len(s) && s[i] >= 0x20 && s[i] <= 0x2f {
		i++
	}
	if i < len(s) && s[i] >= 0x30 && s[i] <= 0x7e {
		i++
	}
	return i
}

// skipCSI skips parameter bytes (0x30–0x3F), intermediates (0x20–0x2F) and
// the final byte (0x40–0x7E). A malformed sequence ends at the first byte
// outside those ranges, which is then handled as ordinary text.
func skipCSI(s string, i int) int {
	for i < len(s) && s[i] >= 0x20 && s[i] <= 0x3f {
		i++
	}
	if i < len(s) && s[i] >= 0x40 && s[i] <= 0x7e {
		i++
	}
	return i
}

// skipString skips a control string up to and including its terminator: BEL
// (as terminals accept for OSC), ESC \ or the 8-bit ST. An unterminated
// string runs to the end of s, which is the safe reading.
func skipString(s string, i int) int {
	for i < len(s) {
		switch {
		case s[i] == 0x07:
			return i + 1
		case s[i] == 0x1b && i+1 < len(s) && s[i+1] == '\\':
			return i + 2
		case strings.HasPrefix(s[i:], "\u009c"):
			return i + len("\u009c")
		}
		i++
	}
	return i
}
