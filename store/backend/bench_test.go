package backend

import (
	"context"
	"fmt"
	"path/filepath"
	"slices"
	"sync"
	"testing"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/postgres/pgtest"
)

// BenchmarkConcurrent32 runs 32 scanning sessions at once against each
// backend, each session a different scanner doing "next event, then
// submit" in a K=2 campaign, and reports the latency percentiles of the
// two calls a scanner waits for. One b.N is one next+submit action.
//
// "flat-out" sessions act again the moment a call returns: a stress test
// whose latencies are mostly queueing once the machine is saturated.
// "paced" sessions pause 250 ms between actions (128 actions/s offered in
// all, still far above a real shift's rate of one action per scanner
// every 10-60 s), which shows the latency a scanner actually waits.
//
//	go test -run '^$' -bench Concurrent32 -benchtime 1280x ./store/backend
func BenchmarkConcurrent32(b *testing.B) {
	backends := []struct {
		name string
		dsn  func(b *testing.B) string
	}{
		{"sqlite", func(b *testing.B) string { return filepath.Join(b.TempDir(), "bench.db") }},
		{"postgres", func(b *testing.B) string { return pgtest.DSN(b) }},
	}
	for _, be := range backends {
		for _, pace := range []struct {
			name  string
			think time.Duration
		}{{"flat-out", 0}, {"paced", 250 * time.Millisecond}} {
			b.Run(be.name+"/"+pace.name, func(b *testing.B) {
				s, err := Open(context.Background(), be.dsn(b))
				if err != nil {
					b.Fatal(err)
				}
				defer s.Close()
				concurrent(b, s, 32, pace.think)
			})
		}
	}
}

func concurrent(b *testing.B, s store.Store, sessions int, think time.Duration) {
	ctx := context.Background()
	evs := make([]scan.CampaignEvent, b.N/2+2*sessions)
	for i := range evs {
		evs[i].EventID = fmt.Sprintf("ev%07d", i)
	}
	c := scan.Campaign{Name: "bench", Dataset: "demo", Mode: scan.ModeLabel, PerEvent: 2, Seed: 1, Schema: scan.DefaultSchema()}
	id, err := s.CreateCampaign(ctx, c, evs)
	if err != nil {
		b.Fatal(err)
	}
	next := make([][]time.Duration, sessions)
	save := make([][]time.Duration, sessions)
	rev := scan.Revision{State: scan.PassSubmitted, Seconds: 20, Label: scan.Label{Class: "numu-cc", Confidence: "3"}}
	var wg sync.WaitGroup
	errs := make(chan error, sessions)
	b.ResetTimer()
	for w := range sessions {
		n := b.N / sessions
		if w < b.N%sessions {
			n++
		}
		wg.Go(func() {
			who := fmt.Sprintf("s%02d", w)
			// Stagger paced sessions so they do not all act in step.
			time.Sleep(think * time.Duration(w) / time.Duration(sessions))
			for range n {
				if think > 0 {
					time.Sleep(think)
				}
				t0 := time.Now()
				p, err := s.NextPass(ctx, id, who)
				t1 := time.Now()
				if err != nil {
					errs <- err
					return
				}
				if _, err := s.SaveRevision(ctx, p.ID, who, rev); err != nil {
					errs <- err
					return
				}
				next[w] = append(next[w], t1.Sub(t0))
				save[w] = append(save[w], time.Since(t1))
			}
		})
	}
	wg.Wait()
	b.StopTimer()
	close(errs)
	for err := range errs {
		b.Fatal(err)
	}
	report(b, "next", slices.Concat(next...))
	report(b, "save", slices.Concat(save...))
}

// report adds the 50th and 99th percentile latencies in milliseconds.
func report(b *testing.B, what string, d []time.Duration) {
	if len(d) == 0 {
		return
	}
	slices.Sort(d)
	q := func(p float64) float64 {
		return float64(d[min(len(d)-1, int(p*float64(len(d))))]) / float64(time.Millisecond)
	}
	b.ReportMetric(q(0.50), what+"-p50-ms")
	b.ReportMetric(q(0.99), what+"-p99-ms")
}
