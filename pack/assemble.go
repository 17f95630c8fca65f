package pack

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"syscall"
	"time"

	"trajvault/internal/bagit"
	"trajvault/internal/finding"
	"trajvault/internal/outdir"
	"trajvault/schema"
)

// Limits are what a general-purpose repository accepts per record (a
// deposit), in files and bytes. Zero means no limit.
type Limits struct {
	MaxFiles       int
	MaxRecordBytes int64
	MaxFileBytes   int64
}

// Codes of the findings about repository limits.
const (
	LTooManyFiles = "L1" // more files than a record may hold
	LRecordTooBig = "L2" // more bytes than a record may hold
	LFileTooBig   = "L3" // one file larger than a record may hold
)

// Bag is one bag written by Assemble.
type Bag struct {
	Dir          string
	Trajectories int
}

// Assemble writes the bag(s) of a deposit from a staging folder in which
// the converted trajectories sit at their Converted.File paths. With split
// set and the limits exceeded, the trajectories are shared, in order,
// among bags out-1 ... out-n (a bag group, RFC 8493 Bag-Count); otherwise
// one bag is written at out. All or nothing: bags are built under
// hidden .partial names made by NewStaging (never a name a user may own)
// and swapped into place at the end (see replace); the staging folder is
// consumed.
func Assemble(ctx context.Context, staging, out string, conv []Converted, bo BundleOptions, lim Limits, split, force bool) ([]Bag, error) {
	groups := [][]Converted{conv}
	if split {
		groups = splitGroups(staging, conv, bo, lim)
	}
	if len(groups) == 1 {
		if err := WriteBundle(ctx, staging, conv, bo); err != nil {
			return nil, err
		}
		if err := replace(staging, out, force); err != nil {
			return nil, err
		}
		return []Bag{{out, len(conv)}}, nil
	}
	var dirs []string
	cleanup := func() {
		for _, d := range dirs {
			os.RemoveAll(d)
		}
	}
	for i, grp := range groups {
		if err := ctx.Err(); err != nil {
			cleanup()
			return nil, err
		}
		final := fmt.Sprintf("%s-%d", out, i+1)
		if _, err := os.Stat(final); err == nil && !force {
			cleanup()
			return nil, fmt.Errorf("%s already exists; use --force to replace it", final)
		}
		d, err := NewStaging(final)
		if err != nil {
			cleanup()
			return nil, err
		}
		dirs = append(dirs, d)
		for _, c := range grp {
			if err := os.Rename(filepath.Join(staging, filepath.FromSlash(c.File)), filepath.Join(d, filepath.FromSlash(c.File))); err != nil {
				cleanup()
				return nil, err
			}
		}
		b := bo
		b.GroupID, b.GroupIndex, b.GroupCount = filepath.Base(out), i+1, len(groups)
		if err := WriteBundle(ctx, d, grp, b); err != nil {
			cleanup()
			return nil, err
		}
	}
	os.RemoveAll(staging)
	bags := make([]Bag, len(dirs))
	for i, d := range dirs {
		final := fmt.Sprintf("%s-%d", out, i+1)
		if err := replace(d, final, force); err != nil {
			return nil, err
		}
		bags[i] = Bag{final, len(groups[i])}
	}
	return bags, nil
}

// NewStaging makes the folder in which the bag for final is built: a new,
// hidden, uniquely named folder beside final (os.MkdirTemp, so that no
// folder of the user's, such as final+".partial", is ever reused or
// deleted), readable like a normal folder, with the trajectories folder
// inside. The caller owns it and removes it on failure.
func NewStaging(final string) (string, error) {
	d, err := outdir.Temp(final)
	if err != nil {
		return "", err
	}
	if err := os.MkdirAll(filepath.Join(d, filepath.FromSlash(schema.TrajectoriesDir)), 0o755); err != nil {
		os.RemoveAll(d)
		return "", err
	}
	return d, nil
}

// replace puts the finished bag dir at final. Every file and folder of
// dir is synced first, so that after a crash the name final never holds
// a bag whose content is still in the page cache. Without force final
// must not exist (RENAME_NOREPLACE where the kernel has it). With force
// an existing final is exchanged with dir in one atomic step
// (renameat2(2) RENAME_EXCHANGE): at every moment final holds either the
// complete old bag or the complete new one; the old one, now at the
// staging name, is removed last. File systems without the exchange get
// two renames (old aside into a fresh hidden folder, new into place),
// where for a moment final is absent but both bags are complete.
func replace(dir, final string, force bool) error {
	if err := syncTree(dir); err != nil {
		return err
	}
	parent := filepath.Dir(final)
	_, statErr := os.Lstat(final)
	switch {
	case statErr != nil && !os.IsNotExist(statErr):
		return statErr
	case statErr != nil: // final is free
		if err := renameNoReplace(dir, final); err != nil {
			return err
		}
		return syncDir(parent)
	case !force:
		return fmt.Errorf("%s already exists; use --force to replace it", final)
	}
	err := renameExchange(dir, final)
	if err == nil {
		if err := syncDir(parent); err != nil {
			return err
		}
		return os.RemoveAll(dir) // the old bag, now under our staging name
	}
	if !errors.Is(err, errNoExchange) {
		return err
	}
	aside, err := os.MkdirTemp(parent, "."+filepath.Base(final)+".replaced-*")
	if err != nil {
		return err
	}
	if err := os.Rename(final, filepath.Join(aside, "old")); err != nil {
		os.Remove(aside)
		return err
	}
	if err := os.Rename(dir, final); err != nil {
		os.Rename(filepath.Join(aside, "old"), final) // put the old one back
		os.Remove(aside)
		return err
	}
	if err := syncDir(parent); err != nil {
		return err
	}
	return os.RemoveAll(aside)
}

// syncTree fsyncs every regular file and folder under dir, folders after
// their content, and dir itself.
func syncTree(dir string) error {
	var dirs []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		switch {
		case d.IsDir():
			dirs = append(dirs, p)
		case d.Type().IsRegular():
			return syncPath(p)
		}
		return nil
	})
	if err != nil {
		return err
	}
	for i := len(dirs) - 1; i >= 0; i-- {
		if err := syncDir(dirs[i]); err != nil {
			return err
		}
	}
	return nil
}

func syncPath(p string) error {
	f, err := os.Open(p)
	if err != nil {
		return err
	}
	err = f.Sync()
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	return err
}

func syncDir(p string) error {
	err := syncPath(p)
	if errors.Is(err, syscall.EINVAL) { // some file systems cannot sync folders
		return nil
	}
	return err
}

// metadataFiles counts what a bag holds besides the trajectory files and
// their provenance records: tag files (bagit.txt, bag-info.txt, a payload
// and a tag manifest per algorithm), the data description, the crate, the DataCite
// record and the plots. Kept sources are counted per trajectory.
func metadataFiles(bo BundleOptions) int {
	return 2 + 2*len(bo.Algorithms) + 3 + len(bo.Plots)
}

// filesOf counts the payload files of one trajectory: its data file, its
// provenance record and, when kept, its sources.
func filesOf(c Converted, bo BundleOptions) int {
	n := 2
	if bo.KeepSources && c.Report != nil {
		n += len(c.Report.Files)
	}
	return n
}

// splitGroups partitions the trajectories, in order, into groups that keep
// each bag within the file and size limits (a trajectory that alone
// exceeds them gets a bag of its own).
func splitGroups(dir string, conv []Converted, bo BundleOptions, lim Limits) [][]Converted {
	var groups [][]Converted
	var cur []Converted
	var size int64
	files := metadataFiles(bo)
	for _, c := range conv {
		var s int64
		if st, err := os.Stat(filepath.Join(dir, filepath.FromSlash(c.File))); err == nil {
			s = st.Size()
		}
		n := filesOf(c, bo)
		overFiles := lim.MaxFiles > 0 && files+n > lim.MaxFiles
		overBytes := lim.MaxRecordBytes > 0 && size+s > lim.MaxRecordBytes
		if len(cur) > 0 && (overFiles || overBytes) {
			groups = append(groups, cur)
			cur, size, files = nil, 0, metadataFiles(bo)
		}
		cur = append(cur, c)
		size += s
		files += n
	}
	if len(cur) > 0 {
		groups = append(groups, cur)
	}
	return groups
}

// CheckLimits reports what a general-purpose repository may refuse of the
// bag at dir.
func CheckLimits(dir string, lim Limits) []finding.Finding {
	var files int
	var total, biggest int64
	var big string
	filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
		if err == nil && info.Mode().IsRegular() {
			files++
			total += info.Size()
			if info.Size() > biggest {
				biggest, big = info.Size(), p
			}
		}
		return nil
	})
	const gb = 1e9
	var out []finding.Finding
	add := func(code, format string, args ...any) {
		out = append(out, finding.Finding{Code: code, Severity: finding.Warning, Location: finding.Location{File: dir}, Message: fmt.Sprintf(format, args...)})
	}
	if lim.MaxFiles > 0 && files > lim.MaxFiles {
		add(LTooManyFiles, "%d files exceed the repository limit of %d per record; upload the archive (--archive) or split the bundle (--split)", files, lim.MaxFiles)
	}
	if lim.MaxRecordBytes > 0 && total > lim.MaxRecordBytes {
		add(LRecordTooBig, "%.1f GB exceed the limit of %.3g GB per record; split the ensemble into several bags (--split)", float64(total)/gb, float64(lim.MaxRecordBytes)/gb)
	}
	if lim.MaxFileBytes > 0 && biggest > lim.MaxFileBytes {
		rel, _ := filepath.Rel(dir, big)
		add(LFileTooBig, "%s (%.1f GB) exceeds the limit of %.3g GB per file", filepath.ToSlash(rel), float64(biggest)/gb, float64(lim.MaxFileBytes)/gb)
	}
	return out
}

// Archive kinds WriteArchive makes.
const (
	ArchiveTarZst = "tar.zst"
	ArchiveZip    = "zip"
)

// WriteArchive writes the bag at dir as one upload file at path (tar.zst
// or zip), atomically: a temporary file in the target folder, synced,
// then renamed into place. An existing path is replaced only with force.
func WriteArchive(dir, path, kind string, force bool) error {
	if kind != ArchiveTarZst && kind != ArchiveZip {
		return fmt.Errorf("archive kind %q: use %s or %s", kind, ArchiveTarZst, ArchiveZip)
	}
	if _, err := os.Stat(path); err == nil && !force {
		return fmt.Errorf("%s already exists; use --force to replace it", path)
	}
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".partial-*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	mtime := time.Now().UTC().Truncate(time.Second)
	if kind == ArchiveZip {
		err = bagit.WriteZip(dir, f, mtime)
	} else {
		err = bagit.WriteTarZst(dir, f, mtime)
	}
	if err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Chmod(tmp, 0o644)
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		os.Remove(tmp)
	}
	return err
}
