package scan

import (
	"strings"
	"testing"
)

func TestReadSelection(t *testing.T) {
	in := "# output of the selection, version 3\n" +
		"event,selected,class,score,box_plane,box_wire_lo,box_tick_lo,box_wire_hi,box_tick_hi\n" +
		"ev-000,true,numu-cc,0.91,coll,800,2300,900,2600\n" +
		"ev-001,false,,0.02,,,,,\n" +
		"ev-002,1,nue-cc,-3.5e-1,,,,,\n"
	got, err := ReadSelection(strings.NewReader(in), "sel.csv")
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 3 {
		t.Fatalf("%d rows", len(got))
	}
	if s := got[0]; !s.Selected || s.Class != "numu-cc" || s.Score != 0.91 || s.Box == nil ||
		s.Box.Plane != "coll" || s.Box.Points[0].Wire != 800 || s.Box.Points[1].Tick != 2600 {
		t.Errorf("row 1 = %+v box %+v", s, s.Box)
	}
	if s := got[1]; s.Selected || s.Class != "" || s.Box != nil {
		t.Errorf("row 2 = %+v", s)
	}
	if s := got[2]; !s.Selected || s.Score != -0.35 {
		t.Errorf("row 3 = %+v", s)
	}
	// Columns may come in any order and without boxes.
	got, err = ReadSelection(strings.NewReader("score,class,event,selected\n0.5,cosmic,a,no\n"), "s.csv")
	if err != nil || got[0].EventID != "a" || got[0].Class != "cosmic" || got[0].Selected {
		t.Errorf("reordered columns: %+v, %v", got, err)
	}
}

func TestReadSelectionErrors(t *testing.T) {
	const head = "event,selected,class,score\n"
	const boxHead = "event,selected,class,score,box_plane,box_wire_lo,box_tick_lo,box_wire_hi,box_tick_hi\n"
	tests := []struct {
		name, in, want string
	}{
		{"empty", "", "empty file"},
		{"header only", head, "no rows"},
		{"missing column", "event,selected,class\na,true,x\n", `sel.csv:1: selection header: missing column "score"`},
		{"unknown column", "event,selected,class,score,colour\na,true,x,1,red\n", `unknown column "colour"`},
		{"half box columns", "event,selected,class,score,box_plane\na,true,x,1,coll\n", "box columns must come together"},
		{"bad selected", head + "a,true,x,1\nb,maybe,x,1\n", `sel.csv:3: event b: selected must be true or false, got "maybe"`},
		{"bad score", head + "a,true,x,high\n", "score must be a finite number"},
		{"nan score", head + "a,true,x,NaN\n", "score must be a finite number"},
		{"duplicate", head + "a,true,x,1\na,false,,0\n", "sel.csv:3: event a already given on line 2"},
		{"empty event", head + ",true,x,1\n", "sel.csv:2: empty event"},
		{"partial box", boxHead + "a,true,x,1,coll,1,2,,\n", "all empty or all filled"},
		{"bad plane", boxHead + "a,true,x,1,w,1,2,3,4\n", "box_plane must be ind1, ind2 or coll"},
		{"inverted box", boxHead + "a,true,x,1,coll,10,2,3,4\n", "above its high corner"},
		{"negative wire", boxHead + "a,true,x,1,coll,-1,2,3,4\n", "box_wire_lo must be a number"},
		{"wrong field count", head + "a,true,x\n", "wrong number of fields"},
		{"escape in event", head + "a\x1b[2J,true,x,1\n", "control characters"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := ReadSelection(strings.NewReader(tt.in), "sel.csv")
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Fatalf("err = %v, want %q", err, tt.want)
			}
		})
	}
}

func FuzzReadSelection(f *testing.F) {
	f.Add("event,selected,class,score\na,true,numu-cc,0.9\n")
	f.Add("event,selected,class,score,box_plane,box_wire_lo,box_tick_lo,box_wire_hi,box_tick_hi\na,1,x,1,coll,1,2,3,4\nb,0,,0,,,,,\n")
	f.Add("score,event,class,selected\n1e308,\"q,\"\"x\",c,no\n")
	f.Fuzz(func(t *testing.T, in string) {
		sels, err := ReadSelection(strings.NewReader(in), "fuzz.csv")
		if err != nil {
			if !strings.HasPrefix(err.Error(), "fuzz.csv") {
				t.Fatalf("error does not name the file: %v", err)
			}
			return
		}
		seen := map[string]bool{}
		for _, s := range sels {
			if s.EventID == "" || seen[s.EventID] {
				t.Fatalf("empty or repeated event %q accepted", s.EventID)
			}
			seen[s.EventID] = true
			if s.Box != nil && (len(s.Box.Points) != 2 || s.Box.Points[0].Wire > s.Box.Points[1].Wire) {
				t.Fatalf("bad box accepted: %+v", s.Box)
			}
		}
	})
}
