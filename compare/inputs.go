package compare

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"trajvault/ingest"
)

// bundleTrajectories is where a deposit bundle keeps its trajectory files
// (the folder pack writes; a bag's payload lives under data/).
const bundleTrajectories = "data/trajectories"

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
// a folder of them; a bundle folder (its data/trajectories); or text logs
// (a log file, a trajectory folder or an ensemble folder), converted into
// tmp with the options of convert.
func resolve(ctx context.Context, path, tmp string, co ingest.ConvertOptions) (*side, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	s := &side{files: map[string]string{}, label: map[string]string{}}
	add := func(name, file, label string) error {
		if prev, ok := s.files[name]; ok {
			return fmt.Errorf("%s: two trajectories named %q (%s and %s); rename one, pairs are matched by name", path, name, s.label[name], prev)
		}
		s.names = append(s.names, name)
		s.files[name], s.label[name] = file, label
		return nil
	}
	var files []string
	switch {
	case st.Mode().IsRegular() && isTrajectoryFile(path):
		files = []string{path}
	case st.Mode().IsRegular() && (strings.HasSuffix(path, ".zip") || strings.HasSuffix(path, ".tar.zst")):
		return nil, fmt.Errorf("%s: bundle archives are not read in place by compare; unpack it and give the folder", path)
	case st.IsDir():
		if files, err = h5In(path); err != nil {
			return nil, err
		}
		if len(files) == 0 {
			if files, err = h5In(filepath.Join(path, bundleTrajectories)); err != nil && !os.IsNotExist(err) {
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
	if len(files) == 0 {
		if err := convertLogs(ctx, path, st.IsDir(), tmp, co, add); err != nil {
			return nil, err
		}
	}
	if len(s.names) == 0 {
		return nil, fmt.Errorf("%s: no trajectories found; give .h5 files, a folder of them, a bundle folder or text logs", path)
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
