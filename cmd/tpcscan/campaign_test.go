package main

import (
	"bufio"
	"context"
	"encoding/binary"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/campaign"
	"github.com/tpcscan/tpcscan/scan/detector"
	"github.com/tpcscan/tpcscan/store/sqlite"
)

// validDataset is the dataset engineer's small fixture: events e1, e2, e3
// of a tiny detector (coll: 20 wires at 0.3 cm, offset 0.15 cm; ind1 at
// 60°, offset −2.5 cm; 0.08 cm per tick, trigger at tick 0).
func validDataset() string { return filepath.Join("..", "..", "testdata", "datasets", "valid") }

func TestCampaignNewStatusList(t *testing.T) {
	db := filepath.Join(t.TempDir(), "scan.db")
	out, err := runForTest(t, "campaign", "new", "--dataset", validDataset(), "--db", db, "--name", "tiny", "--per-event", "2", "--seed", "9", "--scanners", "ana,ben")
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{`campaign "tiny" (id 1)`, "3 events", "seed 9", "roster: ana, ben"} {
		if !strings.Contains(out, want) {
			t.Errorf("campaign new output lacks %q:\n%s", want, out)
		}
	}
	out, err = runForTest(t, "campaign", "list", "--db", db)
	if err != nil || !strings.Contains(out, "tiny") || !strings.Contains(out, "neutrino v1") {
		t.Errorf("campaign list: %v\n%s", err, out)
	}
	labelAll(t, db, "tiny", nil)
	out, err = runForTest(t, "campaign", "status", "--db", db, "--events")
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"3 done, 0 in progress, 0 not started", "ana", "ben", "e2     2/2        0     0        numu-cc numu-cc"} {
		if !strings.Contains(out, want) {
			t.Errorf("status lacks %q:\n%s", want, out)
		}
	}
}

func TestCampaignNewRefuses(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "scan.db")
	write := func(name, body string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	if _, err := runForTest(t, "campaign", "new", "--dataset", validDataset(), "--db", db, "--name", "c"); err != nil {
		t.Fatal(err)
	}
	other := write("other.toml", "name = \"muons\"\nversion = 2\n[[classes]]\nkey = \"mu\"\nname = \"muon\"\n")
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"schema change", []string{"--name", "c", "--schema", other}, "exists already with schema neutrino v1; a campaign's schema is fixed"},
		{"same name", []string{"--name", "c"}, `campaign "c" exists already`},
		{"event missing from dataset", []string{"--name", "d", "--selection", write("sel.csv", "event,selected,class,score\ne1,true,numu-cc,0.9\ne7,true,numu-cc,0.8\n")}, "1 selection events are not in dataset"},
		{"bad schema", []string{"--name", "e", "--schema", write("bad.toml", "name = \"x\"\nversion = 1\n")}, "no classes"},
		{"bad selection", []string{"--name", "f", "--selection", write("bad.csv", "event,selected,class,score\ne1,perhaps,numu-cc,1\n")}, "bad.csv:2"},
		{"verify without selection", []string{"--name", "g", "--mode", "verify"}, "needs the selection"},
		{"missing dataset", []string{"--name", "h", "--dataset", filepath.Join(dir, "nowhere")}, "nowhere"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			args := append([]string{"campaign", "new", "--dataset", validDataset(), "--db", db}, tt.args...)
			_, err := runForTest(t, args...)
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Fatalf("err = %v, want %q", err, tt.want)
			}
		})
	}
	// Nothing was lost: the first campaign is intact and alone.
	out, err := runForTest(t, "campaign", "list", "--db", db)
	if err != nil || strings.Count(out, "\n") != 2 {
		t.Errorf("after refusals: %v\n%s", err, out)
	}
}

// labelAll has every scanner submit every event it is given, with a
// vertex on coll and ind1 at (y, z) = (1, 3) cm and a muon track on coll.
func labelAll(t *testing.T, db, name string, scanners []string) {
	t.Helper()
	if scanners == nil {
		scanners = []string{"ana", "ben"}
	}
	ctx := context.Background()
	st, err := sqlite.Open(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	c, err := st.CampaignByName(ctx, name)
	if err != nil {
		t.Fatal(err)
	}
	for _, sc := range scanners {
		for {
			p, err := st.NextPass(ctx, c.ID, sc)
			if err != nil {
				break
			}
			l := scan.Label{Class: "numu-cc", Confidence: "3", Flags: []string{"not-contained"}, Comment: "evil \x1b]0;title\x07 comment",
				Marks: []scan.Mark{
					{Kind: scan.MarkVertex, Plane: detector.Collection, Points: []detector.PlanePoint{{Wire: 9.5, Tick: 40}}, Precision: scan.Precision{Wires: 1, Ticks: 2}},
					{Kind: scan.MarkVertex, Plane: detector.Induction1, Points: []detector.PlanePoint{{Wire: 10.446582, Tick: 40}}, Precision: scan.Precision{Wires: 1, Ticks: 2}},
					{Kind: scan.MarkTrack, Plane: detector.Collection, Particle: "mu", Points: []detector.PlanePoint{{Wire: 0, Tick: 0}, {Wire: 19, Tick: 63}}},
				}}
			if _, err := st.SaveRevision(ctx, p.ID, sc, scan.Revision{State: scan.PassSubmitted, Label: l, Seconds: 12}); err != nil {
				t.Fatal(err)
			}
		}
	}
}

func TestExport(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "scan.db")
	if _, err := runForTest(t, "campaign", "new", "--dataset", validDataset(), "--db", db, "--per-event", "2"); err != nil {
		t.Fatal(err)
	}
	labelAll(t, db, "valid", nil)

	out, err := runForTest(t, "export", "--db", db, "--format", "jsonl")
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 6 {
		t.Fatalf("%d JSONL records, want 6 (3 events × K=2)", len(lines))
	}
	seen := map[string]int{}
	for _, line := range lines {
		var r campaign.Record
		if err := json.Unmarshal([]byte(line), &r); err != nil {
			t.Fatal(err)
		}
		seen[r.Event]++
		if r.Campaign != "valid" || r.Schema != "neutrino" || r.SchemaVersion != 1 || r.State != "submitted" || r.Class != "numu-cc" || len(r.Marks) != 3 {
			t.Fatalf("record %+v", r)
		}
		// Hand computation from the fixture's geometry: coll u = 0.15 + 0.3·w;
		// x = 0.16 cm/µs × 0.5 µs × tick; the two vertex marks were placed
		// at y = 1, z = 3 (ind1: u = −y sin 60° + z cos 60°).
		v := r.Marks[0]
		if !near(*v.Points[0].UCm, 3.0) || !near(*v.Points[0].XCm, 3.2) || !near(*v.Precision.UCm, 0.3) || !near(*v.Precision.XCm, 0.16) {
			t.Errorf("vertex mark in cm: %+v %+v", v.Points[0], v.Precision)
		}
		if r.Vertex == nil || !near(r.Vertex.X, 3.2) || !near(r.Vertex.Y, 1) || !near(r.Vertex.Z, 3) {
			t.Errorf("3-D vertex %+v, want (3.2, 1, 3)", r.Vertex)
		}
		if tr := r.Marks[2]; tr.LengthCm == nil || !near(*tr.LengthCm, math.Hypot(19*0.3, 63*0.08)) {
			t.Errorf("track projected length %v", tr.LengthCm)
		}
	}
	for _, ev := range []string{"e1", "e2", "e3"} {
		if seen[ev] != 2 {
			t.Errorf("event %s: %d passes exported, want 2", ev, seen[ev])
		}
	}

	out, err = runForTest(t, "export", "--db", db, "--format", "csv")
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 7 || strings.Join(rows[0], ",") != strings.Join(campaign.CSVHeader, ",") {
		t.Fatalf("CSV: %d rows, header %v", len(rows), rows[0])
	}
	if strings.ContainsRune(out, 0x1b) {
		t.Error("CSV keeps an escape sequence from a comment")
	}

	masks := filepath.Join(dir, "masks")
	if _, err := runForTest(t, "export", "--db", db, "--format", "jsonl", "--out", filepath.Join(dir, "labels.jsonl"), "--masks", masks); err != nil {
		t.Fatal(err)
	}
	var man campaign.MaskManifest
	b, err := os.ReadFile(filepath.Join(masks, "masks.json"))
	if err != nil || json.Unmarshal(b, &man) != nil {
		t.Fatalf("masks.json: %v", err)
	}
	if len(man.Files) != 6*3 || man.Codes["1"] != "mu" || man.Codes["0"] != "none" {
		t.Fatalf("manifest: %d files, codes %v", len(man.Files), man.Codes)
	}
	for _, f := range man.Files {
		checkNPY(t, filepath.Join(masks, f.File), f.Wires, f.Ticks)
		if f.Plane != "coll" && f.Pixels != 0 {
			t.Errorf("%s: %d pixels labelled on a plane without tracks", f.File, f.Pixels)
		}
	}
}

// checkNPY checks a mask file against the NumPy format specification
// (NEP 1): magic, version 1.0, little-endian header length, a header
// padded so the data starts on a 64-byte boundary, then the data.
func checkNPY(t *testing.T, path string, wires, ticks int) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r := bufio.NewReader(f)
	magic := make([]byte, 8)
	if _, err := r.Read(magic); err != nil || string(magic) != "\x93NUMPY\x01\x00" {
		t.Fatalf("%s: magic %q", path, magic)
	}
	var n uint16
	binary.Read(r, binary.LittleEndian, &n)
	head := make([]byte, n)
	if _, err := r.Read(head); err != nil {
		t.Fatal(err)
	}
	if (10+int(n))%64 != 0 || !strings.Contains(string(head), "'descr': '|u1'") || !strings.Contains(string(head), "'shape': ("+strconv.Itoa(wires)+", "+strconv.Itoa(ticks)+")") {
		t.Fatalf("%s: header %q", path, head)
	}
	fi, _ := f.Stat()
	if fi.Size() != int64(10+int(n)+wires*ticks) {
		t.Errorf("%s: %d bytes, want %d", path, fi.Size(), 10+int(n)+wires*ticks)
	}
}

func near(a, b float64) bool { return math.Abs(a-b) < 1e-4 }

func TestVerifyCampaignAndConsensusExport(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "scan.db")
	sel := filepath.Join(dir, "sel.csv")
	body := "event,selected,class,score,box_plane,box_wire_lo,box_tick_lo,box_wire_hi,box_tick_hi\n" +
		"e1,true,numu-cc,0.9,coll,2,10,8,30\ne2,false,,0.1,,,,,\ne3,false,,0.2,,,,,\n"
	if err := os.WriteFile(sel, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := runForTest(t, "campaign", "new", "--dataset", validDataset(), "--db", db, "--name", "v", "--mode", "verify",
		"--selection", sel, "--include-unselected", "0.5", "--per-event", "1", "--seed", "4")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, "2 events: 1 selected, 1 of 2 unselected") {
		t.Errorf("summary: %s", out)
	}
	ctx := context.Background()
	st, err := sqlite.Open(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	c, _ := st.CampaignByName(ctx, "v")
	evs, _ := st.Events(ctx, c.ID)
	if len(evs) != 2 || evs[0].EventID != "e1" || evs[0].Selection == nil || evs[0].Selection.Box == nil || evs[0].Selection.Box.Points[1].Tick != 30 {
		t.Fatalf("verify events: %+v", evs)
	}
	p, err := st.NextPass(ctx, c.ID, "ana")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := st.SaveRevision(ctx, p.ID, "ana", scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Verdict: "agree", Confidence: "3"}}); err != nil {
		t.Fatal(err)
	}
	for _, m := range []string{"majority", "adjudication"} {
		if err := st.SetConsensus(ctx, scan.Consensus{CampaignID: c.ID, EventID: "e1", Method: m, Label: scan.Label{Class: "numu-cc"}, Posterior: 0.5, By: "coord"}); err != nil {
			t.Fatal(err)
		}
	}
	st.Close()
	out, err = runForTest(t, "export", "--db", db, "--format", "csv", "--consensus")
	if err != nil {
		t.Fatal(err)
	}
	rows, _ := csv.NewReader(strings.NewReader(out)).ReadAll()
	if len(rows) != 2 || rows[1][4] != "e1" || rows[1][8] != "adjudication" || rows[1][9] != "0.5" || rows[1][10] != "numu-cc" {
		t.Errorf("consensus CSV:\n%s", out)
	}
	out, err = runForTest(t, "export", "--db", db, "--format", "jsonl", "--consensus", "--method", "majority")
	if err != nil || !strings.Contains(out, `"method":"majority"`) {
		t.Errorf("majority export: %v\n%s", err, out)
	}
}
