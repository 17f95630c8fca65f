package bagit

import (
	"archive/tar"
	"archive/zip"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strings"

	"github.com/klauspost/compress/zstd"
)

// Kind of an entry in a bag source.
type Kind int

const (
	File Kind = iota
	Dir
	Symlink
	Other
)

// Entry is one object in a bag, named by its slash path from the bag's
// base folder.
type Entry struct {
	Name   string
	Size   int64
	Kind   Kind
	Target string // symlink target
	// Pos is the entry's place in an archive, from 1 (0 in a folder): two
	// entries of one name are told apart by it.
	Pos int
}

// Source is where a bag is read from: a folder or an archive.
type Source interface {
	Name() string
	Entries() []Entry
	// ReadSmall reads a whole entry of at most limit bytes.
	ReadSmall(name string, limit int64) ([]byte, error)
	// Each streams every regular file once, in the source's own order;
	// an archive that holds a name twice streams both copies.
	Each(fn func(name string, r io.Reader) error) error
}

// Limits bound what reading an archive may cost (decompression bombs:
// RFC 8493 sec. 5 says not to trust declared sizes).
type Limits struct {
	MaxEntryBytes int64 // one entry
	MaxTotalBytes int64 // the whole archive, decompressed
	MaxEntries    int
}

// DefaultLimits suit repository-sized deposits.
var DefaultLimits = Limits{MaxEntryBytes: 64 << 30, MaxTotalBytes: 1 << 40, MaxEntries: 1_000_000}

// ErrLimit marks an archive that exceeds Limits.
var ErrLimit = errors.New("archive exceeds the reading limits")

// Open returns the Source for path: a folder, a .zip or a .tar.zst file.
func Open(path string, lim Limits) (Source, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	switch {
	case st.IsDir():
		return openDir(path)
	case strings.HasSuffix(path, ".zip"):
		return openZip(path, lim)
	case strings.HasSuffix(path, ".tar.zst"):
		return openTarZst(path, lim)
	}
	return nil, fmt.Errorf("%s: not a bag folder, .zip or .tar.zst", path)
}

// ---------------------------------------------------------------- folder

type dirSource struct {
	root    string
	entries []Entry
}

func openDir(root string) (*dirSource, error) {
	d := &dirSource{root: root}
	err := filepath.WalkDir(root, func(p string, de fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if p == root {
			return nil
		}
		rel, _ := filepath.Rel(root, p)
		e := Entry{Name: filepath.ToSlash(rel)}
		switch {
		case de.Type()&fs.ModeSymlink != 0:
			e.Kind = Symlink
			e.Target, _ = os.Readlink(p)
		case de.IsDir():
			e.Kind = Dir
		case de.Type().IsRegular():
			info, err := de.Info()
			if err != nil {
				return err
			}
			e.Size = info.Size()
		default:
			e.Kind = Other
		}
		d.entries = append(d.entries, e)
		return nil
	})
	return d, err
}

func (d *dirSource) Name() string      { return d.root }
func (d *dirSource) Entries() []Entry  { return d.entries }
func (d *dirSource) find(n string) int { return findEntry(d.entries, n) }

func findEntry(es []Entry, n string) int {
	for i, e := range es {
		if e.Name == n {
			return i
		}
	}
	return -1
}

// ReadSmall opens only regular files found by the walk (never a path
// built from manifest text, so nothing outside the bag is opened).
func (d *dirSource) ReadSmall(name string, limit int64) ([]byte, error) {
	i := d.find(name)
	if i < 0 || d.entries[i].Kind != File {
		return nil, fs.ErrNotExist
	}
	f, err := os.Open(filepath.Join(d.root, filepath.FromSlash(name)))
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return readLimited(f, limit)
}

func readLimited(r io.Reader, limit int64) ([]byte, error) {
	b, err := io.ReadAll(io.LimitReader(r, limit+1))
	if err != nil {
		return nil, err
	}
	if int64(len(b)) > limit {
		return nil, fmt.Errorf("%w: more than %d bytes", ErrLimit, limit)
	}
	return b, nil
}

func (d *dirSource) Each(fn func(string, io.Reader) error) error {
	for _, e := range d.entries {
		if e.Kind != File {
			continue
		}
		f, err := os.Open(filepath.Join(d.root, filepath.FromSlash(e.Name)))
		if err != nil {
			return err
		}
		err = fn(e.Name, f)
		f.Close()
		if err != nil {
			return err
		}
	}
	return nil
}

// ---------------------------------------------------------------- zip

type zipSource struct {
	path    string
	r       *zip.ReadCloser
	prefix  string
	entries []Entry
	files   map[string]*zip.File // first copy of each name
	byPos   map[int]*zip.File
	lim     Limits
}

func openZip(p string, lim Limits) (*zipSource, error) {
	r, err := zip.OpenReader(p)
	if err != nil {
		return nil, err
	}
	z := &zipSource{path: p, r: r, files: map[string]*zip.File{}, byPos: map[int]*zip.File{}, lim: lim}
	var names []string
	for _, f := range r.File {
		names = append(names, f.Name)
	}
	z.prefix = bagPrefix(names)
	if len(r.File) > lim.MaxEntries {
		return nil, fmt.Errorf("%w: %d entries", ErrLimit, len(r.File))
	}
	var total uint64
	for i, f := range r.File {
		name := strings.TrimPrefix(f.Name, z.prefix)
		if name == "" {
			continue
		}
		e := Entry{Name: strings.TrimSuffix(name, "/"), Size: int64(f.UncompressedSize64), Pos: i + 1}
		mode := f.Mode()
		switch {
		case mode&fs.ModeSymlink != 0:
			e.Kind = Symlink
		case mode.IsDir() || strings.HasSuffix(f.Name, "/"):
			e.Kind = Dir
		case !mode.IsRegular():
			e.Kind = Other
		}
		total += f.UncompressedSize64
		if e.Kind == File && f.UncompressedSize64 > uint64(lim.MaxEntryBytes) {
			return nil, fmt.Errorf("%w: %s declares %d bytes", ErrLimit, f.Name, f.UncompressedSize64)
		}
		z.entries = append(z.entries, e)
		if _, dup := z.files[e.Name]; !dup {
			z.files[e.Name] = f
		}
		z.byPos[e.Pos] = f
	}
	if total > uint64(lim.MaxTotalBytes) {
		return nil, fmt.Errorf("%w: %d bytes in all", ErrLimit, total)
	}
	sort.SliceStable(z.entries, func(i, j int) bool { return z.entries[i].Name < z.entries[j].Name })
	return z, nil
}

func (z *zipSource) Name() string     { return z.path }
func (z *zipSource) Entries() []Entry { return z.entries }

func (z *zipSource) open(name string) (io.ReadCloser, error) {
	f, ok := z.files[name]
	if !ok {
		return nil, fs.ErrNotExist
	}
	return openZipFile(f)
}

func openZipFile(f *zip.File) (io.ReadCloser, error) {
	rc, err := f.Open()
	if err != nil {
		return nil, err
	}
	// archive/zip fails reads past the declared size; cap it as well.
	return struct {
		io.Reader
		io.Closer
	}{io.LimitReader(rc, int64(f.UncompressedSize64)), rc}, nil
}

func (z *zipSource) ReadSmall(name string, limit int64) ([]byte, error) {
	rc, err := z.open(name)
	if err != nil {
		return nil, err
	}
	defer rc.Close()
	return readLimited(rc, limit)
}

func (z *zipSource) Each(fn func(string, io.Reader) error) error {
	for _, e := range z.entries {
		if e.Kind != File {
			continue
		}
		rc, err := openZipFile(z.byPos[e.Pos])
		if err != nil {
			return err
		}
		err = fn(e.Name, rc)
		rc.Close()
		if err != nil {
			return err
		}
	}
	return nil
}

// ---------------------------------------------------------------- tar.zst

// tarZstSource reads a zstd-compressed tar in two streaming passes: one
// to list the entries and keep the small tag files, one per Each call.
type tarZstSource struct {
	path    string
	prefix  string
	entries []Entry
	small   map[string][]byte
	lim     Limits
}

// smallLimit bounds one tag file kept from the listing pass, smallTotal
// all of them (many small tag files must not fill memory); others are
// read by a second pass when asked for.
const (
	smallLimit = 16 << 20
	smallTotal = 64 << 20
)

func (t *tarZstSource) stream(fn func(h *tar.Header, r io.Reader) error) error {
	f, err := os.Open(t.path)
	if err != nil {
		return err
	}
	defer f.Close()
	dec, err := zstd.NewReader(f, zstd.WithDecoderMaxMemory(1<<30))
	if err != nil {
		return err
	}
	defer dec.Close()
	tr := tar.NewReader(io.LimitReader(dec, t.lim.MaxTotalBytes))
	n := 0
	for {
		h, err := tr.Next()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
		n++
		if n > t.lim.MaxEntries {
			return fmt.Errorf("%w: more than %d entries", ErrLimit, t.lim.MaxEntries)
		}
		if h.Size > t.lim.MaxEntryBytes {
			return fmt.Errorf("%w: %s declares %d bytes", ErrLimit, h.Name, h.Size)
		}
		if err := fn(h, tr); err != nil {
			return err
		}
	}
}

func openTarZst(p string, lim Limits) (*tarZstSource, error) {
	t := &tarZstSource{path: p, small: map[string][]byte{}, lim: lim}
	var raw []Entry
	var kept int64
	err := t.stream(func(h *tar.Header, r io.Reader) error {
		e := Entry{Name: h.Name, Size: h.Size, Pos: len(raw) + 1}
		switch h.Typeflag {
		case tar.TypeReg:
		case tar.TypeDir:
			e.Kind = Dir
		case tar.TypeSymlink, tar.TypeLink:
			e.Kind, e.Target = Symlink, h.Linkname
		default:
			e.Kind = Other
		}
		raw = append(raw, e)
		_, seen := t.small[h.Name]
		if e.Kind == File && !seen && !strings.Contains(h.Name, "/data/") && !strings.HasPrefix(h.Name, "data/") && h.Size <= smallLimit && kept+h.Size <= smallTotal {
			b, err := readLimited(r, smallLimit)
			if err != nil {
				return err
			}
			t.small[h.Name] = b
			kept += int64(len(b))
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	var names []string
	for _, e := range raw {
		names = append(names, e.Name)
	}
	t.prefix = bagPrefix(names)
	for _, e := range raw {
		e.Name = strings.TrimSuffix(strings.TrimPrefix(e.Name, t.prefix), "/")
		if e.Name != "" {
			t.entries = append(t.entries, e)
		}
	}
	return t, nil
}

func (t *tarZstSource) Name() string     { return t.path }
func (t *tarZstSource) Entries() []Entry { return t.entries }

func (t *tarZstSource) ReadSmall(name string, limit int64) ([]byte, error) {
	if b, ok := t.small[t.prefix+name]; ok {
		if int64(len(b)) > limit {
			return nil, fmt.Errorf("%w: more than %d bytes", ErrLimit, limit)
		}
		return b, nil
	}
	var out []byte
	found := false
	err := t.stream(func(h *tar.Header, r io.Reader) error {
		if found || h.Name != t.prefix+name || h.Typeflag != tar.TypeReg {
			return nil // the first copy of a duplicated name, as in the listing
		}
		found = true
		var err error
		out, err = readLimited(r, limit)
		return err
	})
	if err == nil && !found {
		err = fs.ErrNotExist
	}
	return out, err
}

func (t *tarZstSource) Each(fn func(string, io.Reader) error) error {
	return t.stream(func(h *tar.Header, r io.Reader) error {
		if h.Typeflag != tar.TypeReg {
			return nil
		}
		name := strings.TrimPrefix(h.Name, t.prefix)
		return fn(name, r)
	})
}

// bagPrefix finds the folder holding bagit.txt (an archive usually has
// the bag's own folder at its top).
func bagPrefix(names []string) string {
	best := ""
	depth := -1
	for _, n := range names {
		if path.Base(n) != DeclarationFile {
			continue
		}
		d := strings.Count(n, "/")
		if depth < 0 || d < depth {
			depth = d
			best = strings.TrimSuffix(n, DeclarationFile)
		}
	}
	return best
}
