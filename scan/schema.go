package scan

import (
	"errors"
	"fmt"
	"io"
	"os"
	"regexp"
	"strings"
	"unicode"

	"github.com/BurntSushi/toml"
)

// DefaultSchema returns the built-in schema for neutrino scanning.
//
// Hotkeys: classes take the digits 1–7; particle types, flags and
// confidence levels take capital letters (particles M P I E G O, flags
// V N K W D, confidence Z X C for 1 2 3), so that lower-case letters,
// arrows and punctuation stay free for the display. Every hotkey is unique
// across the whole schema.
func DefaultSchema() Schema {
	return Schema{
		Name:    "neutrino",
		Version: 1,
		Classes: []Choice{
			{Key: "numu-cc", Name: "νμ CC", Hotkey: "1"},
			{Key: "nue-cc", Name: "νe CC", Hotkey: "2"},
			{Key: "nc-pi0", Name: "NC π0", Hotkey: "3"},
			{Key: "nc-other", Name: "NC other", Hotkey: "4"},
			{Key: "cosmic", Name: "cosmic only", Hotkey: "5"},
			{Key: "none", Name: "no interaction", Hotkey: "6"},
			{Key: "unusable", Name: "unusable", Hotkey: "7"},
		},
		Particles: []Choice{
			{Key: "mu", Name: "μ", Hotkey: "M"},
			{Key: "p", Name: "p", Hotkey: "P"},
			{Key: "pi", Name: "π±", Hotkey: "I"},
			{Key: "e", Name: "e", Hotkey: "E"},
			{Key: "gamma", Name: "γ", Hotkey: "G"},
			{Key: "other", Name: "other", Hotkey: "O"},
		},
		Flags: []Choice{
			{Key: "vertex-uncertain", Name: "vertex uncertain", Hotkey: "V"},
			{Key: "not-contained", Name: "not contained", Hotkey: "N"},
			{Key: "overlapping-cosmic", Name: "overlapping cosmic", Hotkey: "K"},
			{Key: "dead-wires", Name: "dead or noisy wires nearby", Hotkey: "W"},
			{Key: "two-interactions", Name: "two interactions", Hotkey: "D"},
		},
		Confidence: []Choice{
			{Key: "1", Name: "1 unsure", Hotkey: "Z"},
			{Key: "2", Name: "2 probable", Hotkey: "X"},
			{Key: "3", Name: "3 certain", Hotkey: "C"},
		},
	}
}

// LoadSchema reads a schema in TOML from r; name (usually the file path)
// is used in errors. Unknown keys are refused so that a typo does not
// silently drop a field. The format:
//
//	name = "my-schema"
//	version = 1
//	[[classes]]
//	key = "numu-cc"
//	name = "νμ CC"
//	hotkey = "1"
//	# [[particles]], [[flags]] and [[confidence]] (lowest first) alike
func LoadSchema(r io.Reader, name string) (Schema, error) {
	var s Schema
	md, err := toml.NewDecoder(r).Decode(&s)
	if err != nil {
		return Schema{}, fmt.Errorf("read schema %s: %w", name, err)
	}
	if und := md.Undecoded(); len(und) > 0 {
		return Schema{}, fmt.Errorf("read schema %s: unknown key %q", name, und[0].String())
	}
	if err := s.Validate(); err != nil {
		return Schema{}, fmt.Errorf("read schema %s: %w", name, err)
	}
	return s, nil
}

// LoadSchemaFile reads a schema from a TOML file.
func LoadSchemaFile(path string) (Schema, error) {
	f, err := os.Open(path)
	if err != nil {
		return Schema{}, fmt.Errorf("read schema: %w", err)
	}
	defer f.Close()
	return LoadSchema(f, path)
}

var choiceKey = regexp.MustCompile(`^[a-z0-9][a-z0-9_-]*$`)

// Validate checks that the schema can be used: a name and positive version,
// at least one class, keys that are short lower-case identifiers unique
// within their field, display names without control characters, and
// single-character hotkeys unique across the whole schema.
func (s Schema) Validate() error {
	var errs []error
	if strings.TrimSpace(s.Name) == "" {
		errs = append(errs, errors.New("schema has no name"))
	}
	if s.Version < 1 {
		errs = append(errs, fmt.Errorf("version must be 1 or more, got %d", s.Version))
	}
	if len(s.Classes) == 0 {
		errs = append(errs, errors.New("no classes: a schema needs at least one topology class"))
	}
	hotkeys := map[string]string{}
	for _, f := range s.fields() {
		keys := map[string]bool{}
		for i, c := range f.choices {
			where := fmt.Sprintf("%s[%d]", f.name, i)
			if c.Key != "" {
				where = fmt.Sprintf("%s %q", f.name, c.Key)
			}
			switch {
			case !choiceKey.MatchString(c.Key):
				errs = append(errs, fmt.Errorf("%s: key must be lower-case letters, digits, '-' or '_' (at most 40), got %q", where, c.Key))
			case len(c.Key) > 40:
				errs = append(errs, fmt.Errorf("%s: key longer than 40 characters", where))
			case keys[c.Key]:
				errs = append(errs, fmt.Errorf("%s: key appears twice", where))
			}
			keys[c.Key] = true
			if strings.TrimSpace(c.Name) == "" {
				errs = append(errs, fmt.Errorf("%s: empty name", where))
			} else if CleanText(c.Name) != c.Name {
				errs = append(errs, fmt.Errorf("%s: name contains control characters", where))
			}
			if c.Hotkey == "" {
				continue
			}
			if r := []rune(c.Hotkey); len(r) != 1 || !unicode.IsGraphic(r[0]) || unicode.IsSpace(r[0]) {
				errs = append(errs, fmt.Errorf("%s: hotkey must be one printable character, got %q", where, c.Hotkey))
			} else if prev, ok := hotkeys[c.Hotkey]; ok {
				errs = append(errs, fmt.Errorf("%s: hotkey %q is already used by %s", where, c.Hotkey, prev))
			}
			hotkeys[c.Hotkey] = where
		}
	}
	return errors.Join(errs...)
}

type schemaField struct {
	name    string
	choices []Choice
}

func (s Schema) fields() []schemaField {
	return []schemaField{{"classes", s.Classes}, {"particles", s.Particles}, {"flags", s.Flags}, {"confidence", s.Confidence}}
}

// Class returns the class choice with the given key.
func (s Schema) Class(key string) (Choice, bool) { return find(s.Classes, key) }

// Particle returns the particle choice with the given key.
func (s Schema) Particle(key string) (Choice, bool) { return find(s.Particles, key) }

func find(cs []Choice, key string) (Choice, bool) {
	for _, c := range cs {
		if c.Key == key {
			return c, true
		}
	}
	return Choice{}, false
}

// Equal reports whether two schemas are the same in every field.
func (s Schema) Equal(t Schema) bool {
	if s.Name != t.Name || s.Version != t.Version {
		return false
	}
	a, b := s.fields(), t.fields()
	for i := range a {
		if len(a[i].choices) != len(b[i].choices) {
			return false
		}
		for j := range a[i].choices {
			if a[i].choices[j] != b[i].choices[j] {
				return false
			}
		}
	}
	return true
}

// CheckLabel checks a label against the schema: every class, flag,
// confidence and particle key must exist and marks must be well formed.
// With submit set, the fields a finished label needs must be present: a
// class (unless the label is a verify "agree") and a confidence when the
// schema has confidence levels.
func (s Schema) CheckLabel(l Label, submit bool) error {
	var errs []error
	if l.Class != "" {
		if _, ok := s.Class(l.Class); !ok {
			errs = append(errs, fmt.Errorf("class %q is not in schema %s", l.Class, s.Name))
		}
	}
	flagKeys := map[string]bool{}
	for _, f := range l.Flags {
		if _, ok := find(s.Flags, f); !ok {
			errs = append(errs, fmt.Errorf("flag %q is not in schema %s", f, s.Name))
		}
		if flagKeys[f] {
			errs = append(errs, fmt.Errorf("flag %q given twice", f))
		}
		flagKeys[f] = true
	}
	if l.Confidence != "" {
		if _, ok := find(s.Confidence, l.Confidence); !ok {
			errs = append(errs, fmt.Errorf("confidence %q is not in schema %s", l.Confidence, s.Name))
		}
	}
	switch l.Verdict {
	case "", "agree", "disagree":
	default:
		errs = append(errs, fmt.Errorf("verdict must be agree or disagree, got %q", l.Verdict))
	}
	for i, m := range l.Marks {
		if err := s.checkMark(m); err != nil {
			errs = append(errs, fmt.Errorf("mark %d: %w", i+1, err))
		}
	}
	if submit {
		if l.Class == "" && l.Verdict != "agree" {
			errs = append(errs, errors.New("no class chosen"))
		}
		if l.Verdict == "disagree" && l.Class == "" {
			errs = append(errs, errors.New("disagree needs the correct class"))
		}
		if len(s.Confidence) > 0 && l.Confidence == "" {
			errs = append(errs, errors.New("no confidence chosen"))
		}
	}
	return errors.Join(errs...)
}

func (s Schema) checkMark(m Mark) error {
	want := map[MarkKind][2]int{MarkBox: {2, 2}, MarkVertex: {1, 1}, MarkTrack: {2, 1 << 12}}
	n, ok := want[m.Kind]
	if !ok {
		return fmt.Errorf("unknown kind %q", m.Kind)
	}
	if len(m.Points) < n[0] || len(m.Points) > n[1] {
		return fmt.Errorf("%s has %d points", m.Kind, len(m.Points))
	}
	if m.Plane == "" {
		return fmt.Errorf("%s has no plane", m.Kind)
	}
	if m.Kind == MarkTrack {
		if _, ok := s.Particle(m.Particle); !ok {
			return fmt.Errorf("track particle %q is not in schema %s", m.Particle, s.Name)
		}
	} else if m.Particle != "" {
		return fmt.Errorf("%s carries a particle type", m.Kind)
	}
	return nil
}
