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
	Name     string   `json:"name"`
	Dir      string   `json:"dir"`
	Geometry string   `json:"geometry,omitempty"`
	Tables   []string `json:"tables,omitempty"`
	Logs     []string `json:"logs,omitempty"`
	// tableSpec and logSpec are the recipe entries of Tables and Logs.
	tableSpec []*TableSpec
	logSpec   []*LogSpec
	missing   []string
	unknown   []string
}

var (
	geometryExt = map[string]bool{".xyz": true, ".extxyz": true}
	tableExt    = map[string]bool{".dat": true, ".csv": true, ".tsv": true, ".txt": true, ".tab": true, ".ene": true}
)

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
		t, err := trajectoryIn(d, rc)
		if err != nil {
			return nil, err
		}
		if t.Geometry == "" && len(t.Tables) == 0 && len(t.Logs) == 0 && rc == nil {
			continue // not a trajectory folder
		}
		out = append(out, t)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("%s: no trajectories found (no .xyz files or tables); give a recipe with --recipe to describe the layout", dir)
	}
	return out, nil
}

func trajectoryIn(d string, rc *Recipe) (*Trajectory, error) {
	t := &Trajectory{Name: filepath.Base(d), Dir: d}
	if rc != nil && (rc.Geometry != nil || len(rc.Tables) > 0 || len(rc.Logs) > 0) {
		one := func(pattern string) string {
			m, _ := filepath.Glob(filepath.Join(d, pattern))
			sort.Strings(m)
			if len(m) == 0 {
				t.missing = append(t.missing, pattern)
				return ""
			}
			return m[len(m)-1]
		}
		if rc.Geometry != nil {
			t.Geometry = one(rc.Geometry.File)
		}
		for i := range rc.Tables {
			if p := one(rc.Tables[i].File); p != "" {
				t.Tables = append(t.Tables, p)
				t.tableSpec = append(t.tableSpec, &rc.Tables[i])
			}
		}
		for i := range rc.Logs {
			if p := one(rc.Logs[i].File); p != "" {
				t.Logs = append(t.Logs, p)
				t.logSpec = append(t.logSpec, &rc.Logs[i])
			}
		}
		return t, nil
	}
	entries, err := os.ReadDir(d)
	if err != nil {
		return nil, err
	}
	for _, e := range entries {
		if e.IsDir() || strings.HasPrefix(e.Name(), ".") {
			continue
		}
		p := filepath.Join(d, e.Name())
		ext := strings.ToLower(filepath.Ext(e.Name()))
		switch {
		case geometryExt[ext]:
			if t.Geometry != "" {
				t.unknown = append(t.unknown, p+" (a second geometry file; name one in a recipe)")
				continue
			}
			t.Geometry = p
		case tableExt[ext]:
			t.Tables = append(t.Tables, p)
			t.tableSpec = append(t.tableSpec, nil)
		default:
			t.unknown = append(t.unknown, p)
		}
	}
	return t, nil
}

// TrajectoryFrom builds one trajectory from command-line arguments: a
// single folder, or the files themselves (geometry by extension .xyz or
// .extxyz, the others read as tables).
func TrajectoryFrom(args []string, rc *Recipe) (*Trajectory, error) {
	if len(args) == 1 {
		if st, err := os.Stat(args[0]); err == nil && st.IsDir() {
			return trajectoryIn(args[0], rc)
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
		if geometryExt[strings.ToLower(filepath.Ext(a))] {
			if t.Geometry != "" {
				return nil, fmt.Errorf("two geometry files (%s, %s); one trajectory has one", t.Geometry, a)
			}
			t.Geometry = a
			continue
		}
		t.Tables = append(t.Tables, a)
		t.tableSpec = append(t.tableSpec, nil)
	}
	return t, nil
}
