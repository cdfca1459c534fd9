package scan

import (
	"time"

	"github.com/tpcscan/tpcscan/scan/detector"
)

// Choice is one option of a schema field: a stable key stored in labels,
// the name shown to scanners and the key that picks it in the tag panel.
type Choice struct {
	Key    string `toml:"key" json:"key"`
	Name   string `toml:"name" json:"name"`
	Hotkey string `toml:"hotkey,omitempty" json:"hotkey,omitempty"`
}

// Schema is what scanners may say about an event. Its Version goes into
// every stored label so that exports say which schema a label follows.
type Schema struct {
	Name       string   `toml:"name" json:"name"`
	Version    int      `toml:"version" json:"version"`
	Classes    []Choice `toml:"classes" json:"classes"`       // topology class: single choice
	Particles  []Choice `toml:"particles" json:"particles"`   // particle types for track marks
	Flags      []Choice `toml:"flags" json:"flags"`           // multi-choice
	Confidence []Choice `toml:"confidence" json:"confidence"` // ordinal, lowest first
}

// MarkKind says what a mark is.
type MarkKind string

// The kinds of mark a scanner can place.
const (
	MarkBox    MarkKind = "box"    // two corners: the interaction region
	MarkVertex MarkKind = "vertex" // one point
	MarkTrack  MarkKind = "track"  // start, end, or a polyline; carries a particle type
)

// Precision is the wire and tick extent of the screen cell a point was
// placed in: a mark placed at full zoom-out is coarse, and says so.
type Precision struct {
	Wires float64 `json:"wires"`
	Ticks float64 `json:"ticks"`
}

// Mark is a spatial annotation on one plane, in that plane's detector wire
// and tick numbers (not image-local indices).
type Mark struct {
	Kind      MarkKind              `json:"kind"`
	Plane     detector.Role         `json:"plane"`
	Points    []detector.PlanePoint `json:"points"`
	Precision Precision             `json:"precision"`
	Particle  string                `json:"particle,omitempty"` // schema particle key, for tracks
}

// Label is one scanner's answer for one event.
type Label struct {
	Class      string   `json:"class,omitempty"`
	Flags      []string `json:"flags,omitempty"`
	Confidence string   `json:"confidence,omitempty"`
	Comment    string   `json:"comment,omitempty"`
	Marks      []Mark   `json:"marks,omitempty"`
	// Vertex3D is set when vertex marks on two planes triangulate.
	Vertex3D *detector.Point `json:"vertex_cm,omitempty"`
	// Verdict is the answer in a verify campaign: "agree" or "disagree"
	// (then Class holds the scanner's correct class).
	Verdict string `json:"verdict,omitempty"`
}

// Campaign modes.
const (
	ModeLabel  = "label"  // blind, full labelling
	ModeVerify = "verify" // the scanner checks the selection's class and box
)

// Campaign is a scanning job.
type Campaign struct {
	ID           int64
	Name         string
	Dataset      string // dataset folder, as given when the campaign was made
	Mode         string
	PerEvent     int  // scanners per event (K)
	Blind        bool // never show the selection or other scanners' labels
	Adaptive     bool // add a pass where the first K disagree on class
	Seed         int64
	Schema       Schema
	Instructions string // Markdown, may be empty
	// Scanners is the roster: when not empty, only these names may join.
	Scanners []string
	Created  time.Time
}

// Selection is an automated algorithm's output for one event.
type Selection struct {
	EventID  string
	Selected bool
	Class    string
	Score    float64
	Box      *Mark // optional, a MarkBox
}

// CampaignEvent is an event of a campaign with its selection output, if any.
type CampaignEvent struct {
	EventID   string
	Selection *Selection
}

// PassState is where a pass stands.
type PassState string

// Pass states. A pass is created assigned, becomes draft on the first save,
// and ends submitted or skipped; later revisions may still follow.
const (
	PassAssigned  PassState = "assigned"
	PassDraft     PassState = "draft"
	PassSubmitted PassState = "submitted"
	PassSkipped   PassState = "skipped"
)

// Pass is one scanner's work on one event.
type Pass struct {
	ID         int64
	CampaignID int64
	EventID    string
	Scanner    string
	Round      int // 1 for the first K passes, 2+ for adaptive extra passes
	State      PassState
	Assigned   time.Time
	Updated    time.Time
	Seconds    float64 // time spent, summed over revisions
	Label      Label   // the latest revision's label
	Revisions  int
}

// Revision is one save of a pass. Revisions are append-only: the current
// label is the latest one.
type Revision struct {
	ID      int64
	PassID  int64
	Seq     int
	State   PassState // draft, submitted or skipped
	Label   Label
	Seconds float64 // time spent since the previous revision
	At      time.Time
	Schema  int // schema version the label follows
}

// Consensus is the merged label of an event.
type Consensus struct {
	CampaignID int64
	EventID    string
	Method     string // "majority", "dawid-skene" or "adjudication"
	Label      Label
	Posterior  float64 // probability of Label.Class under the method; 1 for adjudication
	By         string  // who decided, for adjudication
	At         time.Time
}
