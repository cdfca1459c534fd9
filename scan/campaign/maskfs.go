package campaign

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
)

// maskRoot writes files inside one folder only (os.Root refuses paths that
// escape it, symbolic links included).
type maskRoot struct{ r *os.Root }

func openMaskRoot(dir string) (maskRoot, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return maskRoot{}, fmt.Errorf("masks: %w", err)
	}
	r, err := os.OpenRoot(dir)
	if err != nil {
		return maskRoot{}, fmt.Errorf("masks: %w", err)
	}
	return maskRoot{r}, nil
}

func (m maskRoot) Close() error { return m.r.Close() }

func (m maskRoot) Mkdir(name string) error {
	if err := m.r.Mkdir(name, 0o755); err != nil && !errors.Is(err, fs.ErrExist) {
		return err
	}
	return nil
}

// WriteFile writes name through a temporary file and a rename, so a reader
// never sees half a mask.
func (m maskRoot) WriteFile(name string, write func(io.Writer) error) error {
	tmp := name + ".tmp"
	f, err := m.r.OpenFile(tmp, os.O_WRONLY|os.O_CREATE|os.O_TRUNC, 0o644)
	if err != nil {
		return err
	}
	if err := write(f); err != nil {
		f.Close()
		m.r.Remove(tmp)
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := f.Close(); err != nil {
		m.r.Remove(tmp)
		return fmt.Errorf("write %s: %w", name, err)
	}
	return m.r.Rename(tmp, name)
}

func writeJSONFile(m maskRoot, name string, v any) error {
	return m.WriteFile(name, func(w io.Writer) error {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(v)
	})
}
