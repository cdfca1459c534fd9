// Package dataset reads and writes tpcscan datasets: a folder holding a
// tpcscan.toml manifest (the detector and the list of events) and per-event
// files: dense wire-plane images as NumPy .npy or .npz, or sparse hits as
// CSV, with optional truth. Opening a dataset reads only the manifest;
// events are read one at a time by Load.
package dataset

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"sync"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// ErrNoTruth is returned by TruthJSON for an event without truth.
var ErrNoTruth = errors.New("event has no truth file")

// Error is a problem with one event of a dataset: the event, the file
// (relative to the dataset folder, empty if none) and what is wrong.
type Error struct {
	Event string
	File  string
	Err   error
}

func (e *Error) Error() string {
	if e.File == "" {
		return fmt.Sprintf("event %s: %v", e.Event, e.Err)
	}
	return fmt.Sprintf("event %s: %s: %v", e.Event, e.File, e.Err)
}

func (e *Error) Unwrap() error { return e.Err }

// Source says where an event's charge comes from.
type Source string

// The sources of an event's charge.
const (
	SourceNPY  Source = "npy"  // one .npy per plane
	SourceNPZ  Source = "npz"  // one .npz with an array per plane
	SourceHits Source = "hits" // sparse CSV hits
)

// EventInfo is what the manifest says about an event.
type EventInfo struct {
	ID     string
	Meta   scan.EventMeta
	Source Source
	// Files lists every file of the event, relative to the dataset folder.
	Files []string
	// HasTruth is set when the event has a truth JSON file.
	HasTruth bool
	entry    *eventEntry
}

// Dataset is an opened dataset folder.
type Dataset struct {
	dir    string
	det    *detector.Detector
	events []EventInfo
	index  map[string]int
}

// Open reads the manifest of the dataset in dir (and the detector file it
// names, if any). It touches no event file.
func Open(dir string) (*Dataset, error) {
	root, err := os.OpenRoot(dir)
	if err != nil {
		return nil, fmt.Errorf("open dataset: %w", err)
	}
	defer root.Close()
	name := filepath.Join(dir, ManifestName)
	f, err := root.Open(ManifestName)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("open dataset %s: the folder has no %s manifest", dir, ManifestName)
	}
	if err != nil {
		return nil, fmt.Errorf("open dataset %s: %w", dir, explainOpen(err))
	}
	defer f.Close()
	det, entries, err := parseManifest(f, name, func(rel string) (*detector.Detector, error) {
		df, err := root.Open(filepath.FromSlash(rel))
		if err != nil {
			return nil, fmt.Errorf("detector file: %w", explainOpen(err))
		}
		defer df.Close()
		return detector.Load(df, rel)
	})
	if err != nil {
		return nil, err
	}
	d := &Dataset{dir: dir, det: det, events: make([]EventInfo, len(entries)), index: make(map[string]int, len(entries))}
	for i := range entries {
		e := &entries[i]
		info := EventInfo{
			ID:       e.ID,
			Meta:     scan.EventMeta{Run: e.Run, Subrun: e.Subrun, Event: e.Event, Note: e.Note},
			Source:   SourceNPY,
			Files:    e.paths(),
			HasTruth: e.Truth != "",
			entry:    e,
		}
		switch {
		case e.NPZ != "":
			info.Source = SourceNPZ
		case e.Hits != "":
			info.Source = SourceHits
		}
		d.events[i] = info
		d.index[e.ID] = i
	}
	return d, nil
}

// Dir returns the dataset folder.
func (d *Dataset) Dir() string { return d.dir }

// Detector returns the dataset's detector description.
func (d *Dataset) Detector() *detector.Detector { return d.det }

// Events returns the events in manifest order. The slice is shared: do not
// modify it.
func (d *Dataset) Events() []EventInfo { return d.events }

// Event returns the manifest entry of one event.
func (d *Dataset) Event(id string) (EventInfo, bool) {
	i, ok := d.index[id]
	if !ok {
		return EventInfo{}, false
	}
	return d.events[i], true
}

// Load reads an event's planes (and pixel truth, if any) and checks them
// against the detector. Errors are *Error values naming the event and file.
func (d *Dataset) Load(id string) (*scan.Event, error) { return d.load(id, true) }

// LoadPlanes is Load without the pixel truth: what a display needs, for
// about half the reading and memory of a generated event.
func (d *Dataset) LoadPlanes(id string) (*scan.Event, error) { return d.load(id, false) }

func (d *Dataset) load(id string, withTruth bool) (*scan.Event, error) {
	info, ok := d.Event(id)
	if !ok {
		return nil, &Error{Event: id, Err: errors.New("no such event in the manifest")}
	}
	root, err := os.OpenRoot(d.dir)
	if err != nil {
		return nil, &Error{Event: id, Err: err}
	}
	defer root.Close()
	l := &loader{root: root, det: d.det, e: info.entry, skipTruth: !withTruth}
	ev := &scan.Event{ID: id, Meta: info.Meta, Detector: d.det}
	switch info.Source {
	case SourceNPY:
		err = l.npyPlanes(ev)
	case SourceNPZ:
		err = l.npzPlanes(ev)
	case SourceHits:
		err = l.hitPlanes(ev)
	}
	if err != nil {
		return nil, err
	}
	if err := ev.Validate(); err != nil {
		return nil, &Error{Event: id, Err: err}
	}
	return ev, nil
}

// TruthJSON returns the raw truth JSON of an event, or ErrNoTruth.
func (d *Dataset) TruthJSON(id string) ([]byte, error) {
	info, ok := d.Event(id)
	if !ok {
		return nil, &Error{Event: id, Err: errors.New("no such event in the manifest")}
	}
	if !info.HasTruth {
		return nil, &Error{Event: id, Err: ErrNoTruth}
	}
	rel := info.entry.Truth
	root, err := os.OpenRoot(d.dir)
	if err != nil {
		return nil, &Error{Event: id, File: rel, Err: err}
	}
	defer root.Close()
	f, st, err := openFile(root, rel)
	if err != nil {
		return nil, &Error{Event: id, File: rel, Err: err}
	}
	defer f.Close()
	const maxTruth = 64 << 20
	if st.Size() > maxTruth {
		return nil, &Error{Event: id, File: rel, Err: fmt.Errorf("truth file of %d bytes is larger than %d MiB", st.Size(), maxTruth>>20)}
	}
	b, err := io.ReadAll(f)
	if err != nil {
		return nil, &Error{Event: id, File: rel, Err: err}
	}
	return b, nil
}

// openFile opens a manifest path inside root and returns its size; it
// refuses folders and paths (including symbolic links) leading out of root.
func openFile(root *os.Root, rel string) (*os.File, fs.FileInfo, error) {
	f, err := root.Open(filepath.FromSlash(rel))
	if err != nil {
		return nil, nil, explainOpen(err)
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, nil, err
	}
	if !st.Mode().IsRegular() {
		f.Close()
		return nil, nil, errors.New("not a regular file")
	}
	return f, st, nil
}

// explainOpen turns open errors into the words a dataset author needs.
func explainOpen(err error) error {
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return errors.New("file does not exist")
	case strings.Contains(err.Error(), "escapes"):
		return errors.New("path leads out of the dataset folder (through a symbolic link or '..')")
	}
	return err
}

// loader reads one event's files.
type loader struct {
	root      *os.Root
	det       *detector.Detector
	e         *eventEntry
	skipTruth bool // leave pixel truth unread
}

func (l *loader) fail(file string, err error) error {
	return &Error{Event: l.e.ID, File: file, Err: err}
}

// npyPlanes reads one .npy per plane, and pixel truth where given.
// The planes are read concurrently: a full-size event is three large,
// independent files, and decoding is CPU work that can use every core.
func (l *loader) npyPlanes(ev *scan.Event) error {
	n := len(l.det.Planes)
	imgs, errs := make([]*scan.Image, n), make([]error, n)
	var wg sync.WaitGroup
	for i, p := range l.det.Planes {
		rel := l.e.Planes[string(p.Role)]
		wg.Go(func() { imgs[i], errs[i] = l.npyImage(rel, i) })
	}
	wg.Wait()
	for _, err := range errs { // the first plane's error, as a serial read would give
		if err != nil {
			return err
		}
	}
	ev.Planes = append(ev.Planes, imgs...)
	if len(l.e.PixelTruth) == 0 || l.skipTruth {
		return nil
	}
	ev.Truth = make([]*scan.TruthImage, len(l.det.Planes))
	for i, p := range l.det.Planes {
		rel, ok := l.e.PixelTruth[string(p.Role)]
		if !ok {
			continue
		}
		t, err := l.npyTruth(rel, ev.Planes[i])
		if err != nil {
			return err
		}
		ev.Truth[i] = t
	}
	return nil
}

func (l *loader) npyImage(rel string, plane int) (*scan.Image, error) {
	f, st, err := openFile(l.root, rel)
	if err != nil {
		return nil, l.fail(rel, err)
	}
	defer f.Close()
	img, err := l.readImage(f, st.Size(), plane)
	if err != nil {
		return nil, l.fail(rel, err)
	}
	return img, nil
}

func (l *loader) npyTruth(rel string, img *scan.Image) (*scan.TruthImage, error) {
	f, st, err := openFile(l.root, rel)
	if err != nil {
		return nil, l.fail(rel, err)
	}
	defer f.Close()
	t, err := readTruth(f, st.Size(), img)
	if err != nil {
		return nil, l.fail(rel, err)
	}
	return t, nil
}

// readImage reads a plane image, checking its shape against the detector
// before it allocates.
func (l *loader) readImage(r io.Reader, size int64, plane int) (*scan.Image, error) {
	br := bufio.NewReaderSize(r, chunk)
	h, err := readNPYHeader(br, size)
	if err != nil {
		return nil, err
	}
	role := string(l.det.Planes[plane].Role)
	wire0, cropped := l.e.Wire0[role]
	tick0 := l.e.Tick0[role]
	if err := checkShape(h.Shape, l.det, plane, wire0, tick0, cropped); err != nil {
		return nil, err
	}
	pix, err := h.readFloat32(br)
	if err != nil {
		return nil, err
	}
	return &scan.Image{Wires: h.Shape[0], Ticks: h.Shape[1], Wire0: wire0, Tick0: tick0, Pix: pix}, nil
}

// readTruth reads a pixel-truth array that must match img's grid.
func readTruth(r io.Reader, size int64, img *scan.Image) (*scan.TruthImage, error) {
	br := bufio.NewReaderSize(r, chunk)
	h, err := readNPYHeader(br, size)
	if err != nil {
		return nil, err
	}
	if len(h.Shape) != 2 || h.Shape[0] != img.Wires || h.Shape[1] != img.Ticks {
		return nil, fmt.Errorf("pixel truth has shape %v, its plane image [%d, %d]", h.Shape, img.Wires, img.Ticks)
	}
	pix, err := h.readInt32(br)
	if err != nil {
		return nil, err
	}
	return &scan.TruthImage{Wires: img.Wires, Ticks: img.Ticks, Wire0: img.Wire0, Tick0: img.Tick0, Pix: pix}, nil
}

// checkShape checks an image's shape against its plane. Without a wire0
// offset the image must hold every wire of the plane; with one, it must fit.
func checkShape(shape []int, det *detector.Detector, plane, wire0, tick0 int, cropped bool) error {
	p := det.Planes[plane]
	if len(shape) != 2 {
		return fmt.Errorf("array has rank %d (shape %v), want 2: [wires, ticks]", len(shape), shape)
	}
	wires, ticks := shape[0], shape[1]
	if wires == 0 || ticks == 0 {
		return fmt.Errorf("array of shape %v is empty", shape)
	}
	if !cropped && wires != p.Wires {
		return fmt.Errorf("shape %v: plane %s has %d wires (set wire0 in the manifest if the image is a crop)", shape, p.Role, p.Wires)
	}
	if wire0+wires > p.Wires {
		return fmt.Errorf("shape %v at wire0 %d covers wires %d–%d: plane %s has wires 0–%d", shape, wire0, wire0, wire0+wires-1, p.Role, p.Wires-1)
	}
	if tick0+ticks > det.ReadoutTicks {
		return fmt.Errorf("shape %v at tick0 %d covers ticks %d–%d: the readout has ticks 0–%d", shape, tick0, tick0, tick0+ticks-1, det.ReadoutTicks-1)
	}
	return nil
}
