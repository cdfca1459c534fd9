package dataset

import (
	"archive/zip"
	"bytes"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
)

// The fuzz targets check that no input makes a reader panic, hang or
// allocate beyond its input, and that whatever is accepted is consistent.
// Seed corpora live in testdata/fuzz/<target>.

func FuzzNPY(f *testing.F) {
	f.Add(npyBytes(1, "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }", 64, f32le(0, 1, 2, 3, 4, 5)))
	f.Add(npyBytes(3, "{'descr': '>f8', 'fortran_order': False, 'shape': (1,), }", 16, make([]byte, 8)))
	f.Add(npyBytes(2, "{'descr': '<i2', 'fortran_order': False, 'shape': (), }", 64, make([]byte, 2)))
	f.Fuzz(func(t *testing.T, b []byte) {
		r := bytes.NewReader(b)
		h, err := readNPYHeader(r, int64(len(b)))
		if err != nil {
			return
		}
		if h.dataLen > int64(len(b)) {
			t.Fatalf("header accepted %d data bytes from a %d-byte file", h.dataLen, len(b))
		}
		if h.dtype.descr[1:] == "i4" {
			v, err := h.readInt32(r)
			if err == nil && len(v) != h.Len() {
				t.Fatalf("%d values for shape %v", len(v), h.Shape)
			}
			return
		}
		v, err := h.readFloat32(r)
		if err == nil && len(v) != h.Len() {
			t.Fatalf("%d values for shape %v", len(v), h.Shape)
		}
	})
}

func FuzzNPZ(f *testing.F) {
	det := tiny()
	ev := testEvent(det, "z", 2)
	var zb bytes.Buffer
	zw := zip.NewWriter(&zb)
	for i, p := range det.Planes {
		w, _ := zw.CreateHeader(&zip.FileHeader{Name: string(p.Role) + ".npy", Method: zip.Deflate})
		writeFloat32NPY(w, ev.Planes[i].Wires, ev.Planes[i].Ticks, ev.Planes[i].Pix)
	}
	w, _ := zw.Create("coll_truth.npy")
	writeInt32NPY(w, 20, 2, make([]int32, 40))
	zw.Close()
	f.Add(zb.Bytes())
	f.Add([]byte("PK\x05\x06" + strings.Repeat("\x00", 18)))
	f.Fuzz(func(t *testing.T, b []byte) {
		z, err := zip.NewReader(bytes.NewReader(b), int64(len(b)))
		if err != nil {
			return
		}
		l := &loader{det: det, e: &eventEntry{ID: "z"}}
		ev := &scan.Event{ID: "z", Detector: det}
		if err := l.readNPZ(z, int64(len(b)), ev); err != nil {
			return
		}
		if err := ev.Validate(); err != nil {
			t.Fatalf("accepted an invalid event: %v", err)
		}
	})
}

func FuzzHits(f *testing.F) {
	f.Add("plane,wire,tick,charge\ncoll,3,40,120.5\nind1,10,40,-30.25\n")
	f.Add("plane,wire,tick,charge\n# c\ncoll,19,63,1e3\n")
	f.Add("plane,wire,tick,charge\ncoll,\"3\",4,x\n")
	det := tiny()
	f.Fuzz(func(t *testing.T, s string) {
		hits, err := ReadHits(strings.NewReader(s), "h.csv")
		if err != nil {
			return
		}
		imgs, err := HitImages(det, hits)
		if err != nil {
			return
		}
		ev := &scan.Event{ID: "h", Detector: det, Planes: imgs}
		if err := ev.Validate(); err != nil {
			t.Fatalf("accepted hits that make an invalid event: %v", err)
		}
	})
}

func FuzzManifest(f *testing.F) {
	dt, err := detectorTOML()
	if err != nil {
		f.Fatal(err)
	}
	f.Add("format = 1\n" + dt + "[[events]]\nid = \"e1\"\nplanes = { ind1 = \"a.npy\", ind2 = \"b.npy\", coll = \"c.npy\" }\n")
	f.Add("format = 1\ndetector = \"tarn\"\n[[events]]\nid = \"e1\"\nnpz = \"e1.npz\"\ntick0 = { coll = 3 }\n")
	f.Add("format = 1\ndetector = \"d.toml\"\n[[events]]\nid = \"e1\"\nhits = \"../h.csv\"\n")
	f.Fuzz(func(t *testing.T, s string) {
		det, events, err := parseManifest(strings.NewReader(s), ManifestName, noDetectorFile)
		if err != nil {
			return
		}
		if err := det.Validate(); err != nil {
			t.Fatalf("accepted an invalid detector: %v", err)
		}
		seen := map[string]bool{}
		for _, e := range events {
			if seen[e.ID] || !validID(e.ID) {
				t.Fatalf("accepted event id %q", e.ID)
			}
			seen[e.ID] = true
			for _, p := range e.paths() {
				if checkPath(p) != nil {
					t.Fatalf("accepted path %q", p)
				}
			}
		}
	})
}
