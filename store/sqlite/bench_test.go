package sqlite

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"sync"
	"testing"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
	"github.com/tpcscan/tpcscan/store/storetest"
)

// reportLatency adds p50 and p99 of the timed calls to the benchmark.
func reportLatency(b *testing.B, d []time.Duration) {
	if len(d) == 0 {
		return
	}
	slices.Sort(d)
	q := func(p float64) float64 { return float64(d[int(p*float64(len(d)-1))]) / 1e6 }
	b.ReportMetric(q(0.50), "p50-ms")
	b.ReportMetric(q(0.99), "p99-ms")
}

// BenchmarkSaveRevision times one scanner action: appending a revision with
// a class, flags, a comment and a few marks. Budget: p99 ≤ 5 ms.
func BenchmarkSaveRevision(b *testing.B) {
	ctx := context.Background()
	s := openTemp(b)
	id, err := s.CreateCampaign(ctx, storetest.Campaign("bench", 1), storetest.Events(100))
	if err != nil {
		b.Fatal(err)
	}
	p, err := s.NextPass(ctx, id, "ana")
	if err != nil {
		b.Fatal(err)
	}
	pt := func(w, t float64) detector.PlanePoint { return detector.PlanePoint{Wire: w, Tick: t} }
	label := scan.Label{Class: "numu-cc", Flags: []string{"not-contained"}, Confidence: "2", Comment: "long muon, short proton",
		Marks: []scan.Mark{
			{Kind: scan.MarkVertex, Plane: detector.Collection, Points: []detector.PlanePoint{pt(812, 2410)}, Precision: scan.Precision{Wires: 1, Ticks: 4}},
			{Kind: scan.MarkTrack, Plane: detector.Collection, Particle: "mu", Points: []detector.PlanePoint{pt(812, 2410), pt(1200, 3100)}, Precision: scan.Precision{Wires: 1, Ticks: 4}},
			{Kind: scan.MarkTrack, Plane: detector.Collection, Particle: "p", Points: []detector.PlanePoint{pt(812, 2410), pt(790, 2380)}, Precision: scan.Precision{Wires: 1, Ticks: 4}},
		}}
	lat := make([]time.Duration, 0, b.N)
	b.ResetTimer()
	for b.Loop() {
		t0 := time.Now()
		if _, err := s.SaveRevision(ctx, p.ID, "ana", scan.Revision{State: scan.PassDraft, Label: label, Seconds: 1}); err != nil {
			b.Fatal(err)
		}
		lat = append(lat, time.Since(t0))
	}
	reportLatency(b, lat)
}

// fixture100k is the 100,000-event campaign, built once per test binary
// run (bulk SQL, outside the timed part) and removed by TestMain.
var fixture100k struct {
	once sync.Once
	dir  string
	path string
	err  error
}

func TestMain(m *testing.M) {
	code := m.Run()
	if fixture100k.dir != "" {
		os.RemoveAll(fixture100k.dir)
	}
	os.Exit(code)
}

// build100k makes a campaign of 100,000 events with K = 4 where every
// event already has 3 submitted passes by scanners s0…s9, so one slot per
// event is open and each of s0…s9 has 30,000 events behind them.
func build100k() (string, error) {
	fixture100k.once.Do(func() {
		ctx := context.Background()
		fixture100k.dir, fixture100k.err = os.MkdirTemp("", "tpcscan-bench-")
		if fixture100k.err != nil {
			return
		}
		fixture100k.path = filepath.Join(fixture100k.dir, "100k.db")
		s, err := Open(ctx, fixture100k.path)
		if err != nil {
			fixture100k.err = err
			return
		}
		defer s.Close()
		if _, err := s.CreateCampaign(ctx, storetest.Campaign("big", 4), storetest.Events(100_000)); err != nil {
			fixture100k.err = err
			return
		}
		now := stamp(time.Now())
		for _, q := range []string{
			`INSERT INTO passes (campaign_id, event_id, scanner, round, state, assigned, updated, seconds)
				SELECT 1, event_id, 's' || ((ord + k) % 10), 1, 'submitted', '` + now + `', '` + now + `', 20
				FROM events, (SELECT 0 AS k UNION ALL SELECT 1 UNION ALL SELECT 2)`,
			`INSERT INTO revisions (pass_id, seq, state, label, seconds, at, schema_version)
				SELECT id, 1, 'submitted', '{"class":"numu-cc","confidence":"2"}', 20, assigned, 1 FROM passes`,
			`UPDATE passes SET revisions = 1, latest_revision = (SELECT r.id FROM revisions r WHERE r.pass_id = passes.id)`,
			`UPDATE events SET taken = 3`,
		} {
			if _, err := s.w.ExecContext(ctx, q); err != nil {
				fixture100k.err = fmt.Errorf("build fixture: %w", err)
				return
			}
		}
	})
	return fixture100k.path, fixture100k.err
}

// BenchmarkOpenCampaign100k times what a scanner's session does first:
// open the database, find the campaign and get the next event. Budget:
// ≤ 50 ms.
func BenchmarkOpenCampaign100k(b *testing.B) {
	path, err := build100k()
	if err != nil {
		b.Fatal(err)
	}
	ctx := context.Background()
	lat := make([]time.Duration, 0, b.N)
	i := 0
	b.ResetTimer()
	for b.Loop() {
		scanner := fmt.Sprintf("s%d", i%10)
		t0 := time.Now()
		s, err := Open(ctx, path)
		if err != nil {
			b.Fatal(err)
		}
		c, err := s.CampaignByName(ctx, "big")
		if err != nil {
			b.Fatal(err)
		}
		p, err := s.NextPass(ctx, c.ID, scanner)
		if err != nil {
			b.Fatal(err)
		}
		lat = append(lat, time.Since(t0))
		b.StopTimer()
		// Finish the pass so the next round asks for a new event again.
		if _, err := s.SaveRevision(ctx, p.ID, scanner, scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Class: "cosmic", Confidence: "1"}}); err != nil {
			b.Fatal(err)
		}
		s.Close()
		i++
		b.StartTimer()
	}
	reportLatency(b, lat)
}
