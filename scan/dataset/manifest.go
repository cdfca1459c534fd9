package dataset

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"slices"
	"strings"

	"github.com/BurntSushi/toml"

	"github.com/tpcscan/tpcscan/scan/detector"
)

// ManifestName is the manifest's file name inside a dataset folder.
const ManifestName = "tpcscan.toml"

// FormatVersion is the manifest format this package reads and writes.
const FormatVersion = 1

// maxManifest bounds the manifest we read: 10,000 events take about 1 MB.
const maxManifest = 256 << 20

// manifest is the decoded tpcscan.toml.
type manifest struct {
	Format   int            `toml:"format"`
	Detector toml.Primitive `toml:"detector"`
	Events   []eventEntry   `toml:"events"`
}

// eventEntry is one [[events]] table. Paths are relative to the dataset
// folder, with '/' separators.
type eventEntry struct {
	ID     string `toml:"id"`
	Run    int64  `toml:"run,omitempty"`
	Subrun int64  `toml:"subrun,omitempty"`
	Event  int64  `toml:"event,omitempty"`
	Note   string `toml:"note,omitempty"`
	// Exactly one source of charge: one .npy per plane, one .npz with an
	// array per plane, or sparse hits.
	Planes map[string]string `toml:"planes,omitempty"`
	NPZ    string            `toml:"npz,omitempty"`
	Hits   string            `toml:"hits,omitempty"`
	// Optional crop offsets per plane role, and pixel truth per plane role.
	Wire0      map[string]int    `toml:"wire0,omitempty"`
	Tick0      map[string]int    `toml:"tick0,omitempty"`
	PixelTruth map[string]string `toml:"pixel_truth,omitempty"`
	Truth      string            `toml:"truth,omitempty"`
}

// writtenManifest is what Writer encodes: the detector inline.
type writtenManifest struct {
	Format   int                `toml:"format"`
	Detector *detector.Detector `toml:"detector"`
	Events   []eventEntry       `toml:"events"`
}

// parseManifest decodes and checks a manifest. name is the manifest's path
// for messages; loadDetector reads a detector file named in the manifest.
// Every problem found is returned, joined.
func parseManifest(r io.Reader, name string, loadDetector func(rel string) (*detector.Detector, error)) (*detector.Detector, []eventEntry, error) {
	data, err := io.ReadAll(io.LimitReader(r, maxManifest+1))
	if err != nil {
		return nil, nil, fmt.Errorf("read %s: %w", name, err)
	}
	if len(data) > maxManifest {
		return nil, nil, fmt.Errorf("read %s: manifest is larger than %d MiB", name, maxManifest>>20)
	}
	var m manifest
	md, err := toml.NewDecoder(bytes.NewReader(data)).Decode(&m)
	if err != nil {
		return nil, nil, fmt.Errorf("read %s: %w", name, err)
	}
	if !md.IsDefined("format") {
		return nil, nil, fmt.Errorf("read %s: no format key (this reader knows format = %d)", name, FormatVersion)
	}
	if m.Format != FormatVersion {
		return nil, nil, fmt.Errorf("read %s: format %d, this tpcscan reads format %d", name, m.Format, FormatVersion)
	}
	det, err := manifestDetector(md, m.Detector, loadDetector)
	if err != nil {
		return nil, nil, fmt.Errorf("read %s: %w", name, err)
	}
	var errs []error
	errs = append(errs, unknownKeys(md, data)...)
	seen := make(map[string]int, len(m.Events))
	for i := range m.Events {
		e := &m.Events[i]
		if j, dup := seen[e.ID]; dup && e.ID != "" {
			errs = append(errs, &Error{Event: e.ID, File: ManifestName,
				Err: fmt.Errorf("duplicate event id: [[events]] number %d and %d", j+1, i+1)})
			continue
		}
		seen[e.ID] = i
		for _, err := range checkEntry(e, det) {
			errs = append(errs, &Error{Event: e.ID, File: ManifestName, Err: err})
		}
	}
	if len(errs) > 0 {
		return nil, nil, &ManifestError{Name: name, Problems: errs}
	}
	return det, m.Events, nil
}

// unknownKeys reports keys the manifest format does not have, naming the
// event for keys inside [[events]] tables.
func unknownKeys(md toml.MetaData, data []byte) []error {
	und := md.Undecoded()
	if len(und) == 0 {
		return nil
	}
	var raw struct {
		Events []map[string]any `toml:"events"`
	}
	_, rawErr := toml.Decode(string(data), &raw)
	var errs []error
	for _, k := range und {
		if len(k) < 2 || k[0] != "events" || rawErr != nil {
			errs = append(errs, fmt.Errorf("unknown key %q", k.String()))
			continue
		}
		for _, e := range raw.Events {
			if hasPath(e, k[1:]) {
				id, _ := e["id"].(string)
				errs = append(errs, &Error{Event: id, File: ManifestName, Err: fmt.Errorf("unknown key %q", k.String())})
			}
		}
	}
	return errs
}

// hasPath reports whether the nested key path exists in m.
func hasPath(m map[string]any, path []string) bool {
	v, ok := m[path[0]]
	if !ok || len(path) == 1 {
		return ok
	}
	sub, isMap := v.(map[string]any)
	return isMap && hasPath(sub, path[1:])
}

// manifestDetector resolves the detector key: an inline table, the name of
// a built-in detector, or the relative path of a detector TOML file.
func manifestDetector(md toml.MetaData, p toml.Primitive, load func(string) (*detector.Detector, error)) (*detector.Detector, error) {
	if !md.IsDefined("detector") {
		return nil, errors.New(`no detector: give detector = "tarn", a relative path to a detector TOML, or a [detector] table`)
	}
	switch t := md.Type("detector"); t {
	case "Hash":
		var d detector.Detector
		if err := md.PrimitiveDecode(p, &d); err != nil {
			return nil, fmt.Errorf("detector: %w", err)
		}
		if err := d.Validate(); err != nil {
			return nil, fmt.Errorf("detector: %w", err)
		}
		return &d, nil
	case "String":
		var s string
		if err := md.PrimitiveDecode(p, &s); err != nil {
			return nil, fmt.Errorf("detector: %w", err)
		}
		if s == "tarn" {
			return detector.Tarn(), nil
		}
		if err := checkPath(s); err != nil {
			return nil, fmt.Errorf("detector %q: %w", s, err)
		}
		return load(s)
	default:
		return nil, fmt.Errorf("detector must be a name, a path or a table, not a %s", strings.ToLower(t))
	}
}

// checkPath rejects manifest paths that could leave the dataset folder (the
// loader also refuses symbolic links that lead out of it).
func checkPath(p string) error {
	switch {
	case p == "":
		return errors.New("empty path")
	case strings.Contains(p, `\`):
		return errors.New(`path uses '\': write paths with '/'`)
	case strings.HasPrefix(p, "/") || filepath.IsAbs(p):
		return errors.New("absolute path: paths must be relative to the dataset folder")
	case !filepath.IsLocal(filepath.FromSlash(p)):
		return errors.New("path escapes the dataset folder")
	}
	return nil
}

// validID reports whether id is usable as an event ID (and, for the
// writer, as a folder name): 1–128 letters, digits, '.', '_', '-' or ':',
// not starting with '.'.
func validID(id string) bool {
	if id == "" || len(id) > 128 || id[0] == '.' {
		return false
	}
	for _, c := range []byte(id) {
		ok := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '.' || c == '_' || c == '-' || c == ':'
		if !ok {
			return false
		}
	}
	return true
}

// ManifestError lists every problem found in a manifest; per-event
// problems are *Error values.
type ManifestError struct {
	Name     string // the manifest's path
	Problems []error
}

func (e *ManifestError) Error() string {
	var b strings.Builder
	for i, p := range e.Problems {
		if i > 0 {
			b.WriteByte('\n')
		}
		fmt.Fprintf(&b, "read %s: %v", e.Name, p)
	}
	return b.String()
}

func (e *ManifestError) Unwrap() []error { return e.Problems }

// checkEntry checks one event's entry against the detector without
// touching its files.
func checkEntry(e *eventEntry, det *detector.Detector) []error {
	if !validID(e.ID) {
		return []error{fmt.Errorf("event id %q: want 1–128 letters, digits, '.', '_', '-' or ':', not starting with '.'", e.ID)}
	}
	var errs []error
	add := func(format string, args ...any) { errs = append(errs, fmt.Errorf(format, args...)) }
	sources := 0
	for _, s := range []bool{len(e.Planes) > 0, e.NPZ != "", e.Hits != ""} {
		if s {
			sources++
		}
	}
	if sources != 1 {
		add("give exactly one of planes, npz or hits (found %d)", sources)
	}
	if len(e.Planes) > 0 {
		errs = append(errs, checkRoles("planes", e.Planes, det, true)...)
	}
	if len(e.PixelTruth) > 0 {
		if len(e.Planes) == 0 {
			add("pixel_truth goes with planes (an npz holds its truth arrays itself)")
		} else {
			errs = append(errs, checkRoles("pixel_truth", e.PixelTruth, det, false)...)
		}
	}
	for _, offs := range []struct {
		key string
		m   map[string]int
	}{{"wire0", e.Wire0}, {"tick0", e.Tick0}} {
		for _, role := range sortedKeys(offs.m) {
			if det.PlaneIndex(detector.Role(role)) < 0 {
				add("%s: detector has no plane %q", offs.key, role)
			} else if offs.m[role] < 0 {
				add("%s.%s is %d: offsets are not negative", offs.key, role, offs.m[role])
			}
		}
	}
	if e.Hits != "" && (len(e.Wire0) > 0 || len(e.Tick0) > 0) {
		add("wire0 and tick0 do not apply to hits, which carry detector wires and ticks")
	}
	for _, p := range e.paths() {
		if err := checkPath(p); err != nil {
			add("%s: %v", p, err)
		}
	}
	return errs
}

// checkRoles checks a per-plane map's keys: known roles, and all of them if
// complete is set.
func checkRoles(key string, m map[string]string, det *detector.Detector, complete bool) []error {
	var errs []error
	for _, role := range sortedKeys(m) {
		if det.PlaneIndex(detector.Role(role)) < 0 {
			errs = append(errs, fmt.Errorf("%s: detector has no plane %q", key, role))
		}
	}
	if complete {
		for _, p := range det.Planes {
			if _, ok := m[string(p.Role)]; !ok {
				errs = append(errs, fmt.Errorf("%s: no file for plane %s", key, p.Role))
			}
		}
	}
	return errs
}

// paths lists every file the entry names, in a stable order.
func (e *eventEntry) paths() []string {
	var out []string
	for _, m := range []map[string]string{e.Planes, e.PixelTruth} {
		for _, k := range sortedKeys(m) {
			out = append(out, m[k])
		}
	}
	for _, p := range []string{e.NPZ, e.Hits, e.Truth} {
		if p != "" {
			out = append(out, p)
		}
	}
	return out
}

func sortedKeys[V any](m map[string]V) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	return keys
}
