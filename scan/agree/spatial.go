package agree

import (
	"math"
	"slices"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// BoxIoU returns the intersection over union of two box marks on the same
// plane, in wire × tick. ok is false unless both are boxes with two corners
// on the same plane. Two degenerate (zero-area) boxes give NaN.
func BoxIoU(a, b scan.Mark) (iou float64, ok bool) {
	if a.Kind != scan.MarkBox || b.Kind != scan.MarkBox || a.Plane != b.Plane ||
		len(a.Points) < 2 || len(b.Points) < 2 {
		return 0, false
	}
	ra, rb := rect(a.Points), rect(b.Points)
	iw := math.Min(ra[2], rb[2]) - math.Max(ra[0], rb[0])
	it := math.Min(ra[3], rb[3]) - math.Max(ra[1], rb[1])
	inter := 0.0
	if iw > 0 && it > 0 {
		inter = iw * it
	}
	union := area(ra) + area(rb) - inter
	if union <= 0 {
		return math.NaN(), true
	}
	return inter / union, true
}

// rect is (wire lo, tick lo, wire hi, tick hi) of a box's two corners.
func rect(p []detector.PlanePoint) [4]float64 {
	return [4]float64{math.Min(p[0].Wire, p[1].Wire), math.Min(p[0].Tick, p[1].Tick),
		math.Max(p[0].Wire, p[1].Wire), math.Max(p[0].Tick, p[1].Tick)}
}

func area(r [4]float64) float64 { return (r[2] - r[0]) * (r[3] - r[1]) }

// SpatialPair summarises where two raters put their marks on the events
// both labelled: box IoU per (event, plane) where both drew a box, and the
// 3-D vertex distance in cm where both vertices triangulated.
type SpatialPair struct {
	A, B                    string
	Boxes                   int
	MeanIoU, MedianIoU      float64
	Vertices                int
	MeanVertexCm, MedianCm  float64
	IoUs, VertexDistancesCm []float64
}

// Spatial compares every pair of raters. labels maps item → rater → label.
func Spatial(labels map[string]map[string]scan.Label, raters []string) []SpatialPair {
	items := make([]string, 0, len(labels))
	for it := range labels {
		items = append(items, it)
	}
	slices.Sort(items)
	var out []SpatialPair
	for i := range raters {
		for j := i + 1; j < len(raters); j++ {
			sp := SpatialPair{A: raters[i], B: raters[j]}
			for _, it := range items {
				la, okA := labels[it][raters[i]]
				lb, okB := labels[it][raters[j]]
				if !okA || !okB {
					continue
				}
				sp.IoUs = append(sp.IoUs, boxIoUs(la.Marks, lb.Marks)...)
				if la.Vertex3D != nil && lb.Vertex3D != nil {
					sp.VertexDistancesCm = append(sp.VertexDistancesCm, la.Vertex3D.Dist(*lb.Vertex3D))
				}
			}
			sp.Boxes, sp.Vertices = len(sp.IoUs), len(sp.VertexDistancesCm)
			sp.MeanIoU, sp.MedianIoU = meanMedian(sp.IoUs)
			sp.MeanVertexCm, sp.MedianCm = meanMedian(sp.VertexDistancesCm)
			out = append(out, sp)
		}
	}
	return out
}

// boxIoUs pairs the first box of each rater on each plane.
func boxIoUs(a, b []scan.Mark) []float64 {
	var out []float64
	for _, plane := range []detector.Role{detector.Induction1, detector.Induction2, detector.Collection} {
		ma, okA := firstBox(a, plane)
		mb, okB := firstBox(b, plane)
		if !okA || !okB {
			continue
		}
		if v, ok := BoxIoU(ma, mb); ok && !math.IsNaN(v) {
			out = append(out, v)
		}
	}
	return out
}

func firstBox(ms []scan.Mark, plane detector.Role) (scan.Mark, bool) {
	for _, m := range ms {
		if m.Kind == scan.MarkBox && m.Plane == plane {
			return m, true
		}
	}
	return scan.Mark{}, false
}

func meanMedian(v []float64) (float64, float64) {
	if len(v) == 0 {
		return math.NaN(), math.NaN()
	}
	s := slices.Clone(v)
	slices.Sort(s)
	sum := 0.0
	for _, x := range s {
		sum += x
	}
	med := s[len(s)/2]
	if len(s)%2 == 0 {
		med = (s[len(s)/2-1] + s[len(s)/2]) / 2
	}
	return sum / float64(len(s)), med
}
