package trajfile

import (
	"fmt"

	"trajvault/internal/h5"
)

// What files of other writers hold beyond the layout: the repacking
// reader (ingest's H5MD input) asks through these, never by path.

// Static reads the time-independent element el of the particle group
// (e.g. Mass) as stored, with its unit ("" when it has none).
func (r *Reader) Static(el string) ([]float64, string, error) {
	p := r.Particle(el)
	if r.f.Kind(p) != h5.Dataset {
		return nil, "", fmt.Errorf("%s: not a dataset", p)
	}
	v, _, err := r.f.ReadFloat64(p)
	if err != nil {
		return nil, "", err
	}
	unit := ""
	if a, err := r.f.Attr(p, UnitAttr); err == nil && len(a.Strings) == 1 {
		unit = a.Strings[0]
	}
	return v, unit, nil
}

// Members lists the names of the objects directly in the group at path
// (e.g. ObservablesGroup, r.Group), in name order; none when it is not a
// group.
func (r *Reader) Members(path string) []string {
	if r.f.Kind(path) != h5.Group {
		return nil
	}
	names, _ := r.f.Links(path)
	return names
}

// IsElement reports whether path is a time-dependent element (a group
// holding value).
func (r *Reader) IsElement(path string) bool { return r.f.Kind(path+Value) == h5.Dataset }
