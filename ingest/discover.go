package ingest

import (
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// Trajectory is the set of files that make one trajectory.
type Trajectory struct {
	Name string `json:"name"`
	Dir  string `json:"dir"`
	// Inputs are its files, in the order they are read (the geometry
	// first).
	Inputs  []Input `json:"inputs"`
	missing []string
	unknown []string
}

// geometry is the path of the geometry file, or "".
func (t *Trajectory) geometry() string {
	for _, in := range t.Inputs {
		if in.reader.Role == RoleGeometry {
			return in.Path
		}
	}
	return ""
}

// Discover finds the trajectories of an ensemble folder: with a recipe,
// the folders matching its trajectories pattern; otherwise every
// subfolder holding data files, or dir itself when it holds them.
func Discover(dir string, rc *Recipe) ([]*Trajectory, error) {
	st, err := os.Stat(dir)
	if err != nil {
		return nil, err
	}
	if !st.IsDir() {
		return nil, fmt.Errorf("%s is not a folder; scan takes an ensemble folder (one subfolder per trajectory)", dir)
	}
	var dirs []string
	if rc != nil && rc.Trajectories != "" {
		dirs, err = filepath.Glob(filepath.Join(dir, rc.Trajectories))
		if err != nil {
			return nil, fmt.Errorf("recipe trajectories pattern: %v", err)
		}
	} else {
		entries, err := os.ReadDir(dir)
		if err != nil {
			return nil, err
		}
		for _, e := range entries {
			if e.IsDir() && !strings.HasPrefix(e.Name(), ".") {
				dirs = append(dirs, filepath.Join(dir, e.Name()))
			}
		}
		if len(dirs) == 0 {
			dirs = []string{dir}
		}
	}
	sort.Strings(dirs)
	var out []*Trajectory
	for _, d := range dirs {
		if st, err := os.Stat(d); err != nil || !st.IsDir() {
			continue
		}
		if err := confined(dir, d, true); err != nil {
			return nil, err
		}
		t, err := trajectoryIn(dir, d, rc)
		if err != nil {
			return nil, err
		}
		if len(t.Inputs) == 0 && rc == nil {
			continue // not a trajectory folder
		}
		out = append(out, t)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("%s: no trajectories found (no .xyz files or tables); give a recipe with --recipe to describe the layout", dir)
	}
	return out, nil
}

// trajectoryIn reads the trajectory folder d inside the input folder
// root; every file it takes must stay inside root (confined).
func trajectoryIn(root, d string, rc *Recipe) (*Trajectory, error) {
	t := &Trajectory{Name: filepath.Base(d), Dir: d}
	if rc != nil && (rc.Geometry != nil || len(rc.Tables) > 0 || len(rc.Logs) > 0) {
		var refused error
		one := func(pattern string) string {
			m, _ := filepath.Glob(filepath.Join(d, pattern))
			sort.Strings(m)
			if len(m) == 0 {
				t.missing = append(t.missing, pattern)
				return ""
			}
			p := m[len(m)-1]
			if err := confined(root, p, false); err != nil && refused == nil {
				refused = fmt.Errorf("recipe file %q: %w", pattern, err)
			}
			return p
		}
		// A recipe's sections name the built-in formats.
		if rc.Geometry != nil {
			if p := one(rc.Geometry.File); p != "" {
				t.Inputs = append(t.Inputs, newInput(p, &xyzFormat, rc.Geometry))
			}
		}
		for i := range rc.Tables {
			if p := one(rc.Tables[i].File); p != "" {
				t.Inputs = append(t.Inputs, newInput(p, &tableFormat, &rc.Tables[i]))
			}
		}
		for i := range rc.Logs {
			if p := one(rc.Logs[i].File); p != "" {
				t.Inputs = append(t.Inputs, newInput(p, &logFormat, &rc.Logs[i]))
			}
		}
		if refused != nil {
			return nil, refused
		}
		return t, nil
	}
	entries, err := os.ReadDir(d)
	if err != nil {
		return nil, err
	}
	// Readers in registry order, so that a text geometry beside an .h5
	// file (perhaps an earlier output) stays the geometry.
	sort.SliceStable(entries, func(i, j int) bool {
		return rank(readerFor(extOf(entries[i].Name()))) < rank(readerFor(extOf(entries[j].Name())))
	})
	for _, e := range entries {
		if e.IsDir() || strings.HasPrefix(e.Name(), ".") {
			continue
		}
		p := filepath.Join(d, e.Name())
		r := readerFor(extOf(p))
		if r != nil {
			if err := confined(root, p, false); err != nil {
				return nil, err
			}
		}
		switch {
		case r == nil:
			t.unknown = append(t.unknown, p)
		case r.Role == RoleGeometry && t.geometry() != "":
			t.unknown = append(t.unknown, p+" (a second geometry file; name one in a recipe)")
		default:
			t.Inputs = append(t.Inputs, newInput(p, r, nil))
		}
	}
	sortInputs(t.Inputs)
	return t, nil
}

// TrajectoryFrom builds one trajectory from command-line arguments: a
// single folder, or the files themselves (each read by the reader that
// claims its extension; files with other extensions are read as tables).
func TrajectoryFrom(args []string, rc *Recipe) (*Trajectory, error) {
	if len(args) == 1 {
		if st, err := os.Stat(args[0]); err == nil && st.IsDir() {
			return trajectoryIn(args[0], args[0], rc)
		}
	}
	t := &Trajectory{Name: strings.TrimSuffix(filepath.Base(args[0]), filepath.Ext(args[0])), Dir: filepath.Dir(args[0])}
	for _, a := range args {
		st, err := os.Stat(a)
		if err != nil {
			return nil, err
		}
		if st.IsDir() {
			return nil, fmt.Errorf("%s is a folder; give one trajectory folder, or its files", a)
		}
		r := readerFor(extOf(a))
		if r == nil {
			r = fallbackReader()
		}
		if r.Role == RoleGeometry && t.geometry() != "" {
			return nil, fmt.Errorf("two geometry files (%s, %s); one trajectory has one", t.geometry(), a)
		}
		t.Inputs = append(t.Inputs, newInput(a, r, nil))
	}
	sortInputs(t.Inputs)
	return t, nil
}
