package trajfile

import (
	"fmt"
	"os"
	"sort"
	"strings"

	"trajvault/internal/elements"
	"trajvault/internal/h5"
)

// Summary is what `trajvault inspect` prints: a compact description of a
// trajectory file, read without loading its bulk data.
type Summary struct {
	File      string         `json:"file"`
	FileBytes int64          `json:"file_bytes"`
	H5MD      string         `json:"h5md_version"`
	Creator   string         `json:"creator"`
	Author    string         `json:"author"`
	Modules   []string       `json:"modules"`
	Groups    []GroupSummary `json:"particle_groups"`
	States    int            `json:"electronic_states"`
	Hops      *HopSummary    `json:"hops,omitempty"`
	Datasets  []DatasetInfo  `json:"datasets"`
	Logical   int64          `json:"logical_bytes"`
	Stored    int64          `json:"stored_bytes"`
	Ratio     float64        `json:"compression_ratio"`
}

// GroupSummary describes one particle group.
type GroupSummary struct {
	Name      string  `json:"name"`
	Atoms     int     `json:"atoms"`
	Formula   string  `json:"formula"`
	Frames    int     `json:"frames"`
	FirstStep int64   `json:"first_step"`
	LastStep  int64   `json:"last_step"`
	Stride    int64   `json:"frame_stride_steps"`
	TimeFirst float64 `json:"time_first"`
	TimeLast  float64 `json:"time_last"`
	TimeUnit  string  `json:"time_unit"`
	StepTime  float64 `json:"time_per_step"`
}

// HopSummary counts hop attempts.
type HopSummary struct {
	Accepted   int `json:"accepted"`
	Frustrated int `json:"frustrated"`
}

// DatasetInfo is one dataset line of the summary.
type DatasetInfo struct {
	Path    string   `json:"path"`
	Type    string   `json:"dtype"`
	Shape   []int    `json:"shape"`
	Unit    string   `json:"unit,omitempty"`
	Filters []string `json:"filters"`
	Logical int64    `json:"logical_bytes"`
	Stored  int64    `json:"stored_bytes"`
	Ratio   float64  `json:"compression_ratio"`
}

var filterNames = map[int]string{
	h5.FilterDeflate: "deflate", h5.FilterShuffle: "shuffle", h5.FilterFletcher32: "fletcher32",
	h5.FilterSzip: "szip", h5.FilterNBit: "nbit", h5.FilterScaleOffset: "scaleoffset",
}

func attrString(f *h5.File, path, name string) string {
	a, err := f.Attr(path, name)
	if err != nil || len(a.Strings) == 0 {
		return ""
	}
	return a.Strings[0]
}

// Summarize reads the structure of an HDF5 file in the trajvault layout
// (or any H5MD file) and returns its summary.
func Summarize(path string) (*Summary, error) {
	f, err := h5.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	s := &Summary{File: path, Modules: []string{}, Groups: []GroupSummary{}, Datasets: []DatasetInfo{}}
	if st, err := os.Stat(path); err == nil {
		s.FileBytes = st.Size()
	}
	if a, err := f.Attr("/h5md", "version"); err == nil && len(a.Ints) == 2 {
		s.H5MD = fmt.Sprintf("%d.%d", a.Ints[0], a.Ints[1])
	}
	s.Creator = strings.TrimSpace(attrString(f, "/h5md/creator", "name") + " " + attrString(f, "/h5md/creator", "version"))
	s.Author = attrString(f, "/h5md/author", "name")
	if f.Kind("/h5md/modules") == h5.Group {
		mods, _ := f.Links("/h5md/modules")
		for _, m := range mods {
			if a, err := f.Attr("/h5md/modules/"+m, "version"); err == nil && len(a.Ints) == 2 {
				m = fmt.Sprintf("%s %d.%d", m, a.Ints[0], a.Ints[1])
			}
			s.Modules = append(s.Modules, m)
		}
	}
	if f.Kind("/particles") == h5.Group {
		groups, _ := f.Links("/particles")
		for _, g := range groups {
			s.Groups = append(s.Groups, group(f, "/particles/"+g, g))
		}
	}
	if v, _, err := f.ReadInt64("/parameters/n_states"); err == nil && len(v) == 1 {
		s.States = int(v[0])
	}
	if k, _, err := f.ReadInt64("/observables/electronic/hops/kind"); err == nil {
		s.Hops = &HopSummary{}
		for _, x := range k {
			if x == 0 {
				s.Hops.Accepted++
			} else {
				s.Hops.Frustrated++
			}
		}
	}
	// An object reached through several hard links is listed once; shared
	// step/time datasets under position's name, where they belong.
	seen := map[h5.ObjectID]int{}
	var walk func(string)
	walk = func(p string) {
		id, _ := f.ObjectID(p)
		if i, ok := seen[id]; ok {
			if i >= 0 && strings.Contains(p, "/position/") {
				s.Datasets[i].Path = p
			}
			return
		}
		seen[id] = -1
		switch f.Kind(p) {
		case h5.Group:
			links, _ := f.Links(p)
			for _, l := range links {
				walk(strings.TrimSuffix(p, "/") + "/" + l)
			}
		case h5.Dataset:
			info, err := f.Info(p)
			if err != nil {
				return
			}
			d := DatasetInfo{Path: p, Type: info.Type.String(), Shape: info.Shape.Dims, Filters: []string{},
				Unit: attrString(f, p, "unit"), Logical: info.LogicalBytes(), Stored: info.StorageBytes}
			if d.Shape == nil {
				d.Shape = []int{}
			}
			for _, fl := range info.Filters {
				name := filterNames[fl.ID]
				if name == "" {
					name = fmt.Sprintf("filter-%d", fl.ID)
				}
				d.Filters = append(d.Filters, name)
			}
			if d.Stored > 0 {
				d.Ratio = float64(d.Logical) / float64(d.Stored)
			}
			s.Logical += d.Logical
			s.Stored += d.Stored
			seen[id] = len(s.Datasets)
			s.Datasets = append(s.Datasets, d)
		}
	}
	walk("/")
	sort.Slice(s.Datasets, func(i, j int) bool { return s.Datasets[i].Path < s.Datasets[j].Path })
	if s.Stored > 0 {
		s.Ratio = float64(s.Logical) / float64(s.Stored)
	}
	return s, nil
}

func group(f *h5.File, p, name string) GroupSummary {
	g := GroupSummary{Name: name}
	if sp, _, err := f.ReadInt64(p + "/species"); err == nil {
		g.Atoms = len(sp)
		zs := make([]int, len(sp))
		for i, z := range sp {
			zs[i] = int(z)
		}
		g.Formula = elements.Formula(zs)
	}
	info, err := f.Info(p + "/position/value")
	if err == nil && info.Shape.Rank == 3 {
		g.Frames = info.Shape.Dims[0]
		if g.Atoms == 0 {
			g.Atoms = info.Shape.Dims[1]
		}
	}
	steps, shape, err := f.ReadInt64(p + "/position/step")
	if err == nil && shape.Rank == 1 && len(steps) > 0 {
		g.FirstStep, g.LastStep = steps[0], steps[len(steps)-1]
		if len(steps) > 1 {
			g.Stride = steps[1] - steps[0]
		}
	} else if err == nil && shape.Rank == 0 && len(steps) == 1 {
		// H5MD fixed mode: offset + i increment.
		var off int64
		if a, err := f.Attr(p+"/position/step", "offset"); err == nil && len(a.Ints) == 1 {
			off = a.Ints[0]
		}
		g.Stride = steps[0]
		g.FirstStep, g.LastStep = off, off+steps[0]*int64(max(g.Frames-1, 0))
	}
	times, tshape, err := f.ReadFloat64(p + "/position/time")
	if err == nil && tshape.Rank == 1 && len(times) > 0 {
		g.TimeFirst, g.TimeLast = times[0], times[len(times)-1]
	} else if err == nil && tshape.Rank == 0 && len(times) == 1 {
		var off float64
		if a, err := f.Attr(p+"/position/time", "offset"); err == nil && len(a.Floats) == 1 {
			off = a.Floats[0]
		}
		g.TimeFirst, g.TimeLast = off, off+times[0]*float64(max(g.Frames-1, 0))
	}
	g.TimeUnit = attrString(f, p+"/position/time", "unit")
	if g.LastStep > g.FirstStep {
		g.StepTime = (g.TimeLast - g.TimeFirst) / float64(g.LastStep-g.FirstStep)
	}
	return g
}

// Parameter reads a string attribute of /parameters.
func Parameter(path, name string) (string, error) {
	f, err := h5.Open(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	a, err := f.Attr("/parameters", name)
	if err != nil || len(a.Strings) != 1 {
		return "", fmt.Errorf("%s: no /parameters@%s", path, name)
	}
	return a.Strings[0], nil
}
