package compare

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"os"
	pathpkg "path"
	"path/filepath"
	"sort"
	"strings"

	"trajvault/ingest"
	"trajvault/internal/bagit"
	"trajvault/schema"
)

// Members of a bundle archive are read into memory (never unpacked to
// disk): each at most maxMember bytes, all of one archive at most
// maxArchive. Larger deposits are compared from the unpacked folder.
const (
	maxMember  = 2 << 30
	maxArchive = 8 << 30
)

// isTrajectoryFile says whether a file name is an HDF5 trajectory.
func isTrajectoryFile(name string) bool {
	switch strings.ToLower(filepath.Ext(name)) {
	case ".h5", ".hdf5", ".h5md":
		return true
	}
	return false
}

func h5In(dir string) ([]string, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, err
	}
	var out []string
	for _, e := range entries {
		if e.Type().IsRegular() && isTrajectoryFile(e.Name()) && !strings.HasPrefix(e.Name(), ".") {
			out = append(out, filepath.Join(dir, e.Name()))
		}
	}
	sort.Strings(out)
	return out, nil
}

// resolve turns one argument into trajectory files by name: an HDF5 file;
// a folder of them; a bundle folder (its data/trajectories); a bundle
// archive (.zip or .tar.zst, read in place: readArchive); or text logs
// (a log file, a trajectory folder or an ensemble folder), converted into
// tmp with the options of convert.
func resolve(ctx context.Context, path, tmp string, co ingest.ConvertOptions) (*side, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	s := &side{files: map[string]string{}, label: map[string]string{}, images: map[string][]byte{}}
	add := func(name, file, label string) error {
		if prev, ok := s.files[name]; ok {
			return fmt.Errorf("%s: two trajectories named %q (%s and %s); rename one, pairs are matched by name", path, name, s.label[name], prev)
		}
		s.names = append(s.names, name)
		s.files[name], s.label[name] = file, label
		return nil
	}
	var files []string
	archive := false
	switch {
	case st.Mode().IsRegular() && isTrajectoryFile(path):
		files = []string{path}
	case st.Mode().IsRegular() && (strings.HasSuffix(path, ".zip") || strings.HasSuffix(path, ".tar.zst")):
		archive = true
		if err := readArchive(path, s, add); err != nil {
			return nil, err
		}
	case st.IsDir():
		if files, err = h5In(path); err != nil {
			return nil, err
		}
		if len(files) == 0 {
			if files, err = h5In(filepath.Join(path, filepath.FromSlash(schema.TrajectoriesDir))); err != nil && !os.IsNotExist(err) {
				return nil, err
			}
		}
	case !st.Mode().IsRegular():
		return nil, fmt.Errorf("%s: not a regular file or folder; give trajectory files, folders or text logs", path)
	}
	for _, f := range files {
		if err := add(strings.TrimSuffix(filepath.Base(f), filepath.Ext(f)), f, f); err != nil {
			return nil, err
		}
	}
	if len(files) == 0 && !archive {
		if err := convertLogs(ctx, path, st.IsDir(), tmp, co, add); err != nil {
			return nil, err
		}
	}
	if len(s.names) == 0 {
		return nil, fmt.Errorf("%s: no trajectories found; give .h5 files, a folder of them, a bundle (folder, .zip or .tar.zst) or text logs", path)
	}
	sort.Strings(s.names)
	return s, nil
}

// convertLogs converts text logs at path (one log file, or a folder as
// convert reads it) into tmp.
func convertLogs(ctx context.Context, path string, dir bool, tmp string, co ingest.ConvertOptions, add func(name, file, label string) error) error {
	if err := os.MkdirAll(tmp, 0o755); err != nil {
		return err
	}
	if !dir {
		out := filepath.Join(tmp, "0.h5")
		rep, _, err := ingest.ConvertFiles(ctx, []string{path}, out, co)
		if err != nil {
			return refusal(path, rep, err)
		}
		return add(strings.TrimSuffix(filepath.Base(path), filepath.Ext(path)), out, path)
	}
	trajs, err := ingest.Discover(path, co.Recipe)
	if err != nil {
		return err
	}
	for i, t := range trajs {
		if err := ctx.Err(); err != nil {
			return err
		}
		rep, err := ingest.Scan(ctx, t, co.Options)
		if err != nil {
			return err
		}
		if p := rep.Refusal(co.DropPartial); p != nil {
			return refusal(t.Dir, rep, ingest.ErrRefused)
		}
		out := filepath.Join(tmp, fmt.Sprintf("%d.h5", i))
		if _, err := ingest.Convert(ctx, rep, out, co); err != nil {
			return err
		}
		if err := add(t.Name, out, t.Dir); err != nil {
			return err
		}
	}
	return nil
}

// refusal explains why logs could not be converted: the first refusing
// problem with its place.
func refusal(path string, rep *ingest.TrajReport, err error) error {
	if rep != nil {
		if p := rep.Refusal(false); p != nil {
			loc := p.File
			if p.Line > 0 {
				loc = fmt.Sprintf("%s:%d", p.File, p.Line)
				if p.Column > 0 {
					loc += fmt.Sprintf(":%d", p.Column)
				}
			}
			return fmt.Errorf("%s: %s %s (%s); run trajvault scan on it, fix the logs or the recipe", loc, p.Code, p.Message, path)
		}
	}
	return fmt.Errorf("%s: %w", path, err)
}

// readArchive reads the trajectory files of a bundle archive (the
// members directly under data/trajectories) into memory through the
// bag reader that validate uses (internal/bagit: limits against
// decompression bombs, names relative to the bag). Checksums are
// validate's job; run trajvault validate on the archive to check them.
func readArchive(path string, s *side, add func(name, file, label string) error) error {
	src, err := bagit.Open(path, bagit.DefaultLimits)
	if err != nil {
		return err
	}
	size := map[string]int64{}
	for _, e := range src.Entries() {
		if e.Kind == bagit.File {
			size[e.Name] = max(size[e.Name], e.Size)
		}
	}
	total := int64(0)
	return src.Each(func(name string, r io.Reader) error {
		dir, base := pathpkg.Split(name)
		if dir != schema.TrajectoriesDir+"/" || !schema.IsTrajectory(base) || strings.HasPrefix(base, ".") {
			return nil
		}
		label := path + ":" + name
		if n := size[name]; n > maxMember || total+n > maxArchive {
			return fmt.Errorf("%s: %d bytes, over the %d bytes compare reads from an archive (%d for all members); unpack the archive and give the folder", label, n, int64(maxMember), int64(maxArchive))
		}
		var buf bytes.Buffer
		buf.Grow(int(size[name]))
		n, err := buf.ReadFrom(io.LimitReader(r, maxMember+1))
		if err != nil {
			return fmt.Errorf("%s: %w", label, err)
		}
		if n > maxMember {
			return fmt.Errorf("%s: longer than the %d bytes compare reads from an archive; unpack the archive and give the folder", label, int64(maxMember))
		}
		total += n
		key := strings.TrimSuffix(base, schema.TrajectoryExt)
		if err := add(key, name, label); err != nil {
			return err
		}
		s.images[key] = buf.Bytes()
		return nil
	})
}
