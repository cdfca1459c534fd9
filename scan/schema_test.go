package scan

import (
	"bytes"
	"strings"
	"testing"

	"github.com/BurntSushi/toml"
	"github.com/tpcscan/tpcscan/scan/detector"
)

func TestDefaultSchemaValid(t *testing.T) {
	s := DefaultSchema()
	if err := s.Validate(); err != nil {
		t.Fatal(err)
	}
	// The issue asks for these classes and particles (common practice in
	// neutrino scanning: CC by lepton flavour, NC split by π0).
	for _, k := range []string{"numu-cc", "nue-cc", "nc-pi0", "nc-other", "cosmic", "none", "unusable"} {
		if _, ok := s.Class(k); !ok {
			t.Errorf("default schema lacks class %q", k)
		}
	}
	for i, c := range s.Classes {
		if want := string(rune('1' + i)); c.Hotkey != want {
			t.Errorf("class %s hotkey %q, want digit %q", c.Key, c.Hotkey, want)
		}
	}
	if len(s.Confidence) != 3 {
		t.Errorf("confidence has %d levels, want 3", len(s.Confidence))
	}
}

func TestSchemaTOMLRoundTrip(t *testing.T) {
	var buf bytes.Buffer
	if err := toml.NewEncoder(&buf).Encode(DefaultSchema()); err != nil {
		t.Fatal(err)
	}
	got, err := LoadSchema(&buf, "default.toml")
	if err != nil {
		t.Fatal(err)
	}
	if !got.Equal(DefaultSchema()) {
		t.Errorf("round trip changed the schema: %+v", got)
	}
}

func TestLoadSchemaErrors(t *testing.T) {
	const head = "name = \"s\"\nversion = 1\n"
	tests := []struct {
		name, in, want string
	}{
		{"no classes", head, "no classes"},
		{"no name", "version = 1\n[[classes]]\nkey = \"a\"\nname = \"A\"\n", "no name"},
		{"bad version", "name = \"s\"\nversion = 0\n[[classes]]\nkey = \"a\"\nname = \"A\"\n", "version must be 1"},
		{"duplicate key", head + "[[classes]]\nkey = \"a\"\nname = \"A\"\n[[classes]]\nkey = \"a\"\nname = \"B\"\n", `classes "a": key appears twice`},
		{"duplicate hotkey across fields", head + "[[classes]]\nkey = \"a\"\nname = \"A\"\nhotkey = \"1\"\n[[flags]]\nkey = \"f\"\nname = \"F\"\nhotkey = \"1\"\n", `hotkey "1" is already used by classes "a"`},
		{"long hotkey", head + "[[classes]]\nkey = \"a\"\nname = \"A\"\nhotkey = \"ab\"\n", "one printable character"},
		{"unknown field", head + "colour = \"red\"\n[[classes]]\nkey = \"a\"\nname = \"A\"\n", `unknown key "colour"`},
		{"unknown choice field", head + "[[classes]]\nkey = \"a\"\nname = \"A\"\nicon = \"x\"\n", `unknown key "classes.icon"`},
		{"bad key", head + "[[classes]]\nkey = \"Numu CC\"\nname = \"A\"\n", "lower-case letters"},
		{"empty name", head + "[[classes]]\nkey = \"a\"\n", "empty name"},
		{"escape in name", head + "[[classes]]\nkey = \"a\"\nname = \"\\u001b[31mA\"\n", "control characters"},
		{"bad toml", "name = \n", "read schema bad.toml"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := LoadSchema(strings.NewReader(tt.in), "bad.toml")
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Fatalf("err = %v, want it to contain %q", err, tt.want)
			}
			if !strings.Contains(err.Error(), "bad.toml") {
				t.Errorf("error %q does not name the file", err)
			}
		})
	}
}

func TestCheckLabel(t *testing.T) {
	s := DefaultSchema()
	box := Mark{Kind: MarkBox, Plane: "coll", Points: make([]detector.PlanePoint, 2)}
	tests := []struct {
		name   string
		l      Label
		submit bool
		want   string // "" = valid
	}{
		{"full", Label{Class: "numu-cc", Confidence: "3", Flags: []string{"not-contained"}, Marks: []Mark{box}}, true, ""},
		{"draft may be empty", Label{}, false, ""},
		{"submit needs class", Label{Confidence: "2"}, true, "no class"},
		{"submit needs confidence", Label{Class: "cosmic"}, true, "no confidence"},
		{"verify agree", Label{Verdict: "agree", Confidence: "3"}, true, ""},
		{"verify disagree needs class", Label{Verdict: "disagree", Confidence: "3"}, true, "correct class"},
		{"unknown class", Label{Class: "numu"}, false, `class "numu"`},
		{"unknown flag", Label{Flags: []string{"odd"}}, false, `flag "odd"`},
		{"twice flag", Label{Flags: []string{"dead-wires", "dead-wires"}}, false, "given twice"},
		{"track needs particle", Label{Marks: []Mark{{Kind: MarkTrack, Plane: "coll", Points: make([]detector.PlanePoint, 2)}}}, false, "track particle"},
		{"vertex one point", Label{Marks: []Mark{{Kind: MarkVertex, Plane: "coll", Points: make([]detector.PlanePoint, 2)}}}, false, "vertex has 2 points"},
		{"unknown kind", Label{Marks: []Mark{{Kind: "circle", Plane: "coll"}}}, false, "unknown kind"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := s.CheckLabel(tt.l, tt.submit)
			if tt.want == "" {
				if err != nil {
					t.Fatal(err)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Fatalf("err = %v, want %q", err, tt.want)
			}
		})
	}
}

func FuzzLoadSchema(f *testing.F) {
	var buf bytes.Buffer
	toml.NewEncoder(&buf).Encode(DefaultSchema())
	f.Add(buf.String())
	f.Add("name = \"x\"\nversion = 2\n[[classes]]\nkey = \"a\"\nname = \"A\"\nhotkey = \"1\"\n")
	f.Fuzz(func(t *testing.T, in string) {
		s, err := LoadSchema(strings.NewReader(in), "fuzz.toml")
		if err != nil {
			return
		}
		if err := s.Validate(); err != nil {
			t.Fatalf("loaded schema fails Validate: %v", err)
		}
		if len(s.Classes) == 0 {
			t.Fatal("loaded schema without classes")
		}
	})
}
