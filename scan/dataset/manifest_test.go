package dataset

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan/detector"
)

func noDetectorFile(string) (*detector.Detector, error) {
	return nil, fmt.Errorf("no detector files here")
}

func TestManifestRejects(t *testing.T) {
	planes := `planes = { ind1 = "a.npy", ind2 = "b.npy", coll = "c.npy" }`
	for _, c := range []struct {
		name, text, want string
	}{
		{"no format", `detector = "tarn"`, "no format key"},
		{"newer format", "format = 2\ndetector = \"tarn\"", "format 2, this tpcscan reads format 1"},
		{"no detector", "format = 1", "no detector"},
		{"detector number", "format = 1\ndetector = 3", "not a integer"},
		{"detector escapes", "format = 1\ndetector = \"../det.toml\"", "escapes the dataset folder"},
		{"bad inline detector", "format = 1\n[detector]\nname = \"x\"\n", "drift_length_cm must be a positive number"},
		{"unknown top key", "format = 1\ndetector = \"tarn\"\ncolour = 3", `unknown key "colour"`},
		{"unknown event key", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"z\"\n" + planes + "\n[[events]]\nid = \"a\"\nplane = 3\n" + planes, `read tpcscan.toml: event a: tpcscan.toml: unknown key "events.plane"`},
		{"toml syntax", "format = 1\ndetector = \"tarn\"\n[[events]\n", "toml"},
		{"duplicate id", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\n" + planes + "\n[[events]]\nid = \"a\"\n" + planes, "event a: tpcscan.toml: duplicate event id"},
		{"bad id", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a b\"\n" + planes, `event id "a b"`},
		{"no source", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\n", "exactly one of planes, npz or hits (found 0)"},
		{"two sources", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\nhits = \"h.csv\"\nnpz = \"a.npz\"\n", "found 2"},
		{"missing plane", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\nplanes = { ind1 = \"a.npy\", coll = \"c.npy\" }\n", "no file for plane ind2"},
		{"unknown role", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\nplanes = { ind1 = \"a\", ind2 = \"b\", coll = \"c\", ind3 = \"d\" }\n", `detector has no plane "ind3"`},
		{"dotdot", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\nnpz = \"x/../../a.npz\"\n", "x/../../a.npz: path escapes the dataset folder"},
		{"absolute", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\nnpz = \"/etc/a.npz\"\n", "absolute path"},
		{"backslash", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\nnpz = \"x\\\\a.npz\"\n", "write paths with '/'"},
		{"negative offset", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\nnpz = \"a.npz\"\ntick0 = { coll = -4 }\n", "tick0.coll is -4"},
		{"offsets with hits", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\nhits = \"a.csv\"\nwire0 = { coll = 4 }\n", "do not apply to hits"},
		{"pixel truth with npz", "format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"a\"\nnpz = \"a.npz\"\npixel_truth = { coll = \"t.npy\" }\n", "pixel_truth goes with planes"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := parseManifest(strings.NewReader(c.text), ManifestName, noDetectorFile)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("err = %v, want %q", err, c.want)
			}
		})
	}
}

func TestManifestDetectorFile(t *testing.T) {
	dir := t.TempDir()
	f, err := os.Create(filepath.Join(dir, "tiny.toml"))
	if err != nil {
		t.Fatal(err)
	}
	if err := tiny().WriteTOML(f); err != nil {
		t.Fatal(err)
	}
	f.Close()
	manifest := "format = 1\ndetector = \"tiny.toml\"\n"
	if err := os.WriteFile(filepath.Join(dir, ManifestName), []byte(manifest), 0o644); err != nil {
		t.Fatal(err)
	}
	d, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if d.Detector().Name != "tiny" || len(d.Events()) != 0 {
		t.Errorf("detector %q, %d events", d.Detector().Name, len(d.Events()))
	}
	os.WriteFile(filepath.Join(dir, ManifestName), []byte("format = 1\ndetector = \"tarn\"\n"), 0o644)
	if d, err := Open(dir); err != nil || d.Detector().Planes[2].Wires != 2000 {
		t.Errorf("built-in tarn: %v", err)
	}
}

// bigManifest writes a manifest of n events whose files do not exist.
func bigManifest(t testing.TB, n int) string {
	dir := t.TempDir()
	var b strings.Builder
	b.WriteString("format = 1\ndetector = \"tarn\"\n")
	for i := range n {
		fmt.Fprintf(&b, "\n[[events]]\nid = \"e%05d\"\nrun = 12\nevent = %d\nnpz = \"e%05d.npz\"\n", i, i, i)
	}
	if err := os.WriteFile(filepath.Join(dir, ManifestName), []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return dir
}

// TestOpenIsLazy opens 10,000 events whose files do not exist: Open must
// read only the manifest, and the missing file shows only on Load.
func TestOpenIsLazy(t *testing.T) {
	dir := bigManifest(t, 10000)
	d, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if n := len(d.Events()); n != 10000 {
		t.Fatalf("%d events", n)
	}
	info, ok := d.Event("e09999")
	if !ok || info.Meta.Event != 9999 || info.Source != SourceNPZ {
		t.Errorf("e09999: %+v %v", info, ok)
	}
	if _, err := d.Load("e00017"); err == nil || !strings.Contains(err.Error(), "event e00017: e00017.npz: file does not exist") {
		t.Errorf("Load of a missing file: %v", err)
	}
	if _, err := d.Load("nope"); err == nil {
		t.Error("Load of an unknown event succeeded")
	}
}

func BenchmarkOpen10000(b *testing.B) {
	dir := bigManifest(b, 10000)
	b.ResetTimer()
	for b.Loop() {
		if _, err := Open(dir); err != nil {
			b.Fatal(err)
		}
	}
}

func TestOpenNoManifest(t *testing.T) {
	dir := t.TempDir()
	if _, err := Open(dir); err == nil || !strings.Contains(err.Error(), "has no tpcscan.toml manifest") {
		t.Errorf("err = %v", err)
	}
	if _, err := Open(filepath.Join(dir, "missing")); err == nil {
		t.Error("Open of a missing folder succeeded")
	}
}
