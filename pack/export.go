package pack

import (
	"bufio"
	"fmt"
	"os"
	"path/filepath"
	"strconv"

	"trajvault/internal/elements"
	"trajvault/internal/h5"
	"trajvault/internal/textnum"
)

// Export formats.
const (
	FormatXYZ    = "xyz"
	FormatExtXYZ = "extxyz"
	FormatCSV    = "csv"
)

// exportBlock is the number of frames read per HDF5 call.
const exportBlock = 4096

// quantityData is one element read back for export.
type quantityData struct {
	name   string
	path   string
	shape  h5.Shape
	format textnum.Format
	exact  bool // a recorded printed format exists
	unit   string
	buf    []float64
}

func readFormat(f *h5.File, path string) (textnum.Format, bool) {
	a, err := f.Attr(path, "trajvault_format")
	if err != nil || len(a.Strings) != 1 {
		return textnum.Format{}, false
	}
	fm, err := textnum.ParseFormat(a.Strings[0])
	return fm, err == nil
}

func appendNum(b []byte, q *quantityData, v float64) []byte {
	if q.exact {
		return q.format.Append(b, v)
	}
	return strconv.AppendFloat(b, v, 'g', -1, 64) // shortest exact repr
}

// Export writes a trajectory file back to text in dir (which must not
// exist): traj.xyz or traj.extxyz for geometries, observables.csv for the
// per-frame observables. Numbers are printed in the precision recorded at
// conversion, digit for digit.
func Export(in, dir, format string) ([]string, error) {
	if format != FormatXYZ && format != FormatExtXYZ && format != FormatCSV {
		return nil, fmt.Errorf("export: unknown format %q (want xyz, extxyz or csv)", format)
	}
	if _, err := os.Stat(dir); err == nil {
		return nil, fmt.Errorf("export: %s already exists; trajvault never overwrites outputs", dir)
	}
	f, err := h5.Open(in)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	tmp := dir + ".partial"
	os.RemoveAll(tmp)
	if err := os.MkdirAll(tmp, 0o755); err != nil {
		return nil, err
	}
	var written []string
	switch format {
	case FormatCSV:
		err = exportCSV(f, filepath.Join(tmp, "observables.csv"))
		written = append(written, "observables.csv")
	default:
		name := "traj." + format
		err = exportXYZ(f, filepath.Join(tmp, name), format == FormatExtXYZ)
		written = append(written, name)
	}
	if err != nil {
		os.RemoveAll(tmp)
		return nil, err
	}
	if err := os.Rename(tmp, dir); err != nil {
		os.RemoveAll(tmp)
		return nil, err
	}
	return written, nil
}

func load(f *h5.File, name, path string) (*quantityData, error) {
	if f.Kind(path) != h5.Dataset {
		return nil, nil
	}
	info, err := f.Info(path)
	if err != nil {
		return nil, err
	}
	q := &quantityData{name: name, path: path, shape: info.Shape}
	q.format, q.exact = readFormat(f, path)
	if a, err := f.Attr(path, "unit"); err == nil && len(a.Strings) == 1 {
		q.unit = a.Strings[0]
	}
	return q, nil
}

func (q *quantityData) rows(f *h5.File, start, n int) error {
	if q == nil {
		return nil
	}
	if q.shape.Rank == 0 {
		// H5MD fixed mode: value i = offset + i increment.
		inc, _, err := f.ReadFloat64(q.path)
		if err != nil || len(inc) != 1 {
			return fmt.Errorf("export: %s: cannot read the fixed-mode increment", q.path)
		}
		off := 0.0
		if a, err := f.Attr(q.path, "offset"); err == nil {
			if len(a.Floats) == 1 {
				off = a.Floats[0]
			} else if len(a.Ints) == 1 {
				off = float64(a.Ints[0])
			}
		}
		q.buf = q.buf[:0]
		for i := start; i < start+n; i++ {
			q.buf = append(q.buf, off+float64(i)*inc[0])
		}
		return nil
	}
	var err error
	q.buf, err = f.ReadRows(q.path, q.shape, start, n)
	return err
}

func exportXYZ(f *h5.File, out string, extended bool) error {
	const g = "/particles/all"
	sp, _, err := f.ReadInt64(g + "/species")
	if err != nil {
		return fmt.Errorf("export: %s: no species: %v", f.Name(), err)
	}
	pos, err := load(f, "pos", g+"/position/value")
	if err != nil || pos == nil {
		return fmt.Errorf("export: %s: no positions", f.Name())
	}
	step, _ := load(f, "step", g+"/position/step")
	tm, _ := load(f, "time", g+"/position/time")
	var extra []*quantityData
	if extended {
		for _, e := range [][2]string{{"velo", g + "/velocity/value"}, {"forces", g + "/force/value"}} {
			if q, err := load(f, e[0], e[1]); err == nil && q != nil {
				extra = append(extra, q)
			}
		}
	}
	epot, _ := load(f, "energy", "/observables/potential_energy/value")
	fh, err := os.Create(out)
	if err != nil {
		return err
	}
	w := bufio.NewWriterSize(fh, 1<<20)
	n := len(sp)
	T := pos.shape.Dims[0]
	props := "species:S:1:pos:R:3"
	for _, q := range extra {
		props += ":" + q.name + ":R:3"
	}
	var b []byte
	for start := 0; start < T; start += exportBlock {
		cnt := min(exportBlock, T-start)
		for _, q := range append([]*quantityData{pos, step, tm, epot}, extra...) {
			if err := q.rows(f, start, cnt); err != nil {
				fh.Close()
				return err
			}
		}
		for t := 0; t < cnt; t++ {
			b = b[:0]
			b = strconv.AppendInt(b, int64(n), 10)
			b = append(b, '\n')
			if extended {
				b = append(b, "Properties="...)
				b = append(b, props...)
				if epot != nil {
					b = append(b, " energy="...)
					b = appendNum(b, epot, epot.buf[t])
				}
				b = append(b, ` pbc="F F F"`...)
				b = append(b, ' ')
			}
			if step != nil {
				b = append(b, "step="...)
				b = strconv.AppendInt(b, int64(step.buf[t]), 10)
			}
			if tm != nil {
				b = append(b, " time="...)
				b = appendNum(b, tm, tm.buf[t])
			}
			b = append(b, '\n')
			for i := 0; i < n; i++ {
				b = append(b, elements.Symbol(int(sp[i]))...)
				for _, q := range append([]*quantityData{pos}, extra...) {
					for k := 0; k < 3; k++ {
						b = append(b, ' ')
						b = appendNum(b, q, q.buf[(t*n+i)*3+k])
					}
				}
				b = append(b, '\n')
			}
			w.Write(b)
		}
	}
	if err := w.Flush(); err != nil {
		fh.Close()
		return err
	}
	return fh.Close()
}

func exportCSV(f *h5.File, out string) error {
	const g = "/particles/all"
	var cols []*quantityData
	step, _ := load(f, "step", g+"/position/step")
	tm, _ := load(f, "time", g+"/position/time")
	if step == nil || tm == nil {
		return fmt.Errorf("export: %s: no step/time for position", f.Name())
	}
	cols = append(cols, step, tm)
	for _, e := range [][2]string{
		{"kinetic_energy", "/observables/kinetic_energy/value"},
		{"potential_energy", "/observables/potential_energy/value"},
		{"total_energy", "/observables/total_energy/value"},
		{"active_state", "/observables/electronic/active_state/value"},
		{"state_energy", "/observables/electronic/state_energies/value"},
		{"population", "/observables/electronic/populations/value"},
	} {
		if q, err := load(f, e[0], e[1]); err == nil && q != nil {
			cols = append(cols, q)
		}
	}
	fh, err := os.Create(out)
	if err != nil {
		return err
	}
	w := bufio.NewWriterSize(fh, 1<<20)
	var b []byte
	for i, q := range cols {
		width := q.width()
		for k := 0; k < width; k++ {
			if i > 0 || k > 0 {
				b = append(b, ',')
			}
			b = append(b, q.name...)
			if width > 1 {
				b = append(b, '_')
				b = strconv.AppendInt(b, int64(k), 10)
			}
			if q.unit != "" {
				b = append(b, '[')
				b = append(b, q.unit...)
				b = append(b, ']')
			}
		}
	}
	b = append(b, '\n')
	w.Write(b)
	T := tm.frames(f, g)
	for start := 0; start < T; start += exportBlock {
		cnt := min(exportBlock, T-start)
		for _, q := range cols {
			if err := q.rows(f, start, cnt); err != nil {
				fh.Close()
				return err
			}
		}
		for t := 0; t < cnt; t++ {
			b = b[:0]
			for i, q := range cols {
				width := q.width()
				for k := 0; k < width; k++ {
					if i > 0 || k > 0 {
						b = append(b, ',')
					}
					v := q.buf[t*width+k]
					if q.name == "step" || q.name == "active_state" {
						b = strconv.AppendInt(b, int64(v), 10)
					} else {
						b = appendNum(b, q, v)
					}
				}
			}
			b = append(b, '\n')
			w.Write(b)
		}
	}
	if err := w.Flush(); err != nil {
		fh.Close()
		return err
	}
	return fh.Close()
}

// width is the number of values per frame.
func (q *quantityData) width() int {
	if q.shape.Rank == 0 {
		return 1
	}
	return q.shape.Len() / max(q.shape.Dims[0], 1)
}

// frames is the number of frames, from the position values.
func (q *quantityData) frames(f *h5.File, g string) int {
	info, err := f.Info(g + "/position/value")
	if err != nil || info.Shape.Rank == 0 {
		return 0
	}
	return info.Shape.Dims[0]
}
