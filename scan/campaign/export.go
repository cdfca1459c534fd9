package campaign

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// Record is one exported label: a scanner's pass, or an event's consensus.
// Marks carry wire/tick and, where the detector geometry is known, cm.
type Record struct {
	Campaign      string     `json:"campaign"`
	CampaignID    int64      `json:"campaign_id"`
	Schema        string     `json:"schema"`
	SchemaVersion int        `json:"schema_version"`
	Event         string     `json:"event"`
	Scanner       string     `json:"scanner,omitempty"`
	Round         int        `json:"round,omitempty"`
	State         string     `json:"state,omitempty"`
	Method        string     `json:"method,omitempty"`    // consensus only
	Posterior     *float64   `json:"posterior,omitempty"` // consensus only
	DecidedBy     string     `json:"decided_by,omitempty"`
	Class         string     `json:"class"`
	Flags         []string   `json:"flags"`
	Confidence    string     `json:"confidence,omitempty"`
	Verdict       string     `json:"verdict,omitempty"`
	Comment       string     `json:"comment,omitempty"`
	Seconds       float64    `json:"seconds,omitempty"`
	Revisions     int        `json:"revisions,omitempty"`
	Time          time.Time  `json:"time"`
	Vertex        *Vec3      `json:"vertex_cm,omitempty"`
	Marks         []MarkOut  `json:"marks"`
	label         scan.Label // for masks
	detector      *detector.Detector
}

// Vec3 is a point in cm.
type Vec3 struct {
	X float64 `json:"x"`
	Y float64 `json:"y"`
	Z float64 `json:"z"`
}

// MarkOut is a mark in wire/tick with its cm equivalents on its plane: x is
// the drift distance of the tick (for an interaction at trigger time) and
// u the wire coordinate across the plane's wires.
type MarkOut struct {
	Kind      string     `json:"kind"`
	Plane     string     `json:"plane"`
	Particle  string     `json:"particle,omitempty"`
	Points    []PointOut `json:"points"`
	Precision PrecOut    `json:"precision"`
	LengthCm  *float64   `json:"projected_length_cm,omitempty"` // tracks: polyline length in this plane's (u, x)
}

// PointOut is one point of a mark.
type PointOut struct {
	Wire float64  `json:"wire"`
	Tick float64  `json:"tick"`
	UCm  *float64 `json:"u_cm,omitempty"`
	XCm  *float64 `json:"x_cm,omitempty"`
}

// PrecOut is a mark's precision: the screen cell it was placed in.
type PrecOut struct {
	Wires float64  `json:"wires"`
	Ticks float64  `json:"ticks"`
	UCm   *float64 `json:"u_cm,omitempty"`
	XCm   *float64 `json:"x_cm,omitempty"`
}

// PassRecord converts a pass; det may be nil (then no cm).
func PassRecord(c scan.Campaign, det *detector.Detector, p scan.Pass) Record {
	r := baseRecord(c, det, p.EventID, p.Label)
	r.Scanner, r.Round, r.State = p.Scanner, p.Round, string(p.State)
	r.Seconds, r.Revisions, r.Time = p.Seconds, p.Revisions, p.Updated.UTC()
	return r
}

// ConsensusRecord converts a consensus label; det may be nil.
func ConsensusRecord(c scan.Campaign, det *detector.Detector, x scan.Consensus) Record {
	r := baseRecord(c, det, x.EventID, x.Label)
	post := x.Posterior
	r.Method, r.Posterior, r.DecidedBy, r.Time = x.Method, &post, x.By, x.At.UTC()
	return r
}

func baseRecord(c scan.Campaign, det *detector.Detector, event string, l scan.Label) Record {
	r := Record{
		Campaign: c.Name, CampaignID: c.ID, Schema: c.Schema.Name, SchemaVersion: c.Schema.Version,
		Event: event, Class: l.Class, Flags: l.Flags, Confidence: l.Confidence, Verdict: l.Verdict, Comment: l.Comment,
		label: l,
	}
	if r.Flags == nil {
		r.Flags = []string{}
	}
	r.Marks = make([]MarkOut, len(l.Marks))
	for i, m := range l.Marks {
		r.Marks[i] = markOut(det, m)
	}
	switch {
	case l.Vertex3D != nil:
		r.Vertex = &Vec3{l.Vertex3D.X, l.Vertex3D.Y, l.Vertex3D.Z}
	case det != nil:
		r.Vertex = triangulateVertex(det, l.Marks)
	}
	return r
}

func ptr(v float64) *float64 { return &v }

func markOut(det *detector.Detector, m scan.Mark) MarkOut {
	o := MarkOut{Kind: string(m.Kind), Plane: string(m.Plane), Particle: m.Particle,
		Precision: PrecOut{Wires: m.Precision.Wires, Ticks: m.Precision.Ticks}}
	pi := -1
	if det != nil {
		pi = det.PlaneIndex(m.Plane)
	}
	for _, p := range m.Points {
		po := PointOut{Wire: p.Wire, Tick: p.Tick}
		if pi >= 0 {
			po.UCm = ptr(det.Planes[pi].UOfWire(p.Wire))
			po.XCm = ptr(det.X(p.Tick))
		}
		o.Points = append(o.Points, po)
	}
	if pi >= 0 {
		o.Precision.UCm = ptr(m.Precision.Wires * det.Planes[pi].PitchCm)
		o.Precision.XCm = ptr(m.Precision.Ticks * det.TickCm())
		if m.Kind == scan.MarkTrack {
			var l float64
			for i := 1; i < len(m.Points); i++ {
				l += det.ProjectedLength(pi, m.Points[i-1], m.Points[i])
			}
			o.LengthCm = ptr(l)
		}
	}
	return o
}

// triangulateVertex crosses the vertex marks of the first two planes
// whose wires are not parallel, at the mean of their ticks.
func triangulateVertex(det *detector.Detector, marks []scan.Mark) *Vec3 {
	type v struct {
		plane int
		p     detector.PlanePoint
	}
	var vs []v
	for _, m := range marks {
		if m.Kind == scan.MarkVertex && len(m.Points) == 1 {
			if i := det.PlaneIndex(m.Plane); i >= 0 {
				vs = append(vs, v{i, m.Points[0]})
			}
		}
	}
	for a := 0; a < len(vs); a++ {
		for b := a + 1; b < len(vs); b++ {
			if vs[a].plane == vs[b].plane {
				continue
			}
			pt, err := det.Triangulate(vs[a].plane, vs[a].p.Wire, vs[b].plane, vs[b].p.Wire, (vs[a].p.Tick+vs[b].p.Tick)/2)
			if err == nil {
				return &Vec3{pt.X, pt.Y, pt.Z}
			}
		}
	}
	return nil
}

// WriteJSONL writes one JSON object per line.
func WriteJSONL(w io.Writer, recs []Record) error {
	enc := json.NewEncoder(w)
	for _, r := range recs {
		if err := enc.Encode(r); err != nil {
			return fmt.Errorf("write %s/%s: %w", r.Event, r.Scanner, err)
		}
	}
	return nil
}

// CSVHeader is the export's CSV columns; marks go whole into marks_json.
var CSVHeader = []string{"campaign", "campaign_id", "schema", "schema_version", "event", "scanner", "round", "state",
	"method", "posterior", "class", "flags", "confidence", "verdict", "comment", "seconds", "revisions", "time",
	"vertex_x_cm", "vertex_y_cm", "vertex_z_cm", "marks_json"}

// WriteCSV writes the records as CSV with CSVHeader. Flags are joined by
// ';'. The comment is stripped of control characters so the file is safe
// to print.
func WriteCSV(w io.Writer, recs []Record) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(CSVHeader); err != nil {
		return err
	}
	f := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	for _, r := range recs {
		marks, err := json.Marshal(r.Marks)
		if err != nil {
			return err
		}
		row := []string{r.Campaign, strconv.FormatInt(r.CampaignID, 10), r.Schema, strconv.Itoa(r.SchemaVersion), r.Event, r.Scanner,
			itoa0(r.Round), r.State, r.Method, "", r.Class, strings.Join(r.Flags, ";"), r.Confidence, r.Verdict, scan.CleanText(r.Comment),
			f(r.Seconds), strconv.Itoa(r.Revisions), r.Time.Format(time.RFC3339Nano), "", "", "", string(marks)}
		if r.Posterior != nil {
			row[9] = f(*r.Posterior)
		}
		if r.Vertex != nil {
			row[18], row[19], row[20] = f(r.Vertex.X), f(r.Vertex.Y), f(r.Vertex.Z)
		}
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func itoa0(i int) string {
	if i == 0 {
		return ""
	}
	return strconv.Itoa(i)
}
