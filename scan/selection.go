package scan

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/tpcscan/tpcscan/scan/detector"
)

// Selection file columns. The first four are required, in any order; the
// five box columns are optional together. A row's box cells are either all
// empty (no box) or all filled.
//
//	event,selected,class,score[,box_plane,box_wire_lo,box_tick_lo,box_wire_hi,box_tick_hi]
//
// event is the dataset's event ID; selected is true/false (also 1/0,
// yes/no); class is the predicted class key (may be empty for events not
// selected); score is a finite number (the algorithm's output, higher
// meaning more signal-like); the box is on one plane (ind1, ind2, coll) in
// detector wire and tick numbers.
var (
	selectionRequired = []string{"event", "selected", "class", "score"}
	selectionBox      = []string{"box_plane", "box_wire_lo", "box_tick_lo", "box_wire_hi", "box_tick_hi"}
)

// maxSelectionRows bounds what ReadSelection accepts, so a hostile or
// mistaken file cannot exhaust memory.
const maxSelectionRows = 10_000_000

// ReadSelection reads an automated selection's output in CSV from r; name
// (the file path) prefixes every error with the line it is about.
func ReadSelection(r io.Reader, name string) ([]Selection, error) {
	cr := csv.NewReader(r)
	cr.ReuseRecord = true
	cr.Comment = '#'
	head, err := cr.Read()
	if err == io.EOF {
		return nil, fmt.Errorf("%s: empty file: want a header %s", name, strings.Join(selectionRequired, ","))
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	col, err := selectionColumns(head)
	if err != nil {
		line, _ := cr.FieldPos(0)
		return nil, fmt.Errorf("%s:%d: %w", name, line, err)
	}
	var out []Selection
	seen := map[string]int{}
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
		line, _ := cr.FieldPos(0)
		if len(out) >= maxSelectionRows {
			return nil, fmt.Errorf("%s:%d: more than %d rows", name, line, maxSelectionRows)
		}
		s, err := parseSelection(rec, col)
		if err != nil {
			return nil, fmt.Errorf("%s:%d: %w", name, line, err)
		}
		if prev, ok := seen[s.EventID]; ok {
			return nil, fmt.Errorf("%s:%d: event %s already given on line %d", name, line, s.EventID, prev)
		}
		seen[s.EventID] = line
		out = append(out, s)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("%s: no rows after the header", name)
	}
	return out, nil
}

// selectionColumns maps column names to indices; box columns get -1 when absent.
func selectionColumns(head []string) (map[string]int, error) {
	col := map[string]int{}
	for i, h := range head {
		h = strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff")))
		if _, dup := col[h]; dup {
			return nil, fmt.Errorf("column %q appears twice", h)
		}
		col[h] = i
	}
	var errs []error
	for _, c := range selectionRequired {
		if _, ok := col[c]; !ok {
			errs = append(errs, fmt.Errorf("missing column %q", c))
		}
	}
	boxes := 0
	for _, c := range selectionBox {
		if _, ok := col[c]; ok {
			boxes++
		}
	}
	if boxes != 0 && boxes != len(selectionBox) {
		errs = append(errs, fmt.Errorf("box columns must come together: %s", strings.Join(selectionBox, ",")))
	}
	known := append(append([]string{}, selectionRequired...), selectionBox...)
	for h := range col {
		if !contains(known, h) {
			errs = append(errs, fmt.Errorf("unknown column %q (known: %s)", h, strings.Join(known, ",")))
		}
	}
	if err := errors.Join(errs...); err != nil {
		return nil, fmt.Errorf("selection header: %w", err)
	}
	return col, nil
}

func contains(xs []string, x string) bool {
	for _, y := range xs {
		if x == y {
			return true
		}
	}
	return false
}

func parseSelection(rec []string, col map[string]int) (Selection, error) {
	get := func(c string) string { return strings.TrimSpace(rec[col[c]]) }
	s := Selection{EventID: get("event"), Class: get("class")}
	if s.EventID == "" {
		return s, errors.New("empty event")
	}
	if CleanText(s.EventID) != s.EventID || CleanText(s.Class) != s.Class {
		return s, errors.New("control characters in event or class")
	}
	switch strings.ToLower(get("selected")) {
	case "true", "1", "yes", "y":
		s.Selected = true
	case "false", "0", "no", "n":
	default:
		return s, fmt.Errorf("event %s: selected must be true or false, got %q", s.EventID, get("selected"))
	}
	v, err := strconv.ParseFloat(get("score"), 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return s, fmt.Errorf("event %s: score must be a finite number, got %q", s.EventID, get("score"))
	}
	s.Score = v
	if _, ok := col["box_plane"]; !ok {
		return s, nil
	}
	cells := make([]string, len(selectionBox))
	filled := 0
	for i, c := range selectionBox {
		if cells[i] = get(c); cells[i] != "" {
			filled++
		}
	}
	switch filled {
	case 0:
		return s, nil
	case len(selectionBox):
	default:
		return s, fmt.Errorf("event %s: box cells must be all empty or all filled", s.EventID)
	}
	box, err := parseBox(cells)
	if err != nil {
		return s, fmt.Errorf("event %s: %w", s.EventID, err)
	}
	s.Box = box
	return s, nil
}

func parseBox(cells []string) (*Mark, error) {
	role := detector.Role(cells[0])
	switch role {
	case detector.Induction1, detector.Induction2, detector.Collection:
	default:
		return nil, fmt.Errorf("box_plane must be ind1, ind2 or coll, got %q", cells[0])
	}
	var v [4]float64
	for i := range v {
		x, err := strconv.ParseFloat(cells[i+1], 64)
		if err != nil || math.IsNaN(x) || math.IsInf(x, 0) || x < 0 {
			return nil, fmt.Errorf("%s must be a number ≥ 0, got %q", selectionBox[i+1], cells[i+1])
		}
		v[i] = x
	}
	if v[0] > v[2] || v[1] > v[3] {
		return nil, fmt.Errorf("box low corner (%g, %g) is above its high corner (%g, %g)", v[0], v[1], v[2], v[3])
	}
	return &Mark{Kind: MarkBox, Plane: role, Points: []detector.PlanePoint{{Wire: v[0], Tick: v[1]}, {Wire: v[2], Tick: v[3]}}}, nil
}
