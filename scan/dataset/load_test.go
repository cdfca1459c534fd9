package dataset

import (
	"archive/zip"
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// writeDataset writes a manifest (after a format line and the tiny
// detector) and files into a fresh folder.
func writeDataset(t *testing.T, events string, files map[string][]byte) string {
	t.Helper()
	dir := t.TempDir()
	dt, err := detectorTOML()
	if err != nil {
		t.Fatal(err)
	}
	files[ManifestName] = []byte("format = 1\n" + dt + events)
	for name, data := range files {
		p := filepath.Join(dir, name)
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

func npyOf(t *testing.T, wires, ticks int, v float32) []byte {
	t.Helper()
	pix := make([]float32, wires*ticks)
	for i := range pix {
		pix[i] = v
	}
	var b bytes.Buffer
	if err := writeFloat32NPY(&b, wires, ticks, pix); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func npzOf(t *testing.T, members map[string][]byte, method uint16) []byte {
	t.Helper()
	var b bytes.Buffer
	zw := zip.NewWriter(&b)
	for name, data := range members {
		w, err := zw.CreateHeader(&zip.FileHeader{Name: name, Method: method})
		if err != nil {
			t.Fatal(err)
		}
		w.Write(data)
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func TestLoadCrop(t *testing.T) {
	// A crop of wires 5–14 of the collection plane (20 wires) and ticks
	// 10–17 of the readout (64 ticks).
	dir := writeDataset(t, `
[[events]]
id = "c"
planes = { ind1 = "i1.npy", ind2 = "i2.npy", coll = "c.npy" }
wire0 = { coll = 5 }
tick0 = { ind1 = 10, ind2 = 10, coll = 10 }
`, map[string][]byte{"i1.npy": npyOf(t, 27, 8, 1), "i2.npy": npyOf(t, 27, 8, 2), "c.npy": npyOf(t, 10, 8, 3)})
	d, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	ev, err := d.Load("c")
	if err != nil {
		t.Fatal(err)
	}
	c := ev.Planes[2]
	if c.Wire0 != 5 || c.Wires != 10 || c.Tick0 != 10 || c.At(9, 7) != 3 {
		t.Errorf("crop %+v", *c)
	}
}

func TestLoadNPZ(t *testing.T) {
	members := map[string][]byte{"ind1.npy": npyOf(t, 27, 8, 1), "ind2.npy": npyOf(t, 27, 8, 2), "coll.npy": npyOf(t, 20, 8, 3), "extra.npy": {1, 2}}
	for _, method := range []uint16{zip.Store, zip.Deflate} {
		dir := writeDataset(t, "[[events]]\nid = \"z\"\nnpz = \"z.npz\"\n", map[string][]byte{"z.npz": npzOf(t, members, method)})
		d, err := Open(dir)
		if err != nil {
			t.Fatal(err)
		}
		ev, err := d.Load("z")
		if err != nil {
			t.Fatalf("method %d: %v", method, err)
		}
		if ev.Planes[1].At(26, 7) != 2 || ev.Planes[2].Wires != 20 {
			t.Errorf("method %d: planes wrong", method)
		}
	}
	delete(members, "ind2.npy")
	dir := writeDataset(t, "[[events]]\nid = \"z\"\nnpz = \"z.npz\"\n", map[string][]byte{"z.npz": npzOf(t, members, zip.Store)})
	d, _ := Open(dir)
	if _, err := d.Load("z"); err == nil || !strings.Contains(err.Error(), `event z: z.npz: no array "ind2"`) {
		t.Errorf("missing member: %v", err)
	}
	dir = writeDataset(t, "[[events]]\nid = \"z\"\nnpz = \"z.npz\"\n", map[string][]byte{"z.npz": []byte("PK not really")})
	d, _ = Open(dir)
	if _, err := d.Load("z"); err == nil || !strings.Contains(err.Error(), "not a readable .npz") {
		t.Errorf("not a zip: %v", err)
	}
}

// TestNPZSizeLie checks that a member claiming more bytes than deflate can
// produce from its compressed size is refused before allocation.
func TestNPZSizeLie(t *testing.T) {
	z := npzOf(t, map[string][]byte{"coll.npy": npyOf(t, 20, 8, 3)}, zip.Deflate)
	zr, err := zip.NewReader(bytes.NewReader(z), int64(len(z)))
	if err != nil {
		t.Fatal(err)
	}
	f := zr.File[0]
	f.UncompressedSize64 = f.CompressedSize64*2000 + 1<<20
	if _, err := npzMember(zr, int64(len(z)), "coll"); err == nil || !strings.Contains(err.Error(), "more than deflate can expand") {
		t.Errorf("err = %v", err)
	}
}

func TestLoadHits(t *testing.T) {
	csv := "plane,wire,tick,charge\n# a comment\ncoll,3,40,100\ncoll,3,40,20.5\nind2,0,44,-7\n"
	dir := writeDataset(t, "[[events]]\nid = \"h\"\nhits = \"h.csv\"\n", map[string][]byte{"h.csv": []byte(csv)})
	d, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	ev, err := d.Load("h")
	if err != nil {
		t.Fatal(err)
	}
	c := ev.Planes[2]
	// Ticks 40–44 on every plane; hits on the same pixel add.
	if c.Tick0 != 40 || c.Ticks != 5 || c.Wires != 20 || c.At(3, 0) != 120.5 || ev.Planes[1].At(0, 4) != -7 {
		t.Errorf("coll %+v", *c)
	}
}

func TestReadHitsRejects(t *testing.T) {
	for _, c := range []struct{ name, csv, want string }{
		{"empty", "", "empty file"},
		{"header", "p,w,t,q\n", "header is"},
		{"text wire", "plane,wire,tick,charge\ncoll,x,1,2\n", `line 2: wire "x" is not an integer`},
		{"text tick", "plane,wire,tick,charge\ncoll,1,1.5,2\n", `tick "1.5" is not an integer`},
		{"text charge", "plane,wire,tick,charge\ncoll,1,1,lots\n", `charge "lots" is not a number`},
		{"nan charge", "plane,wire,tick,charge\ncoll,1,1,NaN\n", "not finite"},
		{"bad plane", "plane,wire,tick,charge\nu,1,1,1\n", `plane "u"`},
		{"short row", "plane,wire,tick,charge\ncoll,1,1\n", "wrong number of fields"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := ReadHits(strings.NewReader(c.csv), "h.csv")
			if err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "h.csv: ") {
				t.Errorf("err = %v, want %q", err, c.want)
			}
		})
	}
	det := tiny()
	for _, c := range []struct {
		name string
		hits []Hit
		want string
	}{
		{"no hits", nil, "no hits"},
		{"wire", []Hit{{Plane: "coll", Wire: 20, Tick: 1}}, "wire 20 is outside plane coll (wires 0–19)"},
		{"negative wire", []Hit{{Plane: "ind1", Wire: -1, Tick: 1}}, "wire -1 is outside"},
		{"tick", []Hit{{Plane: "coll", Wire: 1, Tick: 64}}, "tick 64 is outside the readout"},
	} {
		if _, err := HitImages(det, c.hits); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v, want %q", c.name, err, c.want)
		}
	}
}

func TestLoadTruthShapeMismatch(t *testing.T) {
	var tb bytes.Buffer
	writeInt32NPY(&tb, 19, 8, make([]int32, 19*8))
	dir := writeDataset(t, `
[[events]]
id = "p"
planes = { ind1 = "i1.npy", ind2 = "i2.npy", coll = "c.npy" }
pixel_truth = { coll = "ct.npy" }
`, map[string][]byte{"i1.npy": npyOf(t, 27, 8, 1), "i2.npy": npyOf(t, 27, 8, 2), "c.npy": npyOf(t, 20, 8, 3), "ct.npy": tb.Bytes()})
	d, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := d.Load("p"); err == nil || !strings.Contains(err.Error(), "event p: ct.npy: pixel truth has shape [19 8], its plane image [20, 8]") {
		t.Errorf("err = %v", err)
	}
}

func TestWriterRejects(t *testing.T) {
	det := tiny()
	w, err := Create(t.TempDir(), det)
	if err != nil {
		t.Fatal(err)
	}
	bad := testEvent(det, "../x", 4)
	if err := w.Add(bad, nil); err == nil || !strings.Contains(err.Error(), "event id") {
		t.Errorf("bad id: %v", err)
	}
	short := testEvent(det, "s", 4)
	short.Planes = short.Planes[:2]
	if err := w.Add(short, nil); err == nil || !strings.Contains(err.Error(), "2 plane images for 3 detector planes") {
		t.Errorf("missing plane: %v", err)
	}
	if err := w.Add(testEvent(det, "j", 4), []byte("{not json")); err == nil || !strings.Contains(err.Error(), "not valid JSON") {
		t.Errorf("bad JSON: %v", err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := w.Add(testEvent(det, "late", 4), nil); err == nil || !strings.Contains(err.Error(), "closed") {
		t.Errorf("Add after Close: %v", err)
	}
}

// TestNPZStoredLie: a stored member claiming more bytes than the archive
// holds is refused before its header is read.
func TestNPZStoredLie(t *testing.T) {
	z := npzOf(t, map[string][]byte{"coll.npy": npyOf(t, 20, 8, 3)}, zip.Store)
	zr, err := zip.NewReader(bytes.NewReader(z), int64(len(z)))
	if err != nil {
		t.Fatal(err)
	}
	zr.File[0].CompressedSize64 = 1 << 30
	zr.File[0].UncompressedSize64 = 1 << 30
	if _, err := npzMember(zr, int64(len(z)), "coll"); err == nil || !strings.Contains(err.Error(), "more than the archive holds") {
		t.Errorf("err = %v", err)
	}
}
