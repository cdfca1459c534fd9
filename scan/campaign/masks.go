package campaign

import (
	"bufio"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"

	"github.com/tpcscan/tpcscan/scan"
)

// MaskOptions says which pixels a track mark claims.
type MaskOptions struct {
	// Threshold is the charge a pixel needs, in units of the plane's noise
	// RMS (NoiseRMS). Default 3.
	Threshold float64
	// Wires and Ticks are the half-axes of the ellipse around a track's
	// polyline within which pixels are claimed. Defaults 2 wires, 6 ticks.
	Wires, Ticks float64
}

// DefaultMaskOptions returns the documented defaults.
func DefaultMaskOptions() MaskOptions { return MaskOptions{Threshold: 3, Wires: 2, Ticks: 6} }

// ParticleCodes maps a schema's particle keys to mask codes: 0 is no
// particle, then 1, 2, … in the schema's particle order (the default
// schema: 1 mu, 2 p, 3 pi, 4 e, 5 gamma, 6 other).
func ParticleCodes(s scan.Schema) map[string]uint8 {
	codes := make(map[string]uint8, len(s.Particles))
	for i, p := range s.Particles {
		if i < 254 {
			codes[p.Key] = uint8(i + 1)
		}
	}
	return codes
}

// NoiseRMS estimates a plane's noise from the median absolute deviation
// of all its samples: σ ≈ 1.4826 · MAD, the consistent estimator for
// Gaussian noise (Hampel 1974; Rousseeuw & Croux 1993). Signal pixels are
// few, so they barely move the median.
func NoiseRMS(img *scan.Image) float64 {
	if len(img.Pix) == 0 {
		return 0
	}
	v := sample(img.Pix, rmsSamples)
	med := medianF32(v)
	for i, x := range v {
		v[i] = float32(math.Abs(float64(x - med)))
	}
	return 1.4826 * float64(medianF32(v))
}

// rmsSamples bounds the work of NoiseRMS on a full readout (tens of
// millions of samples): a regular sample of a million estimates the MAD
// to well under 1 %.
const rmsSamples = 1 << 20

// sample returns a copy of x, or of every k-th element when x is longer than n.
func sample(x []float32, n int) []float32 {
	if len(x) <= n {
		return slices.Clone(x)
	}
	k := (len(x) + n - 1) / n
	out := make([]float32, 0, len(x)/k+1)
	for i := 0; i < len(x); i += k {
		out = append(out, x[i])
	}
	return out
}

func medianF32(v []float32) float32 {
	slices.Sort(v)
	n := len(v)
	if n%2 == 1 {
		return v[n/2]
	}
	return (v[n/2-1] + v[n/2]) / 2
}

// Mask labels the pixels of one plane image from the track marks on that
// plane: a pixel above threshold·rms charge within the ellipse distance of
// a track's polyline gets the track's particle code; where tracks overlap,
// the nearest wins. The result has the image's shape, wire-major.
func Mask(img *scan.Image, plane string, marks []scan.Mark, codes map[string]uint8, rms float64, opt MaskOptions) []uint8 {
	out := make([]uint8, len(img.Pix))
	best := make([]float32, len(img.Pix))
	for i := range best {
		best[i] = math.MaxFloat32
	}
	thr := float32(opt.Threshold * rms)
	for _, m := range marks {
		code, ok := codes[m.Particle]
		if m.Kind != scan.MarkTrack || string(m.Plane) != plane || !ok {
			continue
		}
		for i := 1; i < len(m.Points); i++ {
			a, b := m.Points[i-1], m.Points[i]
			paintSegment(img, out, best, code, thr, opt,
				a.Wire-float64(img.Wire0), a.Tick-float64(img.Tick0), b.Wire-float64(img.Wire0), b.Tick-float64(img.Tick0))
		}
	}
	return out
}

// paintSegment claims pixels near the segment (w0,t0)–(w1,t1), given in
// image-local continuous coordinates, in units scaled by the ellipse.
func paintSegment(img *scan.Image, out []uint8, best []float32, code uint8, thr float32, opt MaskOptions, w0, t0, w1, t1 float64) {
	wlo := max(0, int(math.Floor(min(w0, w1)-opt.Wires)))
	whi := min(img.Wires-1, int(math.Ceil(max(w0, w1)+opt.Wires)))
	tlo := max(0, int(math.Floor(min(t0, t1)-opt.Ticks)))
	thi := min(img.Ticks-1, int(math.Ceil(max(t0, t1)+opt.Ticks)))
	// Scaled coordinates: the ellipse becomes the unit circle.
	ax, ay := w0/opt.Wires, t0/opt.Ticks
	dx, dy := (w1-w0)/opt.Wires, (t1-t0)/opt.Ticks
	den := dx*dx + dy*dy
	for w := wlo; w <= whi; w++ {
		for t := tlo; t <= thi; t++ {
			i := w*img.Ticks + t
			if img.Pix[i] <= thr {
				continue
			}
			px, py := float64(w)/opt.Wires, float64(t)/opt.Ticks
			u := 0.0
			if den > 0 {
				u = math.Max(0, math.Min(1, ((px-ax)*dx+(py-ay)*dy)/den))
			}
			d := float32(math.Hypot(px-ax-u*dx, py-ay-u*dy))
			if d <= 1 && d < best[i] {
				best[i], out[i] = d, code
			}
		}
	}
}

// WriteNPYUint8 writes a 2-D uint8 array [rows, cols] in C order as a NumPy
// .npy file, format version 1.0 (NumPy Enhancement Proposal 1).
func WriteNPYUint8(w io.Writer, rows, cols int, data []uint8) error {
	if len(data) != rows*cols {
		return fmt.Errorf("write npy: %d values for shape (%d, %d)", len(data), rows, cols)
	}
	header := fmt.Sprintf("{'descr': '|u1', 'fortran_order': False, 'shape': (%d, %d), }", rows, cols)
	// Magic (6) + version (2) + length (2) + header + '\n' is a multiple of 64.
	pad := 64 - (10+len(header)+1)%64
	if pad == 64 {
		pad = 0
	}
	header += strings.Repeat(" ", pad) + "\n"
	bw := bufio.NewWriter(w)
	bw.WriteString("\x93NUMPY\x01\x00")
	binary.Write(bw, binary.LittleEndian, uint16(len(header)))
	bw.WriteString(header)
	bw.Write(data)
	return bw.Flush()
}

// MaskFile describes one written mask array.
type MaskFile struct {
	File         string  `json:"file"` // relative to the masks folder
	Event        string  `json:"event"`
	Scanner      string  `json:"scanner,omitempty"`
	Method       string  `json:"method,omitempty"`
	Plane        string  `json:"plane"`
	Wire0        int     `json:"wire0"` // detector wire of row 0
	Tick0        int     `json:"tick0"` // detector tick of column 0
	Wires        int     `json:"wires"`
	Ticks        int     `json:"ticks"`
	NoiseRMS     float64 `json:"noise_rms"`
	ThresholdADC float64 `json:"threshold_adc"`
	Pixels       int     `json:"labelled_pixels"`
}

// MaskManifest is written beside the masks as masks.json.
type MaskManifest struct {
	Codes   map[string]string `json:"codes"` // code → particle key; "0" is none
	Options MaskOptions       `json:"options"`
	Files   []MaskFile        `json:"files"`
}

// WriteMasks writes, for every record, one mask per plane of its event
// into dir/<event>/<scanner or consensus-method>-<plane>.npy, and the
// manifest dir/masks.json. load reads an event's planes.
func WriteMasks(dir string, recs []Record, load func(event string) (*scan.Event, error), schema scan.Schema, opt MaskOptions, progress func(done, total int)) (MaskManifest, error) {
	codes := ParticleCodes(schema)
	man := MaskManifest{Codes: map[string]string{"0": "none"}, Options: opt}
	for k, c := range codes {
		man.Codes[fmt.Sprint(c)] = k
	}
	byEvent := map[string][]Record{}
	var order []string
	for _, r := range recs {
		if _, ok := byEvent[r.Event]; !ok {
			order = append(order, r.Event)
		}
		byEvent[r.Event] = append(byEvent[r.Event], r)
	}
	root, err := openMaskRoot(dir)
	if err != nil {
		return man, err
	}
	defer root.Close()
	for n, id := range order {
		ev, err := load(id)
		if err != nil {
			return man, fmt.Errorf("masks: event %s: %w", id, err)
		}
		files, err := writeEventMasks(root, ev, byEvent[id], codes, opt)
		if err != nil {
			return man, fmt.Errorf("masks: event %s: %w", id, err)
		}
		man.Files = append(man.Files, files...)
		if progress != nil {
			progress(n+1, len(order))
		}
	}
	if err := writeJSONFile(root, "masks.json", man); err != nil {
		return man, fmt.Errorf("masks: %w", err)
	}
	return man, nil
}

func writeEventMasks(root maskRoot, ev *scan.Event, recs []Record, codes map[string]uint8, opt MaskOptions) ([]MaskFile, error) {
	if ev.Detector == nil || len(ev.Planes) != len(ev.Detector.Planes) {
		return nil, fmt.Errorf("planes do not match the detector")
	}
	rms := make([]float64, len(ev.Planes))
	for i, img := range ev.Planes {
		rms[i] = NoiseRMS(img)
	}
	evDir := safeName(ev.ID)
	if err := root.Mkdir(evDir); err != nil {
		return nil, err
	}
	var files []MaskFile
	for _, r := range recs {
		who := safeName(r.Scanner)
		if r.Method != "" {
			who = "consensus-" + safeName(r.Method)
		}
		for i, img := range ev.Planes {
			role := string(ev.Detector.Planes[i].Role)
			mask := Mask(img, role, r.label.Marks, codes, rms[i], opt)
			f := MaskFile{File: evDir + "/" + who + "-" + role + ".npy", Event: ev.ID, Scanner: r.Scanner, Method: r.Method, Plane: role,
				Wire0: img.Wire0, Tick0: img.Tick0, Wires: img.Wires, Ticks: img.Ticks, NoiseRMS: rms[i], ThresholdADC: opt.Threshold * rms[i]}
			for _, c := range mask {
				if c != 0 {
					f.Pixels++
				}
			}
			if err := root.WriteFile(f.File, func(w io.Writer) error { return WriteNPYUint8(w, img.Wires, img.Ticks, mask) }); err != nil {
				return nil, err
			}
			files = append(files, f)
		}
	}
	return files, nil
}

// safeName keeps letters, digits, '.', '-' and '_' so that an event or
// scanner name cannot leave the masks folder.
func safeName(s string) string {
	b := []byte(s)
	for i, c := range b {
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-' || c == '_' || c == '.') {
			b[i] = '_'
		}
	}
	out := strings.Trim(string(b), ".")
	if out == "" {
		return "_"
	}
	return out
}
