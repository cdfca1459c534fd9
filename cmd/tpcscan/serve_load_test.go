package main

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"regexp"
	"runtime"
	"runtime/pprof"
	"slices"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	gossh "golang.org/x/crypto/ssh"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/scan/sim"
	"github.com/tpcscan/tpcscan/store/backend"
	"github.com/tpcscan/tpcscan/ui/serve"
	"github.com/tpcscan/tpcscan/ui/serve/servetest"
)

// Load-test settings: 32 scanners each typing 200 keys, loopback only.
var (
	loadSessions = flag.Int("serve.sessions", 32, "BenchmarkServeLoad: concurrent SSH sessions")
	loadKeys     = flag.Int("serve.keys", 200, "BenchmarkServeLoad: keystrokes per session")
	loadEvery    = flag.Duration("serve.every", 100*time.Millisecond, "BenchmarkServeLoad: time between a session's keystrokes (0: as fast as frames come back)")
	loadLogin    = flag.Duration("serve.login", 100*time.Millisecond, "BenchmarkServeLoad: time between two sessions' logins")
)

const helperEnv = "TPCSCAN_SERVE_HELPER"

// TestServeHelperProcess is not a test: BenchmarkServeLoad runs the test
// binary again with TPCSCAN_SERVE_HELPER set, so that the server is a
// process of its own whose CPU time and memory are the server's alone.
func TestServeHelperProcess(t *testing.T) {
	if os.Getenv(helperEnv) == "" {
		t.Skip("helper process for BenchmarkServeLoad")
	}
	var args []string
	if err := json.Unmarshal([]byte(os.Getenv(helperEnv)), &args); err != nil {
		t.Fatal(err)
	}
	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGTERM)
	defer stop()
	var base runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&base)
	peak := make(chan uint64)
	go samplePeakHeap(ctx, peak)
	if path := os.Getenv("TPCSCAN_SERVE_CPUPROFILE"); path != "" { // where the server's time goes
		f, err := os.Create(path)
		if err != nil {
			t.Fatal(err)
		}
		if err := pprof.StartCPUProfile(f); err != nil {
			t.Fatal(err)
		}
		defer f.Close()
		defer pprof.StopCPUProfile()
	}
	env := &environ{stdin: os.Stdin, stdout: os.Stdout, stderr: os.Stderr, getenv: os.Getenv}
	err := run(ctx, env, append([]string{"serve"}, args...))
	fmt.Printf("MEM heap_base=%d heap_peak=%d\n", base.HeapInuse, <-peak)
	if err != nil {
		t.Fatal(err)
	}
}

// samplePeakHeap records the largest in-use heap every 20 ms until ctx
// ends (a measurement, not a synchronisation).
func samplePeakHeap(ctx context.Context, out chan<- uint64) {
	var peak uint64
	t := time.NewTicker(20 * time.Millisecond)
	defer t.Stop()
	var ms runtime.MemStats
	for {
		select {
		case <-ctx.Done():
			out <- peak
			return
		case <-t.C:
			runtime.ReadMemStats(&ms)
			peak = max(peak, ms.HeapInuse)
		}
	}
}

// BenchmarkServeLoad runs `tpcscan serve` on loopback in a child process
// with the real scanning station and a demo campaign, and drives it with
// scripted SSH sessions: each zooms in, pans back and forth (a full plane
// redraw per key), then labels and submits its event. It reports the
// keystroke-to-frame latency (until the frame showing the key's effect has
// fully arrived, client work included), the server's CPU time and memory
// per session, and fails on any error or lost label. Run with
//
//	go test -run '^$' -bench ServeLoad -benchtime 1x ./cmd/tpcscan
func BenchmarkServeLoad(b *testing.B) {
	n, keys := *loadSessions, *loadKeys
	dir := b.TempDir()
	if n < 1 || keys < 5 {
		b.Fatal("need at least 1 session and 5 keys")
	}
	db, args, signers := prepareLoad(b, dir, n)
	for range b.N {
		res := runLoad(b, dir, args, signers, keys)
		all, steady := quantiles(res.all), quantiles(res.steady)
		b.ReportMetric(all(0.5), "p50-ms")
		b.ReportMetric(all(0.99), "p99-ms")
		b.ReportMetric(all(1), "max-ms")
		b.ReportMetric(steady(0.99), "p99-steady-ms")
		b.ReportMetric(res.cpu.Seconds()*1e3/float64(n), "cpu-ms/session")
		b.ReportMetric(res.cpu.Seconds()*1e6/float64(len(res.all)), "cpu-µs/key")
		b.ReportMetric(float64(res.heapPeak-res.heapBase)/float64(n)/(1<<20), "heap-MB/session")
		b.ReportMetric(float64(res.maxRSS)/(1<<20), "rss-peak-MB")
		b.Logf("%d sessions (a login every %s) × %d keys every %s: %d frames; all keys p50 %.1f, p99 %.1f, max %.1f ms; after the first %d keys p50 %.1f, p99 %.1f ms (target p99 ≤ 50); server CPU %s, client CPU %s, over %s wall",
			n, *loadLogin, keys, *loadEvery, len(res.all), all(0.5), all(0.99), all(1), warmKeys, steady(0.5), steady(0.99),
			res.cpu.Round(time.Millisecond), res.clientCPU.Round(time.Millisecond), res.wall.Round(time.Millisecond))
	}
	checkLoadLabels(b, db, n)
}

// quantiles returns the q-quantile of d in milliseconds (nearest rank).
func quantiles(d []time.Duration) func(q float64) float64 {
	slices.Sort(d)
	return func(q float64) float64 { return float64(d[int(q*float64(len(d)-1))]) / 1e6 }
}

// prepareLoad writes a demo dataset, a campaign with room for every
// session, n scanners' keys and the scanners file; it returns the database
// path, the serve command's arguments (without --listen) and the keys.
func prepareLoad(b *testing.B, dir string, n int) (string, []string, []gossh.Signer) {
	ctx := context.Background()
	data := filepath.Join(dir, "tarn")
	if err := sim.WriteDataset(ctx, data, sim.Options{Events: 8, Seed: 5, Size: "demo"}, nil); err != nil {
		b.Fatal(err)
	}
	ds, err := dataset.Open(data)
	if err != nil {
		b.Fatal(err)
	}
	db := filepath.Join(dir, "scan.db")
	st, err := backend.Open(ctx, db)
	if err != nil {
		b.Fatal(err)
	}
	var events []scan.CampaignEvent
	for _, e := range ds.Events() {
		events = append(events, scan.CampaignEvent{EventID: e.ID})
	}
	per := (n*b.N + len(events) - 1) / len(events) // a new event per session and round
	if _, err := st.CreateCampaign(ctx, scan.Campaign{Name: "load", Dataset: data, Mode: scan.ModeLabel,
		PerEvent: per, Blind: true, Seed: 1, Schema: scan.DefaultSchema()}, events); err != nil {
		b.Fatal(err)
	}
	st.Close()
	var roster strings.Builder
	signers := make([]gossh.Signer, n)
	for i := range n {
		var text string
		signers[i], text = testKey(b)
		fmt.Fprintf(&roster, "s%02d scanner %s\n", i, text)
	}
	scanners := filepath.Join(dir, "scanners.txt")
	if err := os.WriteFile(scanners, []byte(roster.String()), 0o600); err != nil {
		b.Fatal(err)
	}
	return db, []string{"--db", db, "--scanners", scanners, "--host-key", filepath.Join(dir, "host_ed25519"),
		"--max-sessions", fmt.Sprint(n), "--idle", "10m"}, signers
}

type loadResult struct {
	cpu, wall          time.Duration
	clientCPU          time.Duration   // the test's SSH clients, for comparison
	all, steady        []time.Duration // keystroke-to-frame latencies
	heapBase, heapPeak uint64
	maxRSS             int64 // bytes
}

var (
	servingRe = regexp.MustCompile(`msg=serving addr=(\S+)`)
	memRe     = regexp.MustCompile(`MEM heap_base=(\d+) heap_peak=(\d+)`)
)

// runLoad starts the server process, runs the sessions and stops it.
func runLoad(b *testing.B, dir string, args []string, signers []gossh.Signer, keys int) loadResult {
	n := len(signers)
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
	defer cancel()
	spec, _ := json.Marshal(append(args, "--listen", "127.0.0.1:0"))
	cmd := exec.CommandContext(ctx, os.Args[0], "-test.run=^TestServeHelperProcess$")
	cmd.Env = append(os.Environ(), helperEnv+"="+string(spec))
	stderr, err := cmd.StderrPipe()
	if err != nil {
		b.Fatal(err)
	}
	var stdout strings.Builder
	cmd.Stdout = &stdout
	start := time.Now()
	if err := cmd.Start(); err != nil {
		b.Fatal(err)
	}
	addr, logs := watchServerLog(b, stderr)
	signer, _, err := serve.LoadHostKey(filepath.Join(dir, "host_ed25519"))
	if err != nil {
		b.Fatal(err)
	}

	lat := make([][]time.Duration, n)
	errs := make([]error, n)
	var wg sync.WaitGroup
	clientCPU := selfCPU()
	b.ResetTimer()
	for i := range n {
		wg.Add(1)
		go func() {
			defer wg.Done()
			// Scanners log in one after another (every -serve.login), not
			// all in the same millisecond; this paces, it does not synchronise.
			select {
			case <-time.After(time.Duration(i) * *loadLogin):
			case <-ctx.Done():
			}
			lat[i], errs[i] = loadSession(ctx, addr, signer.PublicKey(), fmt.Sprintf("s%02d", i), signers[i], keys)
		}()
	}
	wg.Wait()
	b.StopTimer()
	clientCPU = selfCPU() - clientCPU
	if err := errors.Join(errs...); err != nil {
		b.Error(err)
	}
	_ = cmd.Process.Signal(syscall.SIGTERM)
	if err := cmd.Wait(); err != nil {
		b.Fatalf("server: %v\n%s", err, stdout.String())
	}
	if bad := logs(); bad != "" {
		b.Errorf("server logged errors:\n%s", bad)
	}
	res := loadResult{wall: time.Since(start), clientCPU: clientCPU}
	if ru, ok := cmd.ProcessState.SysUsage().(*syscall.Rusage); ok {
		res.cpu = time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
		res.maxRSS = ru.Maxrss << 10 // kB on Linux
	}
	if m := memRe.FindStringSubmatch(stdout.String()); m != nil {
		fmt.Sscan(m[1], &res.heapBase)
		fmt.Sscan(m[2], &res.heapPeak)
	}
	for _, l := range lat {
		res.all = append(res.all, l...)
		if len(l) > warmKeys {
			res.steady = append(res.steady, l[warmKeys:]...)
		}
	}
	if len(res.all) == 0 {
		b.Fatal("no frames measured")
	}
	if len(res.steady) == 0 {
		res.steady = res.all
	}
	return res
}

// warmKeys are each session's first keys, typed while the other sessions
// are still loading their first events: the steady-state figures leave
// them out.
const warmKeys = 10

// selfCPU is this process's CPU time so far (the load test's clients).
func selfCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// watchServerLog waits for the server's listening address and keeps the
// log's error lines for the end.
func watchServerLog(b *testing.B, r io.Reader) (string, func() string) {
	addrc := make(chan string, 1)
	var mu sync.Mutex
	var bad strings.Builder
	done := make(chan struct{})
	go func() {
		defer close(done)
		sc := bufio.NewScanner(r)
		for sc.Scan() {
			line := sc.Text()
			if m := servingRe.FindStringSubmatch(line); m != nil {
				addrc <- m[1]
			}
			if strings.Contains(line, "level=ERROR") {
				mu.Lock()
				bad.WriteString(line + "\n")
				mu.Unlock()
			}
		}
	}()
	select {
	case addr := <-addrc:
		return addr, func() string {
			<-done
			mu.Lock()
			defer mu.Unlock()
			return bad.String()
		}
	case <-done:
		b.Fatal("server exited before listening")
	case <-time.After(time.Minute):
		b.Fatal("server did not start")
	}
	return "", nil
}

// frameEnd is how bubbletea ends each frame in the alternate screen:
// moving the cursor to the start of the last line.
var frameEnd = regexp.MustCompile(`\x1b\[\d+;H`)

// loadSession is one scripted scanner: zoom in twice, pan right and left
// alternately, then class 1, confidence C and submit. Each key's latency
// runs from sending it to the end of the first frame showing its effect.
func loadSession(ctx context.Context, addr string, host gossh.PublicKey, name string, key gossh.Signer, keys int) ([]time.Duration, error) {
	c, _, err := servetest.Dial(addr, host, name, 30*time.Second, gossh.PublicKeys(key))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	defer c.Close()
	tm, err := servetest.Open(c, "xterm-256color", nil, 160, 45)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	// Read whole frames until the event is on screen, so that every later
	// frame is a response to a key.
	var view string // the ind1 wire range on screen
	for !strings.Contains(view, "wires") {
		text, err := nextFrame(tm, 60*time.Second)
		if err != nil {
			return nil, fmt.Errorf("%s: event never shown: %w", name, err)
		}
		if strings.Contains(text, "ind1 wire ") {
			view = wiresRe.FindString(text)
		}
	}
	script := make([]string, 0, keys)
	script = append(script, "+", "+")
	for len(script) < keys-3 {
		script = append(script, ">", "<")
	}
	script = append(script[:keys-3], "1", "C", "\x13")

	lat := make([]time.Duration, 0, keys)
	var last string // the text of the last key's frame
	tick := time.NewTicker(max(*loadEvery, time.Millisecond))
	defer tick.Stop()
	for i, k := range script {
		if *loadEvery > 0 {
			select {
			case <-tick.C:
			case <-ctx.Done():
				return lat, ctx.Err()
			}
		}
		t0 := time.Now()
		if _, err := io.WriteString(tm.In, k); err != nil {
			return lat, fmt.Errorf("%s key %d: %w", name, i, err)
		}
		text, err := awaitEffect(tm, k, &view)
		if err != nil {
			return lat, fmt.Errorf("%s key %d %q: %w", name, i, k, err)
		}
		lat = append(lat, time.Since(t0))
		last = text
	}
	// The submission counts once the station has moved on to the next
	// event (or has none left); that wait is not a keystroke's latency.
	for !strings.Contains(last, "· assigned") && !strings.Contains(last, "all done") {
		var err error
		if last, err = nextFrame(tm, 60*time.Second); err != nil {
			return lat, fmt.Errorf("%s: no next event after the submission: %w", name, err)
		}
	}
	return lat, nil
}

// awaitEffect reads frames until one shows key k's effect: a new wire
// range for zoom and pan keys, any change for the others.
func awaitEffect(tm *servetest.Terminal, k string, view *string) (string, error) {
	for {
		text, err := nextFrame(tm, 30*time.Second)
		if err != nil {
			return "", err
		}
		if k != "+" && k != ">" && k != "<" {
			return text, nil
		}
		if w := wiresRe.FindString(text); w != "" && w != *view {
			*view = w
			return text, nil
		}
	}
}

// nextFrame waits for the next complete frame and returns its text
// without escape sequences.
func nextFrame(tm *servetest.Terminal, d time.Duration) (string, error) {
	frame, err := tm.Out.WaitForFunc(d, "frame end", func(b []byte) (int, int) {
		loc := frameEnd.FindIndex(b)
		if loc == nil {
			return -1, 0
		}
		return 0, loc[1]
	})
	if err != nil {
		return "", err
	}
	tm.Out.Trim()
	var st servetest.Stripper
	return string(st.Strip(frame)), nil
}

// checkLoadLabels finds every session's submitted label in the database.
func checkLoadLabels(b *testing.B, db string, n int) {
	ctx := context.Background()
	st, err := backend.Open(ctx, db)
	if err != nil {
		b.Fatal(err)
	}
	defer st.Close()
	c, err := st.CampaignByName(ctx, "load")
	if err != nil {
		b.Fatal(err)
	}
	for i := range n {
		name := fmt.Sprintf("s%02d", i)
		ps, err := st.ScannerPasses(ctx, c.ID, name)
		if err != nil {
			b.Fatal(err)
		}
		submitted := 0
		for _, p := range ps {
			if p.State == scan.PassSubmitted && p.Label.Class == "numu-cc" {
				submitted++
			}
		}
		if submitted != b.N {
			b.Errorf("%s: %d submitted labels, want %d", name, submitted, b.N)
		}
	}
}
