package dataset

import (
	"bufio"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// Hit is one sparse sample: charge on a detector wire at a detector tick.
type Hit struct {
	Plane  detector.Role
	Wire   int
	Tick   int
	Charge float32
}

// maxSamples bounds the dense image built from hits (1 GiB of float32).
const maxSamples = 1 << 28

// hitsHeader is the required first row of a hits CSV file.
var hitsHeader = []string{"plane", "wire", "tick", "charge"}

// ReadHits reads a hits CSV file: the header row plane,wire,tick,charge,
// then one row per hit with the plane role (ind1, ind2, coll), integer
// wire and tick, and a finite charge. Lines starting with '#' are comments.
// name is used in errors. It checks syntax only; planes and ranges are
// checked against a detector by HitImages.
func ReadHits(r io.Reader, name string) ([]Hit, error) {
	hits, err := readHits(r)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return hits, nil
}

func readHits(r io.Reader) ([]Hit, error) {
	cr := csv.NewReader(bufio.NewReader(r))
	cr.Comment = '#'
	cr.FieldsPerRecord = len(hitsHeader)
	cr.ReuseRecord = true
	head, err := cr.Read()
	if errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("empty file: want the header %s", strings.Join(hitsHeader, ","))
	}
	if err != nil {
		return nil, err
	}
	for i, h := range hitsHeader {
		if strings.TrimSpace(head[i]) != h {
			return nil, fmt.Errorf("header is %q, want %s", strings.Join(head, ","), strings.Join(hitsHeader, ","))
		}
	}
	var hits []Hit
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			return hits, nil
		}
		if err != nil {
			return nil, err
		}
		line, _ := cr.FieldPos(0)
		h, err := parseHit(rec)
		if err != nil {
			return nil, fmt.Errorf("line %d: %w", line, err)
		}
		hits = append(hits, h)
	}
}

func parseHit(rec []string) (Hit, error) {
	var h Hit
	h.Plane = detector.Role(strings.TrimSpace(rec[0]))
	switch h.Plane {
	case detector.Induction1, detector.Induction2, detector.Collection:
	default:
		return h, fmt.Errorf("plane %q is not ind1, ind2 or coll", rec[0])
	}
	var err error
	if h.Wire, err = strconv.Atoi(strings.TrimSpace(rec[1])); err != nil {
		return h, fmt.Errorf("wire %q is not an integer", rec[1])
	}
	if h.Tick, err = strconv.Atoi(strings.TrimSpace(rec[2])); err != nil {
		return h, fmt.Errorf("tick %q is not an integer", rec[2])
	}
	c, err := strconv.ParseFloat(strings.TrimSpace(rec[3]), 32)
	if err != nil {
		return h, fmt.Errorf("charge %q is not a number", rec[3])
	}
	if math.IsNaN(c) || math.IsInf(c, 0) {
		return h, fmt.Errorf("charge %q is not finite", rec[3])
	}
	h.Charge = float32(c)
	return h, nil
}

// HitImages turns hits into dense images, one per detector plane. Each
// image spans all the plane's wires and the ticks from the event's first to
// its last hit (the same range on every plane, so the drift axis stays
// shared). Charges of hits on the same wire and tick add up. Hits outside a
// plane's wires or the readout's ticks are an error naming the hit.
func HitImages(det *detector.Detector, hits []Hit) ([]*scan.Image, error) {
	if len(hits) == 0 {
		return nil, errors.New("no hits")
	}
	lo, hi := math.MaxInt, math.MinInt
	for i, h := range hits {
		p := det.PlaneIndex(h.Plane)
		if p < 0 {
			return nil, fmt.Errorf("hit %d: detector has no plane %s", i+1, h.Plane)
		}
		if n := det.Planes[p].Wires; h.Wire < 0 || h.Wire >= n {
			return nil, fmt.Errorf("hit %d: wire %d is outside plane %s (wires 0–%d)", i+1, h.Wire, h.Plane, n-1)
		}
		if h.Tick < 0 || h.Tick >= det.ReadoutTicks {
			return nil, fmt.Errorf("hit %d: tick %d is outside the readout (ticks 0–%d)", i+1, h.Tick, det.ReadoutTicks-1)
		}
		lo, hi = min(lo, h.Tick), max(hi, h.Tick)
	}
	imgs := make([]*scan.Image, len(det.Planes))
	for i, p := range det.Planes {
		if n := int64(p.Wires) * int64(hi-lo+1); n > maxSamples {
			return nil, fmt.Errorf("plane %s: %d wires × %d ticks is more than %d samples", p.Role, p.Wires, hi-lo+1, maxSamples)
		}
		imgs[i] = scan.NewImage(p.Wires, hi-lo+1)
		imgs[i].Tick0 = lo
	}
	for i, h := range hits {
		m := imgs[det.PlaneIndex(h.Plane)]
		k := h.Wire*m.Ticks + h.Tick - lo
		m.Pix[k] += h.Charge
		if math.IsInf(float64(m.Pix[k]), 0) {
			return nil, fmt.Errorf("hit %d: charges on plane %s wire %d tick %d add up beyond float32 range", i+1, h.Plane, h.Wire, h.Tick)
		}
	}
	return imgs, nil
}

// hitPlanes reads an event from a hits CSV file.
func (l *loader) hitPlanes(ev *scan.Event) error {
	rel := l.e.Hits
	f, _, err := openFile(l.root, rel)
	if err != nil {
		return l.fail(rel, err)
	}
	defer f.Close()
	hits, err := readHits(f)
	if err != nil {
		return l.fail(rel, err)
	}
	imgs, err := HitImages(l.det, hits)
	if err != nil {
		return l.fail(rel, err)
	}
	ev.Planes = imgs
	return nil
}
