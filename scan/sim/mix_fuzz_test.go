package sim

import (
	"strings"
	"testing"
)

// FuzzParseMix checks that ParseMix never panics and that whatever it
// accepts either validates or is rejected by Validate with a message.
func FuzzParseMix(f *testing.F) {
	for _, s := range []string{
		"numu-cc=0.4,nue-cc=0.15,nc-pi0=0.15,nc-other=0.15,cosmic=0.15",
		"cosmic=1", "numu-cc=1e309", "nc-pi0=NaN", "=,=", "numu-cc=-0", " numu-cc = 2 ,", "a=b=c",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		mix, err := ParseMix(s)
		if err != nil {
			if !strings.Contains(err.Error(), "mix entry") {
				t.Fatalf("error %q does not name the entry", err)
			}
			return
		}
		if err := (Options{Mix: mix}).Validate(); err != nil && err.Error() == "" {
			t.Fatal("empty validation error")
		}
	})
}
