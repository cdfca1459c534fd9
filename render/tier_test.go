package render

import (
	"strings"
	"testing"
)

// Conventions checked: NO_COLOR set to any non-empty value disables colour
// (no-color.org); COLORTERM=truecolor or 24bit announces 24-bit colour and
// a TERM ending in 256color the xterm 256 palette (common practice);
// TERM=dumb supports no escape sequences (terminfo's "dumb" entry); a TERM
// ending in -direct names ncurses' direct-colour entries (from memory).
func TestDetectTier(t *testing.T) {
	cases := []struct {
		env  map[string]string
		want Tier
	}{
		{map[string]string{"TERM": "xterm-256color", "COLORTERM": "truecolor"}, TierTrueColor},
		{map[string]string{"TERM": "xterm-256color", "COLORTERM": "24bit"}, TierTrueColor},
		{map[string]string{"TERM": "xterm-256color"}, Tier256},
		{map[string]string{"TERM": "xterm-direct"}, TierTrueColor},
		{map[string]string{"TERM": "screen-256color"}, Tier256},
		{map[string]string{"TERM": "xterm"}, Tier16},
		{map[string]string{"TERM": "linux"}, Tier16},
		{map[string]string{}, Tier16},
		{map[string]string{"TERM": "dumb"}, TierMono},
		{map[string]string{"TERM": "dumb", "COLORTERM": "truecolor"}, TierMono},
		{map[string]string{"TERM": "xterm-256color", "COLORTERM": "truecolor", "NO_COLOR": "1"}, TierMono},
		{map[string]string{"TERM": "xterm-256color", "NO_COLOR": ""}, Tier256}, // empty means unset
	}
	for _, c := range cases {
		got := DetectTier(func(k string) string { return c.env[k] })
		if got != c.want {
			t.Errorf("DetectTier(%v) = %v, want %v", c.env, got, c.want)
		}
	}
}

func TestParseTier(t *testing.T) {
	for _, tier := range []Tier{TierTrueColor, Tier256, Tier16, TierMono, TierBraille} {
		got, err := ParseTier(tier.String())
		if err != nil || got != tier {
			t.Errorf("ParseTier(%q) = %v, %v", tier.String(), got, err)
		}
	}
	for in, want := range map[string]Tier{"24bit": TierTrueColor, " TrueColor ": TierTrueColor, "none": TierMono} {
		if got, err := ParseTier(in); err != nil || got != want {
			t.Errorf("ParseTier(%q) = %v, %v; want %v", in, got, err, want)
		}
	}
	for _, bad := range []string{"", "auto", "8", "colour", "256color"} {
		if _, err := ParseTier(bad); err == nil || !strings.Contains(err.Error(), "truecolor") {
			t.Errorf("ParseTier(%q): error %v, want one listing the tiers", bad, err)
		}
	}
	if s := Tier(42).String(); s != "Tier(42)" {
		t.Errorf("unknown tier prints %q", s)
	}
}

func FuzzParseTier(f *testing.F) {
	for _, s := range []string{"truecolor", "256", "16", "mono", "braille", "24-bit", "", "\x1b[31m"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		tier, err := ParseTier(s)
		if err != nil {
			return
		}
		if again, err := ParseTier(tier.String()); err != nil || again != tier {
			t.Fatalf("%q parsed as %v, which does not round-trip", s, tier)
		}
	})
}
