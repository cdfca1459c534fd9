package dataset

import (
	"archive/zip"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path"
	"path/filepath"
	"sync"

	"github.com/BurntSushi/toml"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// Writer creates a dataset: Add writes each event's files at once, Close
// writes the manifest. Until Close succeeds the folder holds no manifest,
// so a crashed writer leaves nothing that opens as a half dataset. Add and
// Close are safe for concurrent use; events appear in the manifest in the
// order their Add calls finish.
type Writer struct {
	dir string
	det *detector.Detector

	// Compress writes each event as one deflated .npz (planes and pixel
	// truth as named arrays) instead of .npy files: several times smaller
	// for mostly empty images, at the price of inflating on every load.
	// Set it before the first Add.
	Compress bool

	mu     sync.Mutex
	ids    map[string]bool
	events []eventEntry
	closed bool
}

// Create starts a dataset in dir (created if needed) for detector det. It
// refuses a folder that already holds a manifest.
func Create(dir string, det *detector.Detector) (*Writer, error) {
	if det == nil {
		return nil, fmt.Errorf("create dataset %s: no detector", dir)
	}
	if err := det.Validate(); err != nil {
		return nil, fmt.Errorf("create dataset %s: %w", dir, err)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("create dataset: %w", err)
	}
	if _, err := os.Stat(filepath.Join(dir, ManifestName)); err == nil {
		return nil, fmt.Errorf("create dataset %s: folder already holds a dataset (%s)", dir, ManifestName)
	}
	return &Writer{dir: dir, det: det, ids: map[string]bool{}}, nil
}

// Add writes an event: a float32 .npy per plane under a folder named by the
// event ID, an int32 .npy per plane of pixel truth when ev.Truth is set, and
// truthJSON (if non-nil) as truth.json. ev's planes must follow the
// writer's detector.
func (w *Writer) Add(ev *scan.Event, truthJSON []byte) error {
	if err := w.check(ev, truthJSON); err != nil {
		return fmt.Errorf("add event %s: %w", ev.ID, err)
	}
	e, err := w.write(ev, truthJSON)
	if err != nil {
		w.mu.Lock()
		delete(w.ids, ev.ID)
		w.mu.Unlock()
		return fmt.Errorf("add event %s: %w", ev.ID, err)
	}
	w.mu.Lock()
	w.events = append(w.events, e)
	w.mu.Unlock()
	return nil
}

// check validates ev and reserves its ID.
func (w *Writer) check(ev *scan.Event, truthJSON []byte) error {
	if !validID(ev.ID) {
		return errors.New("event id must be 1–128 letters, digits, '.', '_', '-' or ':', not starting with '.'")
	}
	probe := *ev
	probe.Detector = w.det
	if err := probe.Validate(); err != nil {
		return err
	}
	if ev.Truth != nil && len(ev.Truth) != len(ev.Planes) {
		return fmt.Errorf("%d pixel-truth images for %d planes", len(ev.Truth), len(ev.Planes))
	}
	for i, t := range ev.Truth {
		m := ev.Planes[i]
		if t != nil && (t.Wires != m.Wires || t.Ticks != m.Ticks || t.Wire0 != m.Wire0 || t.Tick0 != m.Tick0 || len(t.Pix) != t.Wires*t.Ticks) {
			return fmt.Errorf("pixel truth of plane %s does not match its image's grid", w.det.Planes[i].Role)
		}
	}
	if truthJSON != nil && !json.Valid(truthJSON) {
		return errors.New("truth is not valid JSON")
	}
	w.mu.Lock()
	defer w.mu.Unlock()
	switch {
	case w.closed:
		return errors.New("writer is closed")
	case w.ids[ev.ID]:
		return errors.New("duplicate event id")
	}
	w.ids[ev.ID] = true
	return nil
}

// write writes ev's files and returns its manifest entry.
func (w *Writer) write(ev *scan.Event, truthJSON []byte) (eventEntry, error) {
	e := eventEntry{ID: ev.ID, Run: ev.Meta.Run, Subrun: ev.Meta.Subrun, Event: ev.Meta.Event, Note: ev.Meta.Note}
	if err := os.MkdirAll(filepath.Join(w.dir, ev.ID), 0o755); err != nil {
		return e, err
	}
	for i, m := range ev.Planes {
		role := string(w.det.Planes[i].Role)
		if m.Wire0 != 0 || m.Wires != w.det.Planes[i].Wires {
			e.Wire0 = setKey(e.Wire0, role, m.Wire0)
		}
		if m.Tick0 != 0 {
			e.Tick0 = setKey(e.Tick0, role, m.Tick0)
		}
	}
	var err error
	if w.Compress {
		err = w.writeNPZ(ev, &e)
	} else {
		err = w.writeNPY(ev, &e)
	}
	if err != nil {
		return e, err
	}
	if truthJSON != nil {
		rel := path.Join(ev.ID, "truth.json")
		if err := writeFile(filepath.Join(w.dir, rel), func(b io.Writer) error {
			_, err := b.Write(truthJSON)
			return err
		}); err != nil {
			return e, err
		}
		e.Truth = rel
	}
	return e, nil
}

// writeNPZ writes every plane and its pixel truth into one deflated .npz,
// arrays named by plane role (and role_truth), as numpy.savez_compressed.
func (w *Writer) writeNPZ(ev *scan.Event, e *eventEntry) error {
	rel := path.Join(ev.ID, "planes.npz")
	err := writeFile(filepath.Join(w.dir, rel), func(b io.Writer) error {
		z := zip.NewWriter(b)
		member := func(name string, fill func(io.Writer) error) error {
			f, err := z.CreateHeader(&zip.FileHeader{Name: name + ".npy", Method: zip.Deflate})
			if err != nil {
				return err
			}
			return fill(f)
		}
		for i, m := range ev.Planes {
			role := string(w.det.Planes[i].Role)
			if err := member(role, func(f io.Writer) error { return writeFloat32NPY(f, m.Wires, m.Ticks, m.Pix) }); err != nil {
				return err
			}
		}
		for i, t := range ev.Truth {
			if t == nil {
				continue
			}
			role := string(w.det.Planes[i].Role)
			if err := member(role+"_truth", func(f io.Writer) error { return writeInt32NPY(f, t.Wires, t.Ticks, t.Pix) }); err != nil {
				return err
			}
		}
		return z.Close()
	})
	e.NPZ = rel
	return err
}

// writeNPY writes a .npy per plane, and one per plane of pixel truth.
func (w *Writer) writeNPY(ev *scan.Event, e *eventEntry) error {
	e.Planes = map[string]string{}
	for i, m := range ev.Planes {
		role := string(w.det.Planes[i].Role)
		rel := path.Join(ev.ID, role+".npy")
		if err := writeFile(filepath.Join(w.dir, rel), func(b io.Writer) error {
			return writeFloat32NPY(b, m.Wires, m.Ticks, m.Pix)
		}); err != nil {
			return err
		}
		e.Planes[role] = rel
	}
	for i, t := range ev.Truth {
		if t == nil {
			continue
		}
		role := string(w.det.Planes[i].Role)
		rel := path.Join(ev.ID, role+"_truth.npy")
		if err := writeFile(filepath.Join(w.dir, rel), func(b io.Writer) error {
			return writeInt32NPY(b, t.Wires, t.Ticks, t.Pix)
		}); err != nil {
			return err
		}
		if e.PixelTruth == nil {
			e.PixelTruth = map[string]string{}
		}
		e.PixelTruth[role] = rel
	}
	return nil
}

func setKey(m map[string]int, k string, v int) map[string]int {
	if m == nil {
		m = map[string]int{}
	}
	m[k] = v
	return m
}

// writeFile creates a file and fills it.
func writeFile(name string, fill func(io.Writer) error) error {
	f, err := os.Create(name)
	if err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := fill(f); err != nil {
		f.Close()
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	return nil
}

// Close writes the manifest atomically (a temporary file renamed into
// place). After Close, Add fails.
func (w *Writer) Close() error {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.closed {
		return nil
	}
	w.closed = true
	m := writtenManifest{Format: FormatVersion, Detector: w.det, Events: w.events}
	var b bytes.Buffer
	b.WriteString("# tpcscan dataset manifest: see the formats section of tpcscan's README.\n")
	if err := toml.NewEncoder(&b).Encode(m); err != nil {
		return fmt.Errorf("write manifest: %w", err)
	}
	name := filepath.Join(w.dir, ManifestName)
	tmp, err := os.CreateTemp(w.dir, ManifestName+".*.tmp")
	if err != nil {
		return fmt.Errorf("write manifest: %w", err)
	}
	defer os.Remove(tmp.Name()) // no-op after the rename
	if _, err := tmp.Write(b.Bytes()); err != nil {
		tmp.Close()
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := tmp.Chmod(0o644); err != nil {
		tmp.Close()
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := os.Rename(tmp.Name(), name); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	return nil
}
