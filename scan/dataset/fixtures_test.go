package dataset

import (
	"archive/zip"
	"bytes"
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/BurntSushi/toml"

	"github.com/tpcscan/tpcscan/scan/detector"
)

// The fixtures in testdata/datasets are made by this file:
//
//	go test ./scan/dataset -run TestFixtures -write-fixtures
//
// Each broken-* folder has a README.txt saying what is broken and, on its
// "expect:" line, the words Check must report.
var writeFixtures = flag.Bool("write-fixtures", false, "rewrite testdata/datasets from code")

const fixtureRoot = "../../testdata/datasets"

// fixtureTicks keeps fixture planes small: 74 wires × 8 ticks × 4 bytes.
const fixtureTicks = 8

type fixture struct {
	name   string
	broken string // what is wrong, for the README
	expect string // a substring of the problem Check must report
	make   func(dir string) error
}

var fixtures = []fixture{
	{"broken-truncated-npy", "e1/coll.npy is cut off 10 bytes before the end of its data", "truncated",
		func(dir string) error { return truncate(filepath.Join(dir, "e1/coll.npy"), 10) }},
	{"broken-bad-magic", `e1/ind1.npy starts with "\x93NUMPX" instead of the magic string "\x93NUMPY"`, `does not start with "\x93NUMPY"`,
		func(dir string) error { return patch(filepath.Join(dir, "e1/ind1.npy"), 5, "X") }},
	{"broken-fortran-order", "e1/coll.npy says fortran_order True", "fortran_order is True",
		func(dir string) error {
			return rewriteHeader(dir, "e1/coll.npy", "'fortran_order': False", "'fortran_order': True ")
		}},
	{"broken-dtype", "e1/ind2.npy declares dtype '<i8' (int64), which tpcscan does not read", `dtype "<i8"`,
		func(dir string) error {
			return rewriteNPY(dir, "e1/ind2.npy", "<i8", []int{27, fixtureTicks / 2}, 27*fixtureTicks*4)
		}},
	{"broken-rank", "e1/ind1.npy is a 3-D array of shape (27, 2, 4)", "rank 3",
		func(dir string) error {
			return rewriteNPY(dir, "e1/ind1.npy", "<f4", []int{27, 2, 4}, 27*fixtureTicks*4)
		}},
	{"broken-wire-count", "e1/coll.npy has 19 wires but the detector's collection plane has 20, and no wire0 says it is a crop", "plane coll has 20 wires",
		func(dir string) error {
			return rewriteNPY(dir, "e1/coll.npy", "<f4", []int{19, fixtureTicks}, 19*fixtureTicks*4)
		}},
	{"broken-nan", "e1/coll.npy holds a NaN at wire 3, tick 5", "element [3, 5] is NaN",
		func(dir string) error {
			return patchData(filepath.Join(dir, "e1/coll.npy"), (3*fixtureTicks+5)*4, "\x00\x00\xc0\x7f")
		}},
	{"broken-inf", "e1/ind2.npy holds +Inf at wire 0, tick 0", "element [0, 0] is +Inf",
		func(dir string) error { return patchData(filepath.Join(dir, "e1/ind2.npy"), 0, "\x00\x00\x80\x7f") }},
	{"broken-csv-text", "e2/hits.csv has the charge \"lots\" on line 3", `line 3: charge "lots" is not a number`,
		func(dir string) error { return addHits(dir, "plane,wire,tick,charge\ncoll,3,4,12.5\ncoll,4,4,lots\n") }},
	{"broken-hit-outside", "e2/hits.csv has a hit on wire 20 of the collection plane, whose wires are 0–19", "wire 20 is outside plane coll",
		func(dir string) error { return addHits(dir, "plane,wire,tick,charge\ncoll,3,4,12.5\ncoll,20,4,7\n") }},
	{"broken-escape-path", "the manifest names ../valid/e1/coll.npy, outside the dataset folder", "path escapes the dataset folder",
		func(dir string) error {
			return editManifest(dir, `coll = "e1/coll.npy"`, `coll = "../valid/e1/coll.npy"`)
		}},
	{"broken-symlink", "e1/coll.npy is a symbolic link to a file outside the dataset folder", "leads out of the dataset folder",
		func(dir string) error {
			p := filepath.Join(dir, "e1/coll.npy")
			if err := os.Remove(p); err != nil {
				return err
			}
			return os.Symlink("../../valid/e1/coll.npy", p)
		}},
	{"broken-duplicate-id", "two [[events]] tables have the id e1", "duplicate event id",
		func(dir string) error {
			return editManifest(dir, "", "\n[[events]]\nid = \"e1\"\nplanes = { ind1 = \"e1/ind1.npy\", ind2 = \"e1/ind2.npy\", coll = \"e1/coll.npy\" }\n")
		}},
	{"broken-missing-file", "the manifest names e1/ind2.npy, which does not exist", "e1/ind2.npy: file does not exist",
		func(dir string) error { return os.Remove(filepath.Join(dir, "e1/ind2.npy")) }},
	{"broken-unknown-key", "an event has the key \"plane\" (a typo for planes)", `unknown key "events.plane"`,
		func(dir string) error { return editManifest(dir, "\nplanes = {", "\nplane = \"x\"\nplanes = {") }},
	{"broken-truth-json", "e1's truth file e1/truth.json is not valid JSON (cut off)", "e1/truth.json: truth file is not valid JSON",
		func(dir string) error {
			if err := os.WriteFile(filepath.Join(dir, "e1/truth.json"), []byte(`{"class": "numu_cc", "vertex_cm": [2.5,`), 0o644); err != nil {
				return err
			}
			return editManifest(dir, "\nplanes = {", "\ntruth = \"e1/truth.json\"\nplanes = {")
		}},
	{"broken-crop-outside", "e1's planes start at tick0 60 but the readout has ticks 0–63 only", "covers ticks 60–67",
		func(dir string) error {
			return editManifest(dir, "\nplanes = {", "\ntick0 = { ind1 = 60, ind2 = 60, coll = 60 }\nplanes = {")
		}},
}

// TestFixtures runs Check over every fixture: the valid one must pass and
// each broken one must fail with the reason its README names.
func TestFixtures(t *testing.T) {
	if *writeFixtures {
		if err := makeFixtures(); err != nil {
			t.Fatal(err)
		}
	}
	r := Check(context.Background(), filepath.Join(fixtureRoot, "valid"), nil)
	if !r.OK() {
		t.Errorf("valid: problems %v", r.Problems)
	}
	if r.Events != 3 || r.Loaded != 3 || r.Truth != 1 || r.PixelTruth != 1 {
		t.Errorf("valid: report %+v", r)
	}
	dirs, err := filepath.Glob(filepath.Join(fixtureRoot, "broken-*"))
	if err != nil {
		t.Fatal(err)
	}
	if len(dirs) < 8 {
		t.Fatalf("%d broken fixtures, want at least 8", len(dirs))
	}
	for _, dir := range dirs {
		t.Run(filepath.Base(dir), func(t *testing.T) {
			readme, err := os.ReadFile(filepath.Join(dir, "README.txt"))
			if err != nil {
				t.Fatal(err)
			}
			_, expect, ok := strings.Cut(string(readme), "\nexpect: ")
			expect, _, _ = strings.Cut(expect, "\n")
			if !ok || expect == "" {
				t.Fatal("README.txt has no expect: line")
			}
			r := Check(context.Background(), dir, nil)
			if r.OK() {
				t.Fatal("Check found no problem")
			}
			var all []string
			for _, p := range r.Problems {
				all = append(all, p.String())
				if strings.Contains(p.String(), expect) {
					return
				}
			}
			t.Errorf("no problem mentions %q; got:\n%s", expect, strings.Join(all, "\n"))
		})
	}
}

// makeFixtures writes the valid dataset and the broken ones.
func makeFixtures() error {
	if err := os.RemoveAll(fixtureRoot); err != nil {
		return err
	}
	valid := filepath.Join(fixtureRoot, "valid")
	if err := makeValid(valid); err != nil {
		return fmt.Errorf("valid: %w", err)
	}
	for _, f := range fixtures {
		dir := filepath.Join(fixtureRoot, f.name)
		if err := makeBase(dir); err != nil {
			return fmt.Errorf("%s: %w", f.name, err)
		}
		if err := f.make(dir); err != nil {
			return fmt.Errorf("%s: %w", f.name, err)
		}
		readme := fmt.Sprintf("broken: %s\nexpect: %s\n", f.broken, f.expect)
		if err := os.WriteFile(filepath.Join(dir, "README.txt"), []byte(readme), 0o644); err != nil {
			return err
		}
	}
	return nil
}

// detectorTOML renders the tiny detector as a [detector] table.
func detectorTOML() (string, error) {
	var b bytes.Buffer
	err := toml.NewEncoder(&b).Encode(map[string]*detector.Detector{"detector": tiny()})
	return b.String(), err
}

// makeBase writes a one-event dataset of three .npy planes.
func makeBase(dir string) error {
	det := tiny()
	ev := testEvent(det, "e1", fixtureTicks)
	if err := os.MkdirAll(filepath.Join(dir, "e1"), 0o755); err != nil {
		return err
	}
	for i, p := range det.Planes {
		m := ev.Planes[i]
		if err := writeFile(filepath.Join(dir, "e1", string(p.Role)+".npy"), func(w io.Writer) error {
			return writeFloat32NPY(w, m.Wires, m.Ticks, m.Pix)
		}); err != nil {
			return err
		}
	}
	dt, err := detectorTOML()
	if err != nil {
		return err
	}
	manifest := "format = 1\n\n" + dt + `
[[events]]
id = "e1"
planes = { ind1 = "e1/ind1.npy", ind2 = "e1/ind2.npy", coll = "e1/coll.npy" }
`
	return os.WriteFile(filepath.Join(dir, ManifestName), []byte(manifest), 0o644)
}

// makeValid writes three events, one of each source, with metadata, crop
// offsets, pixel truth in the npz and a truth JSON.
func makeValid(dir string) error {
	if err := makeBase(dir); err != nil {
		return err
	}
	det := tiny()
	ev := testEvent(det, "e2", fixtureTicks)
	var zb bytes.Buffer
	zw := zip.NewWriter(&zb)
	for i, p := range det.Planes {
		m := ev.Planes[i]
		w, err := zw.CreateHeader(&zip.FileHeader{Name: string(p.Role) + ".npy", Method: zip.Deflate})
		if err != nil {
			return err
		}
		if err := writeFloat32NPY(w, m.Wires, m.Ticks, m.Pix); err != nil {
			return err
		}
	}
	w, err := zw.Create("coll_truth.npy")
	if err != nil {
		return err
	}
	truth := make([]int32, 20*fixtureTicks)
	truth[3*fixtureTicks+2] = 13 // a muon's pixel (PDG code 13)
	if err := writeInt32NPY(w, 20, fixtureTicks, truth); err != nil {
		return err
	}
	if err := zw.Close(); err != nil {
		return err
	}
	files := map[string]string{
		"e2.npz":        zb.String(),
		"e2.truth.json": `{"class": "numu_cc", "vertex_cm": [2.5, 0.4, 3.1]}` + "\n",
		"e3/hits.csv":   "# sparse hits: plane role, detector wire, detector tick, charge\nplane,wire,tick,charge\ncoll,3,40,120.5\ncoll,4,41,98\nind1,10,40,-30.25\nind1,10,40,-4.75\nind2,26,43,55\n",
	}
	for name, data := range files {
		p := filepath.Join(dir, name)
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			return err
		}
		if err := os.WriteFile(p, []byte(data), 0o644); err != nil {
			return err
		}
	}
	if err := editManifest(dir, `id = "e1"`, `id = "e1"
run = 7
subrun = 1
event = 42
note = "three npy planes"`); err != nil {
		return err
	}
	return editManifest(dir, "", `
[[events]]
id = "e2"
run = 7
event = 43
npz = "e2.npz"
truth = "e2.truth.json"
tick0 = { ind1 = 56, ind2 = 56, coll = 56 }

[[events]]
id = "e3"
note = "sparse hits"
hits = "e3/hits.csv"
`)
}

// editManifest replaces old with new in the manifest; an empty old appends.
func editManifest(dir, old, new string) error {
	p := filepath.Join(dir, ManifestName)
	b, err := os.ReadFile(p)
	if err != nil {
		return err
	}
	s := string(b)
	if old == "" {
		s += new
	} else if !strings.Contains(s, old) {
		return fmt.Errorf("manifest has no %q", old)
	} else {
		s = strings.Replace(s, old, new, 1)
	}
	return os.WriteFile(p, []byte(s), 0o644)
}

// patchData overwrites bytes of an .npy file's data, off bytes past the
// header (version 1.0: 10 bytes of preamble plus the little-endian header
// length at bytes 8–9).
func patchData(p string, off int, s string) error {
	b, err := os.ReadFile(p)
	if err != nil {
		return err
	}
	start := 10 + int(b[8]) + int(b[9])<<8
	copy(b[start+off:], s)
	return os.WriteFile(p, b, 0o644)
}

func truncate(p string, n int64) error {
	st, err := os.Stat(p)
	if err != nil {
		return err
	}
	return os.Truncate(p, st.Size()-n)
}

func patch(p string, off int, s string) error {
	b, err := os.ReadFile(p)
	if err != nil {
		return err
	}
	copy(b[off:], s)
	return os.WriteFile(p, b, 0o644)
}

// rewriteHeader replaces text in an .npy header, keeping its length.
func rewriteHeader(dir, rel, old, new string) error {
	p := filepath.Join(dir, rel)
	b, err := os.ReadFile(p)
	if err != nil {
		return err
	}
	i := bytes.Index(b[:64], []byte(old))
	if i < 0 || len(old) != len(new) {
		return fmt.Errorf("%s: cannot rewrite %q", rel, old)
	}
	copy(b[i:], new)
	return os.WriteFile(p, b, 0o644)
}

// rewriteNPY writes an .npy with the given header and n zero data bytes.
func rewriteNPY(dir, rel, descr string, shape []int, n int) error {
	return writeFile(filepath.Join(dir, rel), func(w io.Writer) error {
		if err := writeNPYHeader(w, descr, shape); err != nil {
			return err
		}
		_, err := w.Write(make([]byte, n))
		return err
	})
}

// addHits adds an event e2 read from the given hits CSV.
func addHits(dir, csv string) error {
	if err := os.MkdirAll(filepath.Join(dir, "e2"), 0o755); err != nil {
		return err
	}
	if err := os.WriteFile(filepath.Join(dir, "e2/hits.csv"), []byte(csv), 0o644); err != nil {
		return err
	}
	return editManifest(dir, "", "\n[[events]]\nid = \"e2\"\nhits = \"e2/hits.csv\"\n")
}
