// Package campaign holds the rules of a scanning campaign as pure
// functions: which events go in (Build), in what order each scanner sees
// them (Positions, StartOffset), and when an event needs one more pass
// (NeedsExtraPass). Stores call these rules so every backend assigns work
// the same way. It also summarises progress and exports labels: records
// with marks in wire/tick and cm, and per-plane pixel masks.
package campaign

import (
	"hash/fnv"
	"math/rand/v2"

	"github.com/tpcscan/tpcscan/scan"
)

// Positions returns a permutation of 0..n-1 drawn from seed: event i of a
// campaign sits at position Positions(seed, n)[i] of the shuffled ring.
func Positions(seed int64, n int) []int {
	r := rand.New(rand.NewPCG(uint64(seed), 0x74706373)) // stream constant: "tpcs"
	return r.Perm(n)
}

// StartOffset is where on the shuffled ring of n events a scanner starts.
// A scanner's order is the ring read from that offset, wrapping round: a
// shuffled order per scanner that needs nothing stored per scanner, lets a
// store find the next event with one index seek, and spreads scanners over
// the ring so they seldom race for the same event.
func StartOffset(seed int64, scanner string, n int) int {
	if n <= 0 {
		return 0
	}
	h := fnv.New64a()
	var b [8]byte
	for i := range b {
		b[i] = byte(uint64(seed) >> (8 * i))
	}
	h.Write(b[:])
	h.Write([]byte(scanner))
	return int(h.Sum64() % uint64(n))
}

// EffectiveClass is the class a pass's label asserts: the scanner's class,
// or in a verify campaign the selection's class when the scanner agreed.
func EffectiveClass(l scan.Label, sel *scan.Selection) string {
	if l.Verdict == "agree" && sel != nil {
		return sel.Class
	}
	return l.Class
}

// NeedsExtraPass is the adaptive rule: once the first k round-1 passes of
// an event are submitted (classes, in submission order) and they do not
// all name the same class, the event gets one more pass — once (extras
// counts the passes already added by this rule).
func NeedsExtraPass(k int, classes []string, extras int) bool {
	if extras > 0 || k < 2 || len(classes) < k {
		return false
	}
	for _, c := range classes[1:k] {
		if c != classes[0] {
			return true
		}
	}
	return false
}
