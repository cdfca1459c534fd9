package dataset

import (
	"bytes"
	"encoding/binary"
	"math"
	"strings"
	"testing"

	"codeberg.org/sbinet/npyio"
	"gonum.org/v1/gonum/mat"
)

// npyBytes builds an .npy file by the NumPy format specification
// ("numpy.lib.format", section "Format Version 1.0"):
//
//	"The first 6 bytes are a magic string: exactly \x93NUMPY.
//	 The next 1 byte is an unsigned byte: the major version number of the
//	 file format, e.g. \x01.
//	 The next 1 byte is an unsigned byte: the minor version number of the
//	 file format, e.g. \x00.
//	 The next 2 bytes form a little-endian unsigned short int: the length
//	 of the header data HEADER_LEN.
//	 The next HEADER_LEN bytes form the header data describing the array's
//	 format. It is an ASCII string which contains a Python literal
//	 expression of a dictionary. It is terminated by a newline (\n) and
//	 padded with spaces (\x20) to make the total of len(magic string) + 2 +
//	 len(length) + HEADER_LEN be evenly divisible by 64 for alignment
//	 purposes."
//
// "Format Version 2.0: ... the header length field [is] a 4 byte unsigned
// little-endian integer." "Format Version 3.0: ... replaces the ASCII
// string (which in practice was latin1) with a utf8-encoded string."
// align is 64, or 16 as older NumPy releases wrote.
func npyBytes(major byte, header string, align int, data []byte) []byte {
	lenBytes := 2
	if major >= 2 {
		lenBytes = 4
	}
	pre := 6 + 2 + lenBytes
	n := pre + len(header) + 1
	pad := (align - n%align) % align
	header += strings.Repeat(" ", pad) + "\n"
	var b bytes.Buffer
	b.WriteString("\x93NUMPY")
	b.WriteByte(major)
	b.WriteByte(0)
	if major >= 2 {
		binary.Write(&b, binary.LittleEndian, uint32(len(header)))
	} else {
		binary.Write(&b, binary.LittleEndian, uint16(len(header)))
	}
	b.WriteString(header)
	b.Write(data)
	return b.Bytes()
}

func f32le(vs ...float32) []byte {
	var b bytes.Buffer
	binary.Write(&b, binary.LittleEndian, vs)
	return b.Bytes()
}

func readAll(b []byte) (*npyHeader, []float32, error) {
	r := bytes.NewReader(b)
	h, err := readNPYHeader(r, int64(len(b)))
	if err != nil {
		return nil, nil, err
	}
	v, err := h.readFloat32(r)
	return h, v, err
}

func TestNPYSpecVersions(t *testing.T) {
	hdr := "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }"
	data := f32le(0, 1, 2, 3, 4, 5)
	for _, c := range []struct {
		name  string
		major byte
		hdr   string
		align int
	}{
		{"1.0, 64-byte aligned", 1, hdr, 64},
		{"1.0, 16-byte aligned (older NumPy)", 1, hdr, 16},
		{"2.0, uint32 header length", 2, hdr, 64},
		{"3.0, UTF-8 header", 3, "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), } ", 64},
		{"double quotes, no trailing comma", 1, `{"descr": "<f4", "fortran_order": False, "shape": (2,3)}`, 64},
	} {
		t.Run(c.name, func(t *testing.T) {
			h, v, err := readAll(npyBytes(c.major, c.hdr, c.align, data))
			if err != nil {
				t.Fatal(err)
			}
			if h.Major != int(c.major) || len(h.Shape) != 2 || h.Shape[0] != 2 || h.Shape[1] != 3 {
				t.Errorf("header %+v", h)
			}
			if v[4] != 4 {
				t.Errorf("data %v", v)
			}
		})
	}
}

// TestNPYDtypes reads each supported dtype, both byte orders, and checks
// the value 1234 (or 1234.5 for floats) survives.
func TestNPYDtypes(t *testing.T) {
	for _, c := range []struct {
		descr string
		put   func(binary.AppendByteOrder) []byte
		want  float32
	}{
		{"f4", func(o binary.AppendByteOrder) []byte { return o.AppendUint32(nil, math.Float32bits(1234.5)) }, 1234.5},
		{"f8", func(o binary.AppendByteOrder) []byte { return o.AppendUint64(nil, math.Float64bits(1234.5)) }, 1234.5},
		{"i2", func(o binary.AppendByteOrder) []byte { return o.AppendUint16(nil, uint16(0xffff^1233)) }, -1234},
		{"u2", func(o binary.AppendByteOrder) []byte { return o.AppendUint16(nil, 1234) }, 1234},
	} {
		for _, o := range []struct {
			c     string
			order binary.AppendByteOrder
		}{{"<", binary.LittleEndian}, {">", binary.BigEndian}} {
			d := o.c + c.descr
			b := npyBytes(1, "{'descr': '"+d+"', 'fortran_order': False, 'shape': (1, 1), }", 64, c.put(o.order))
			_, v, err := readAll(b)
			if err != nil {
				t.Errorf("%s: %v", d, err)
				continue
			}
			if v[0] != c.want {
				t.Errorf("%s: got %g, want %g", d, v[0], c.want)
			}
		}
	}
}

func TestNPYRejects(t *testing.T) {
	good := "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }"
	data := f32le(0, 1, 2, 3, 4, 5)
	for _, c := range []struct {
		name string
		file []byte
		want string
	}{
		{"bad magic", append([]byte("\x93NUMPZ"), npyBytes(1, good, 64, data)[6:]...), `does not start with "\x93NUMPY"`},
		{"version 4.0", npyBytes(4, good, 64, data), "version 4.0"},
		{"empty", nil, "truncated"},
		{"preamble only", npyBytes(1, good, 64, data)[:9], "truncated"},
		{"header cut", npyBytes(1, good, 64, data)[:40], "truncated"},
		{"data cut", npyBytes(1, good, 64, data)[:128+20], "needs 24 data bytes, file has 20: truncated"},
		{"trailing bytes", npyBytes(1, good, 64, append(data, 0, 0, 0, 0)), "trailing bytes"},
		{"fortran order", npyBytes(1, "{'descr': '<f4', 'fortran_order': True, 'shape': (2, 3), }", 64, data), "fortran_order is True"},
		{"int64", npyBytes(1, "{'descr': '<i8', 'fortran_order': False, 'shape': (3,), }", 64, data), `dtype "<i8"`},
		{"object", npyBytes(1, "{'descr': '|O', 'fortran_order': False, 'shape': (6,), }", 64, data), `dtype "|O"`},
		{"no newline", append(npyBytes(1, good, 64, data)[:127], append([]byte{' '}, data...)...), "not terminated by a newline"},
		{"misaligned header", npyBytes(1, good, 8, data), "multiple of 64"},
		{"missing shape", npyBytes(1, "{'descr': '<f4', 'fortran_order': False, }", 64, data), `no "shape" key`},
		{"unknown key", npyBytes(1, "{'descr': '<f4', 'fortran_order': False, 'shape': (6,), 'x': 1}", 64, data), `unknown key "x"`},
		{"negative dim", npyBytes(1, "{'descr': '<f4', 'fortran_order': False, 'shape': (-6,), }", 64, data), "not a non-negative integer"},
		{"UTF-8 in 1.0", npyBytes(1, "{'descr': '<f4', 'fortran_order': False, 'shape': (6,), } é", 64, data), "non-ASCII"},
		// A hostile header asking for 10¹⁸ elements must fail on the size
		// check, before any allocation.
		{"huge shape", npyBytes(1, "{'descr': '<f4', 'fortran_order': False, 'shape': (1000000000, 1000000000), }", 64, data), "needs 4000000000000000000 data bytes, file has 24"},
		{"overflowing shape", npyBytes(1, "{'descr': '<f4', 'fortran_order': False, 'shape': (4611686018427387904, 4), }", 64, data), "too large"},
		{"NaN", npyBytes(1, "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }", 64, f32le(0, 1, 2, 3, float32(math.NaN()), 5)), "element [1, 1] is NaN"},
		{"-Inf in float64", npyBytes(1, "{'descr': '<f8', 'fortran_order': False, 'shape': (1, 1), }", 64, binary.LittleEndian.AppendUint64(nil, math.Float64bits(math.Inf(-1)))), "is -Inf"},
		{"float64 beyond float32", npyBytes(1, "{'descr': '<f8', 'fortran_order': False, 'shape': (1, 1), }", 64, binary.LittleEndian.AppendUint64(nil, math.Float64bits(1e300))), "beyond float32 range"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := readAll(c.file)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("err = %v, want %q", err, c.want)
			}
		})
	}
}

// TestNPYWriterAlignment checks our writer against the spec's rule that
// magic + version + length + header is a multiple of 64 ending in '\n'.
func TestNPYWriterAlignment(t *testing.T) {
	for _, shape := range [][]int{{1, 1}, {27, 8}, {2000, 5600}, {123456789, 1}} {
		var b bytes.Buffer
		if err := writeNPYHeader(&b, "<f4", shape); err != nil {
			t.Fatal(err)
		}
		got := b.Bytes()
		hlen := int(binary.LittleEndian.Uint16(got[8:10]))
		if len(got) != 10+hlen || len(got)%64 != 0 || got[len(got)-1] != '\n' {
			t.Errorf("shape %v: preamble %d bytes, header %d, last %q", shape, len(got), hlen, got[len(got)-1])
		}
	}
}

// TestNPYAgainstNpyio cross-checks with a general-purpose Go NumPy library
// (codeberg.org/sbinet/npyio): it reads what we write, we read what it
// writes.
func TestNPYAgainstNpyio(t *testing.T) {
	pix := []float32{0, 1.5, -2, 3, 4, 5e6}
	var b bytes.Buffer
	if err := writeFloat32NPY(&b, 2, 3, pix); err != nil {
		t.Fatal(err)
	}
	r, err := npyio.NewReader(bytes.NewReader(b.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	// npyio keeps the header's quotes around the dtype.
	if strings.Trim(r.Header.Descr.Type, "'") != "<f4" || r.Header.Descr.Fortran || len(r.Header.Descr.Shape) != 2 || r.Header.Descr.Shape[0] != 2 || r.Header.Descr.Shape[1] != 3 {
		t.Errorf("npyio header %+v", r.Header)
	}
	var back []float32
	if err := r.Read(&back); err != nil {
		t.Fatal(err)
	}
	for i := range pix {
		if back[i] != pix[i] {
			t.Errorf("npyio read [%d] = %g, want %g", i, back[i], pix[i])
		}
	}

	m := mat.NewDense(2, 3, []float64{0, 1, 2, 3, 4, 5.25})
	b.Reset()
	if err := npyio.Write(&b, m); err != nil {
		t.Fatal(err)
	}
	h, v, err := readAll(b.Bytes())
	if err != nil {
		t.Fatal(err)
	}
	if h.Descr != "<f8" || h.Shape[0] != 2 || h.Shape[1] != 3 || v[5] != 5.25 || v[3] != 3 {
		t.Errorf("our read of npyio's file: %+v %v", h, v)
	}
}

func TestNPYInt32Truth(t *testing.T) {
	var b bytes.Buffer
	if err := writeInt32NPY(&b, 1, 3, []int32{-1, 0, 2212}); err != nil {
		t.Fatal(err)
	}
	r := bytes.NewReader(b.Bytes())
	h, err := readNPYHeader(r, int64(b.Len()))
	if err != nil {
		t.Fatal(err)
	}
	v, err := h.readInt32(r)
	if err != nil || v[0] != -1 || v[2] != 2212 {
		t.Errorf("int32 round trip: %v, %v", v, err)
	}
	if _, err := h.readFloat32(bytes.NewReader(nil)); err == nil || !strings.Contains(err.Error(), "pixel truth") {
		t.Errorf("int32 as charge: err = %v", err)
	}
}
