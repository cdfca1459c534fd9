package dataset

import (
	"archive/zip"
	"fmt"
	"io"

	"github.com/tpcscan/tpcscan/scan"
)

// An .npz file is a zip archive of .npy files (numpy.savez, stored, or
// numpy.savez_compressed, deflated); array "x" is the member "x.npy".
// tpcscan reads the arrays named by plane role ("ind1", "ind2", "coll") and,
// for pixel truth, "ind1_truth" and so on. Other members are ignored.

// maxDeflateRatio is deflate's largest possible expansion (258-byte
// matches coded in about 2 bits: 1032:1). A member claiming more is lying
// about its size, and we must not allocate for it.
const maxDeflateRatio = 1032

// npzMember finds a member and checks its declared sizes against each
// other and against the archive's size.
func npzMember(z *zip.Reader, size int64, array string) (*zip.File, error) {
	name := array + ".npy"
	var found *zip.File
	for _, f := range z.File {
		if f.Name == name {
			if found != nil {
				return nil, fmt.Errorf("npz holds %s twice", name)
			}
			found = f
		}
	}
	if found == nil {
		return nil, nil
	}
	u, c := found.UncompressedSize64, found.CompressedSize64
	if off, err := found.DataOffset(); err != nil || off < 0 || c > uint64(size-off) {
		return nil, fmt.Errorf("npz member %s: claims %d compressed bytes, more than the archive holds", name, c)
	}
	switch found.Method {
	case zip.Store:
		if u != c {
			return nil, fmt.Errorf("npz member %s: stored with %d bytes but claims %d", name, c, u)
		}
	case zip.Deflate:
		if u > maxDeflateRatio*c+1024 {
			return nil, fmt.Errorf("npz member %s: claims %d bytes from %d compressed, more than deflate can expand", name, u, c)
		}
	default:
		return nil, fmt.Errorf("npz member %s: compression method %d (only stored and deflate are read)", name, found.Method)
	}
	if u > 1<<40 {
		return nil, fmt.Errorf("npz member %s: %d bytes is implausibly large", name, u)
	}
	return found, nil
}

// openMember opens a member as an .npy stream of known size.
func openMember(f *zip.File) (io.ReadCloser, int64, error) {
	rc, err := f.Open()
	if err != nil {
		return nil, 0, fmt.Errorf("npz member %s: %w", f.Name, err)
	}
	return rc, int64(f.UncompressedSize64), nil
}

// npzPlanes reads an event from one .npz.
func (l *loader) npzPlanes(ev *scan.Event) error {
	rel := l.e.NPZ
	f, st, err := openFile(l.root, rel)
	if err != nil {
		return l.fail(rel, err)
	}
	defer f.Close()
	z, err := zip.NewReader(f, st.Size())
	if err != nil {
		return l.fail(rel, fmt.Errorf("not a readable .npz (zip) file: %w", err))
	}
	if err := l.readNPZ(z, st.Size(), ev); err != nil {
		return l.fail(rel, err)
	}
	return nil
}

func (l *loader) readNPZ(z *zip.Reader, size int64, ev *scan.Event) error {
	for i, p := range l.det.Planes {
		m, err := npzMember(z, size, string(p.Role))
		if err != nil {
			return err
		}
		if m == nil {
			return fmt.Errorf("no array %q for plane %s (arrays are named by plane role)", p.Role, p.Role)
		}
		rc, size, err := openMember(m)
		if err != nil {
			return err
		}
		img, err := l.readImage(rc, size, i)
		rc.Close()
		if err != nil {
			return fmt.Errorf("array %s: %w", p.Role, err)
		}
		ev.Planes = append(ev.Planes, img)
	}
	if l.skipTruth {
		return nil
	}
	for i, p := range l.det.Planes {
		name := string(p.Role) + "_truth"
		m, err := npzMember(z, size, name)
		if err != nil {
			return err
		}
		if m == nil {
			continue
		}
		rc, size, err := openMember(m)
		if err != nil {
			return err
		}
		t, err := readTruth(rc, size, ev.Planes[i])
		rc.Close()
		if err != nil {
			return fmt.Errorf("array %s: %w", name, err)
		}
		if ev.Truth == nil {
			ev.Truth = make([]*scan.TruthImage, len(l.det.Planes))
		}
		ev.Truth[i] = t
	}
	return nil
}
