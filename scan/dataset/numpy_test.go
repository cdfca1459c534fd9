package dataset

import (
	"archive/zip"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
)

// readRef reads a reference file written by NumPy 1.24.2 (see
// testdata/numpy/README.txt).
func readRef(t *testing.T, name string) (*npyHeader, []float32, error) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("testdata", "numpy", name))
	if err != nil {
		t.Fatal(err)
	}
	return readAll(b)
}

// TestNumPyWritten reads files that NumPy itself wrote: the three format
// versions, both byte orders and every charge dtype must give
// [[0.5, 1.5, 2.5], [3.5, 4.5, 5.5]] (integers: [[1, 3, 5], [7, 9, 11]]).
func TestNumPyWritten(t *testing.T) {
	floats := []float32{0.5, 1.5, 2.5, 3.5, 4.5, 5.5}
	ints := []float32{1, 3, 5, 7, 9, 11}
	for _, c := range []struct {
		file  string
		major int
		want  []float32
	}{
		{"v1_f4.npy", 1, floats}, {"v2_f8.npy", 2, floats}, {"v3_i2.npy", 3, ints},
		{"be_u2.npy", 1, ints}, {"be_f4.npy", 1, floats},
	} {
		h, v, err := readRef(t, c.file)
		if err != nil {
			t.Errorf("%s: %v", c.file, err)
			continue
		}
		if h.Major != c.major || len(h.Shape) != 2 || h.Shape[0] != 2 || h.Shape[1] != 3 {
			t.Errorf("%s: header %+v", c.file, h)
		}
		for i := range v {
			if v[i] != c.want[i] {
				t.Errorf("%s: [%d] = %g, want %g", c.file, i, v[i], c.want[i])
			}
		}
	}
	for _, c := range []struct{ file, want string }{
		{"fortran.npy", "fortran_order is True"},
		{"i8.npy", `dtype "<i8"`},
		{"nan.npy", "element [0, 1] is NaN"},
	} {
		if _, _, err := readRef(t, c.file); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v, want %q", c.file, err, c.want)
		}
	}
	h3, _, err := readRef(t, "rank3.npy")
	if err != nil {
		t.Fatal(err)
	}
	if err := checkShape(h3.Shape, tiny(), 2, 0, 0, false); err == nil || !strings.Contains(err.Error(), "rank 3") {
		t.Errorf("rank3.npy: err = %v", err)
	}
	b, _ := os.ReadFile(filepath.Join("testdata", "numpy", "i4.npy"))
	r := strings.NewReader(string(b))
	h, err := readNPYHeader(r, int64(len(b)))
	if err != nil {
		t.Fatal(err)
	}
	truth, err := h.readInt32(r)
	if err != nil || truth[1] != 13 || truth[2] != -11 || truth[3] != 2212 {
		t.Errorf("i4.npy: %v, %v", truth, err)
	}
}

// TestNumPyNPZ reads archives from numpy.savez (stored) and
// numpy.savez_compressed (deflated) through the npz member reader.
func TestNumPyNPZ(t *testing.T) {
	for _, name := range []string{"savez.npz", "savez_compressed.npz"} {
		z, err := zip.OpenReader(filepath.Join("testdata", "numpy", name))
		if err != nil {
			t.Fatal(err)
		}
		st, err := os.Stat(filepath.Join("testdata", "numpy", name))
		if err != nil {
			t.Fatal(err)
		}
		m, err := npzMember(&z.Reader, st.Size(), "coll")
		if err != nil || m == nil {
			t.Fatalf("%s: member coll: %v", name, err)
		}
		rc, size, err := openMember(m)
		if err != nil {
			t.Fatal(err)
		}
		h, err := readNPYHeader(rc, size)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		v, err := h.readFloat32(rc)
		rc.Close()
		if err != nil || v[5] != 5.5 {
			t.Errorf("%s: %v, %v", name, v, err)
		}
		if name == "savez.npz" {
			tm, err := npzMember(&z.Reader, st.Size(), "coll_truth")
			if err != nil || tm == nil {
				t.Fatalf("coll_truth: %v", err)
			}
			rc, size, _ := openMember(tm)
			tr, err := readTruth(rc, size, &scan.Image{Wires: 2, Ticks: 3})
			rc.Close()
			if err != nil || tr.Pix[4] != 1 {
				t.Errorf("coll_truth: %v", err)
			}
		}
		z.Close()
	}
}
