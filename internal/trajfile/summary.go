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
	if a, err := f.Attr(H5MDGroup, "version"); err == nil && len(a.Ints) == 2 {
		s.H5MD = fmt.Sprintf("%d.%d", a.Ints[0], a.Ints[1])
	}
	s.Creator = strings.TrimSpace(attrString(f, CreatorGroup, "name") + " " + attrString(f, CreatorGroup, "version"))
	s.Author = attrString(f, AuthorGroup, "name")
	if f.Kind(ModulesGroup) == h5.Group {
		mods, _ := f.Links(ModulesGroup)
		for _, m := range mods {
			if a, err := f.Attr(ModulesGroup+"/"+m, "version"); err == nil && len(a.Ints) == 2 {
				m = fmt.Sprintf("%s %d.%d", m, a.Ints[0], a.Ints[1])
			}
			s.Modules = append(s.Modules, m)
		}
	}
	if f.Kind(ParticlesGroup) == h5.Group {
		groups, _ := f.Links(ParticlesGroup)
		for _, g := range groups {
			s.Groups = append(s.Groups, group(f, ParticleGroup(g), g))
		}
	}
	if v, _, err := f.ReadInt64(NStates); err == nil && len(v) == 1 {
		s.States = int(v[0])
	}
	if k, _, err := f.ReadInt64(HopKind); err == nil {
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
			if i >= 0 && strings.Contains(p, "/"+Position+"/") {
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
				Unit: attrString(f, p, UnitAttr), Logical: info.LogicalBytes(), Stored: info.StorageBytes}
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
	if sp, _, err := f.ReadInt64(Particle(p, Species)); err == nil {
		g.Atoms = len(sp)
		zs := make([]int, len(sp))
		for i, z := range sp {
			zs[i] = int(z)
		}
		g.Formula = elements.Formula(zs)
	}
	info, err := f.Describe(Particle(p, Position) + Value)
	if err == nil && info.Shape.Rank == 3 {
		g.Frames = info.Shape.Dims[0]
		if g.Atoms == 0 {
			g.Atoms = info.Shape.Dims[1]
		}
	}
	if c, err := readClock(f, Particle(p, Position)); err == nil && len(c.Steps) > 0 {
		T := len(c.Steps)
		g.FirstStep, g.LastStep = c.Steps[0], c.Steps[T-1]
		g.TimeFirst, g.TimeLast = c.Times[0], c.Times[T-1]
		if T > 1 {
			g.Stride = c.Steps[1] - c.Steps[0]
		}
		g.TimeUnit = c.TimeUnit
	}
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
	a, err := f.Attr(ParametersGroup, name)
	if err != nil || len(a.Strings) != 1 {
		return "", fmt.Errorf("%s: no /parameters@%s", path, name)
	}
	return a.Strings[0], nil
}
