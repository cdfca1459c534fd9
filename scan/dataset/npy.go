package dataset

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"
	"unsafe"
)

// The NumPy .npy format (an open standard, "numpy.lib.format"): the magic
// string "\x93NUMPY", a major and a minor version byte, the header length
// (little-endian uint16 in version 1.0, uint32 in 2.0 and 3.0), then the
// header: a Python dict literal with the keys 'descr', 'fortran_order' and
// 'shape', padded with spaces and ended by '\n' so that the whole preamble is
// a multiple of 64 bytes (16 in files from older NumPy releases). Version
// 3.0 only differs in allowing UTF-8 in the header. The data follow.

const npyMagic = "\x93NUMPY"

// maxHeaderLen bounds the header we are willing to read. Real headers are
// well under a kilobyte; NumPy itself refuses more than 10000 bytes.
const maxHeaderLen = 1 << 16

// dtype is an element type we can read.
type dtype struct {
	descr string // as written in the header, e.g. "<f4"
	size  int
	order binary.ByteOrder
	kind  byte // 'f' float, 'i' signed int, 'u' unsigned int
}

// dtypes are the element types tpcscan reads: float32, float64, int16,
// uint16 for charge, int32 for pixel truth; either byte order.
var dtypes = func() map[string]dtype {
	m := map[string]dtype{}
	for _, t := range []struct {
		kind byte
		size int
	}{{'f', 4}, {'f', 8}, {'i', 2}, {'u', 2}, {'i', 4}} {
		for _, o := range []struct {
			c     byte
			order binary.ByteOrder
		}{{'<', binary.LittleEndian}, {'>', binary.BigEndian}} {
			d := string([]byte{o.c, t.kind, byte('0' + t.size)})
			m[d] = dtype{descr: d, size: t.size, order: o.order, kind: t.kind}
		}
	}
	return m
}()

// npyHeader is a parsed .npy header.
type npyHeader struct {
	Major, Minor int
	Descr        string
	Fortran      bool
	Shape        []int
	dtype        dtype
	dataLen      int64 // bytes of data the shape calls for
}

// Len returns the number of elements.
func (h *npyHeader) Len() int {
	n := 1
	for _, s := range h.Shape {
		n *= s
	}
	return n
}

// readNPYHeader reads and checks the preamble and header of an .npy stream
// whose total length is size bytes. It checks that the shape's data fit
// exactly in what is left, so that the caller can allocate safely.
func readNPYHeader(r io.Reader, size int64) (*npyHeader, error) {
	var pre [8]byte
	if _, err := io.ReadFull(r, pre[:]); err != nil {
		return nil, fmt.Errorf("npy preamble: %w", truncated(err))
	}
	if string(pre[:6]) != npyMagic {
		return nil, errors.New(`not an .npy file: it does not start with "\x93NUMPY"`)
	}
	h := &npyHeader{Major: int(pre[6]), Minor: int(pre[7])}
	var hlen, pos int64
	switch h.Major {
	case 1:
		var b [2]byte
		if _, err := io.ReadFull(r, b[:]); err != nil {
			return nil, fmt.Errorf("npy header length: %w", truncated(err))
		}
		hlen, pos = int64(binary.LittleEndian.Uint16(b[:])), 10
	case 2, 3:
		var b [4]byte
		if _, err := io.ReadFull(r, b[:]); err != nil {
			return nil, fmt.Errorf("npy header length: %w", truncated(err))
		}
		hlen, pos = int64(binary.LittleEndian.Uint32(b[:])), 12
	default:
		return nil, fmt.Errorf("npy format version %d.%d: only 1.0, 2.0 and 3.0 are known", h.Major, h.Minor)
	}
	if h.Minor != 0 {
		return nil, fmt.Errorf("npy format version %d.%d: only 1.0, 2.0 and 3.0 are known", h.Major, h.Minor)
	}
	if hlen > maxHeaderLen {
		return nil, fmt.Errorf("npy header of %d bytes is implausibly long", hlen)
	}
	if pos+hlen > size {
		return nil, fmt.Errorf("npy header of %d bytes: file holds only %d: truncated", hlen, size-pos)
	}
	if (pos+hlen)%16 != 0 {
		return nil, fmt.Errorf("npy header: preamble of %d bytes is not a multiple of 64 (or 16) as the format requires", pos+hlen)
	}
	buf := make([]byte, hlen)
	if _, err := io.ReadFull(r, buf); err != nil {
		return nil, fmt.Errorf("npy header: %w", truncated(err))
	}
	if err := h.parse(buf); err != nil {
		return nil, fmt.Errorf("npy header: %w", err)
	}
	n := int64(1)
	for _, s := range h.Shape {
		if s != 0 && n > math.MaxInt64/int64(s)/8 {
			return nil, fmt.Errorf("npy shape %v is too large", h.Shape)
		}
		n *= int64(s)
	}
	h.dataLen = n * int64(h.dtype.size)
	if rest := size - pos - hlen; rest != h.dataLen {
		what := "truncated"
		if rest > h.dataLen {
			what = "trailing bytes after the data"
		}
		return nil, fmt.Errorf("npy shape %v of %s needs %d data bytes, file has %d: %s", h.Shape, h.Descr, h.dataLen, rest, what)
	}
	return h, nil
}

func truncated(err error) error {
	if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
		return errors.New("file is truncated")
	}
	return err
}

// parse reads the header dict.
func (h *npyHeader) parse(b []byte) error {
	if len(b) == 0 || b[len(b)-1] != '\n' {
		return errors.New("not terminated by a newline")
	}
	if h.Major < 3 {
		for _, c := range b {
			if c >= 0x80 {
				return fmt.Errorf("non-ASCII byte 0x%02x in a version %d.0 header (only 3.0 allows UTF-8)", c, h.Major)
			}
		}
	} else if !utf8.Valid(b) {
		return errors.New("version 3.0 header is not valid UTF-8")
	}
	p := &pyParser{s: strings.TrimRight(string(b), " \n")}
	seen := map[string]bool{}
	if err := p.dict(func(key string) error {
		if seen[key] {
			return fmt.Errorf("key %q twice", key)
		}
		seen[key] = true
		switch key {
		case "descr":
			s, err := p.str()
			h.Descr = s
			return err
		case "fortran_order":
			v, err := p.boolean()
			h.Fortran = v
			return err
		case "shape":
			v, err := p.tuple()
			h.Shape = v
			return err
		}
		return fmt.Errorf("unknown key %q", key)
	}); err != nil {
		return err
	}
	for _, k := range []string{"descr", "fortran_order", "shape"} {
		if !seen[k] {
			return fmt.Errorf("no %q key", k)
		}
	}
	if h.Fortran {
		return errors.New("fortran_order is True: tpcscan reads C-order arrays only (write with np.ascontiguousarray)")
	}
	dt, ok := dtypes[h.Descr]
	if !ok {
		return fmt.Errorf("dtype %q is not one of float32, float64, int16, uint16 or int32 (<f4 <f8 <i2 <u2 <i4, or big-endian)", h.Descr)
	}
	h.dtype = dt
	return nil
}

// pyParser reads the small subset of Python literal syntax that .npy
// headers use: a dict of string keys to strings, booleans and int tuples.
type pyParser struct {
	s   string
	pos int
}

func (p *pyParser) skip() {
	for p.pos < len(p.s) && (p.s[p.pos] == ' ' || p.s[p.pos] == '\t' || p.s[p.pos] == '\n') {
		p.pos++
	}
}

func (p *pyParser) eat(c byte) bool {
	p.skip()
	if p.pos < len(p.s) && p.s[p.pos] == c {
		p.pos++
		return true
	}
	return false
}

func (p *pyParser) errorf(format string, args ...any) error {
	return fmt.Errorf("at byte %d: %s", p.pos, fmt.Sprintf(format, args...))
}

func (p *pyParser) dict(value func(key string) error) error {
	if !p.eat('{') {
		return p.errorf("expected '{'")
	}
	for {
		if p.eat('}') {
			break
		}
		key, err := p.str()
		if err != nil {
			return err
		}
		if !p.eat(':') {
			return p.errorf("expected ':' after %q", key)
		}
		if err := value(key); err != nil {
			return err
		}
		if p.eat('}') {
			break
		}
		if !p.eat(',') {
			return p.errorf("expected ',' or '}'")
		}
	}
	p.skip()
	if p.pos != len(p.s) {
		return p.errorf("unexpected text after the dict")
	}
	return nil
}

func (p *pyParser) str() (string, error) {
	p.skip()
	if p.pos >= len(p.s) || (p.s[p.pos] != '\'' && p.s[p.pos] != '"') {
		return "", p.errorf("expected a quoted string")
	}
	q := p.s[p.pos]
	end := strings.IndexByte(p.s[p.pos+1:], q)
	if end < 0 {
		return "", p.errorf("unterminated string")
	}
	s := p.s[p.pos+1 : p.pos+1+end]
	if strings.IndexByte(s, '\\') >= 0 {
		return "", p.errorf("escapes in strings are not supported")
	}
	p.pos += end + 2
	return s, nil
}

func (p *pyParser) boolean() (bool, error) {
	p.skip()
	for _, w := range []struct {
		s string
		v bool
	}{{"True", true}, {"False", false}} {
		if strings.HasPrefix(p.s[p.pos:], w.s) {
			p.pos += len(w.s)
			return w.v, nil
		}
	}
	return false, p.errorf("expected True or False")
}

// tuple reads "(3, 4)", "(3,)" or "()".
func (p *pyParser) tuple() ([]int, error) {
	if !p.eat('(') {
		return nil, p.errorf("expected '(' for the shape")
	}
	out := []int{}
	for {
		if p.eat(')') {
			return out, nil
		}
		p.skip()
		start := p.pos
		for p.pos < len(p.s) && p.s[p.pos] >= '0' && p.s[p.pos] <= '9' {
			p.pos++
		}
		n, err := strconv.Atoi(p.s[start:p.pos])
		if err != nil || n < 0 {
			return nil, p.errorf("shape entry %q is not a non-negative integer", p.s[start:p.pos])
		}
		if p.pos < len(p.s) && p.s[p.pos] == 'L' { // Python 2 long suffix
			p.pos++
		}
		if len(out) == 32 {
			return nil, p.errorf("shape has more than 32 dimensions")
		}
		out = append(out, n)
		if p.eat(')') {
			return out, nil
		}
		if !p.eat(',') {
			return nil, p.errorf("expected ',' or ')' in the shape")
		}
	}
}

// chunk is how many bytes the readers convert at a time, so that reading a
// plane costs one allocation of the output and a small buffer.
const chunk = 64 << 10

// readFloat32 reads the data of h as float32, rejecting NaN and ±Inf.
func (h *npyHeader) readFloat32(r io.Reader) ([]float32, error) {
	if h.dtype.descr[1:] == "i4" {
		return nil, fmt.Errorf("dtype %s is for pixel truth, not charge", h.Descr)
	}
	out := make([]float32, h.Len())
	if h.dtype.descr[1:] == "f4" && h.dtype.order == hostOrder() {
		return out, h.readNativeFloat32(r, out)
	}
	err := h.chunks(r, func(first int, b []byte) error {
		dst := out[first : first+len(b)/h.dtype.size]
		decodeFloat32(dst, b, h.dtype)
		for k, v := range dst {
			// v−v is 0 for finite v and NaN for NaN and ±Inf.
			if v-v != 0 {
				return h.badValue(first+k, b[k*h.dtype.size:(k+1)*h.dtype.size])
			}
		}
		return nil
	})
	return out, err
}

// hostOrder returns the machine's byte order as one of the two values
// dtype.order holds.
func hostOrder() binary.ByteOrder {
	if binary.NativeEndian.Uint16([]byte{1, 0}) == 1 {
		return binary.LittleEndian
	}
	return binary.BigEndian
}

// readNativeFloat32 reads float32 data stored in the machine's own byte
// order straight into out's memory: no copy and no conversion, so reading
// a plane costs little more than the read itself.
func (h *npyHeader) readNativeFloat32(r io.Reader, out []float32) error {
	if len(out) == 0 {
		return nil
	}
	raw := unsafe.Slice((*byte)(unsafe.Pointer(&out[0])), len(out)*4)
	if _, err := io.ReadFull(r, raw); err != nil {
		return fmt.Errorf("npy data: %w", truncated(err))
	}
	if !allFinite(unsafe.Slice((*uint32)(unsafe.Pointer(&out[0])), len(out))) {
		for k, v := range out {
			// v−v is 0 for finite v and NaN for NaN and ±Inf.
			if v-v != 0 {
				return h.badValue(k, raw[4*k:4*k+4])
			}
		}
	}
	return nil
}

// allFinite reports whether no float32 bit pattern in bits is NaN or ±Inf.
// It is branch-free: an exponent field of all ones (0x7f8) is the only one
// that carries into bit 31 when one is added to it.
func allFinite(bits []uint32) bool {
	var carry uint32
	for _, b := range bits {
		carry |= b&0x7f800000 + 0x00800000
	}
	return carry&0x80000000 == 0
}

// decodeFloat32 converts a chunk of raw elements; the type switch sits
// outside the loops so that each loop is tight.
func decodeFloat32(dst []float32, b []byte, dt dtype) {
	o := dt.order
	switch dt.descr[1:] {
	case "f4":
		if o == binary.ByteOrder(binary.LittleEndian) {
			// The common case, with the byte order known at compile time so
			// that each element is one load, not an interface call.
			for k := range dst {
				dst[k] = math.Float32frombits(binary.LittleEndian.Uint32(b[4*k:]))
			}
			return
		}
		for k := range dst {
			dst[k] = math.Float32frombits(o.Uint32(b[4*k:]))
		}
	case "f8":
		for k := range dst {
			f := math.Float64frombits(o.Uint64(b[8*k:]))
			if math.Abs(f) > math.MaxFloat32 {
				f = math.NaN() // reported by badValue
			}
			dst[k] = float32(f)
		}
	case "i2":
		for k := range dst {
			dst[k] = float32(int16(o.Uint16(b[2*k:])))
		}
	case "u2":
		for k := range dst {
			dst[k] = float32(o.Uint16(b[2*k:]))
		}
	}
}

// badValue describes a non-finite or out-of-range element.
func (h *npyHeader) badValue(i int, raw []byte) error {
	var f float64
	if h.dtype.size == 8 {
		f = math.Float64frombits(h.dtype.order.Uint64(raw))
	} else {
		f = float64(math.Float32frombits(h.dtype.order.Uint32(raw)))
	}
	if !math.IsNaN(f) && !math.IsInf(f, 0) {
		return fmt.Errorf("element %s is %g, beyond float32 range", h.index(i), f)
	}
	return fmt.Errorf("element %s is %v: charge must be finite", h.index(i), f)
}

// readInt32 reads the data of h as int32 (pixel truth).
func (h *npyHeader) readInt32(r io.Reader) ([]int32, error) {
	if h.dtype.descr[1:] != "i4" {
		return nil, fmt.Errorf("dtype %s: pixel truth must be int32 (<i4)", h.Descr)
	}
	out := make([]int32, h.Len())
	err := h.chunks(r, func(first int, b []byte) error {
		dst := out[first : first+len(b)/4]
		for k := range dst {
			dst[k] = int32(h.dtype.order.Uint32(b[4*k:]))
		}
		return nil
	})
	return out, err
}

// chunks reads the data in pieces of whole elements and hands each to f
// with the index of its first element.
func (h *npyHeader) chunks(r io.Reader, f func(first int, b []byte) error) error {
	size := h.dtype.size
	buf := make([]byte, min(int64(chunk), max(h.dataLen, int64(size))))
	buf = buf[:len(buf)/size*size]
	first := 0
	for left := h.dataLen; left > 0; {
		n := min(int64(len(buf)), left)
		if _, err := io.ReadFull(r, buf[:n]); err != nil {
			return fmt.Errorf("npy data: %w", truncated(err))
		}
		if err := f(first, buf[:n]); err != nil {
			return err
		}
		first += int(n) / size
		left -= n
	}
	return nil
}

// index formats a flat index as a multi-index, e.g. [3, 17].
func (h *npyHeader) index(i int) string {
	idx := make([]string, len(h.Shape))
	for k := len(h.Shape) - 1; k >= 0; k-- {
		if h.Shape[k] > 0 {
			idx[k] = strconv.Itoa(i % h.Shape[k])
			i /= h.Shape[k]
		}
	}
	return "[" + strings.Join(idx, ", ") + "]"
}

// writeNPYHeader writes a version 1.0 preamble and header padded to 64 bytes.
func writeNPYHeader(w io.Writer, descr string, shape []int) error {
	dims := make([]string, len(shape))
	for i, s := range shape {
		dims[i] = strconv.Itoa(s)
	}
	tuple := strings.Join(dims, ", ")
	if len(shape) == 1 {
		tuple += ","
	}
	hdr := fmt.Sprintf("{'descr': '%s', 'fortran_order': False, 'shape': (%s), }", descr, tuple)
	pad := 64 - (10+len(hdr)+1)%64
	if pad == 64 {
		pad = 0
	}
	hdr += strings.Repeat(" ", pad) + "\n"
	if len(hdr) > math.MaxUint16 {
		return fmt.Errorf("npy header of %d bytes is too long", len(hdr))
	}
	var pre [10]byte
	copy(pre[:], npyMagic)
	pre[6], pre[7] = 1, 0
	binary.LittleEndian.PutUint16(pre[8:], uint16(len(hdr)))
	if _, err := w.Write(pre[:]); err != nil {
		return err
	}
	_, err := io.WriteString(w, hdr)
	return err
}

// writeFloat32NPY writes a [wires, ticks] float32 array in C order.
func writeFloat32NPY(w io.Writer, wires, ticks int, pix []float32) error {
	bw := bufio.NewWriterSize(w, chunk)
	if err := writeNPYHeader(bw, "<f4", []int{wires, ticks}); err != nil {
		return err
	}
	var b [4]byte
	for _, v := range pix {
		binary.LittleEndian.PutUint32(b[:], math.Float32bits(v))
		bw.Write(b[:]) // errors surface at Flush
	}
	return bw.Flush()
}

// writeInt32NPY writes a [wires, ticks] int32 array in C order.
func writeInt32NPY(w io.Writer, wires, ticks int, pix []int32) error {
	bw := bufio.NewWriterSize(w, chunk)
	if err := writeNPYHeader(bw, "<i4", []int{wires, ticks}); err != nil {
		return err
	}
	var b [4]byte
	for _, v := range pix {
		binary.LittleEndian.PutUint32(b[:], uint32(v))
		bw.Write(b[:])
	}
	return bw.Flush()
}
