package render

import (
	"fmt"
	"strings"
)

var tierNames = [...]string{
	TierTrueColor: "truecolor",
	Tier256:       "256",
	Tier16:        "16",
	TierMono:      "mono",
	TierBraille:   "braille",
}

// String returns the tier's name as ParseTier accepts it.
func (t Tier) String() string {
	if t >= 0 && int(t) < len(tierNames) {
		return tierNames[t]
	}
	return fmt.Sprintf("Tier(%d)", int(t))
}

// TierNames lists the names ParseTier accepts, richest first.
func TierNames() []string { return append([]string(nil), tierNames[:]...) }

// ParseTier reads a tier name, as given to a --color flag: truecolor (or
// 24bit), 256, 16, mono (or none), braille. "auto" is not a tier: callers
// resolve it with DetectTier.
func ParseTier(s string) (Tier, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "truecolor", "24bit", "24-bit":
		return TierTrueColor, nil
	case "256":
		return Tier256, nil
	case "16":
		return Tier16, nil
	case "mono", "none":
		return TierMono, nil
	case "braille":
		return TierBraille, nil
	}
	return 0, fmt.Errorf("colour tier %q: want one of %s", s, strings.Join(tierNames[:], ", "))
}

// HasColor reports whether the tier draws colours (and half-block cells).
func (t Tier) HasColor() bool { return t == TierTrueColor || t == Tier256 || t == Tier16 }

// DetectTier works out a terminal's tier from its environment, as getenv
// reports it (os.Getenv locally, the session's environment over SSH):
// NO_COLOR set and non-empty (no-color.org) or TERM=dumb → mono;
// COLORTERM=truecolor or 24bit, or a TERM ending in -direct → 24-bit; a
// TERM naming 256color → 256; anything else → 16. SSH does not pass
// COLORTERM on by default, so remote sessions often need --color.
func DetectTier(getenv func(string) string) Tier {
	term := strings.ToLower(getenv("TERM"))
	if getenv("NO_COLOR") != "" || term == "dumb" {
		return TierMono
	}
	switch strings.ToLower(getenv("COLORTERM")) {
	case "truecolor", "24bit":
		return TierTrueColor
	}
	if strings.HasSuffix(term, "-direct") { // terminfo's direct-colour entries
		return TierTrueColor
	}
	if strings.Contains(term, "256color") {
		return Tier256
	}
	return Tier16
}
