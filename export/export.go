// Package export writes trajectory files back to text (XYZ, extended
// XYZ, CSV), digit for digit at the precision recorded at conversion. It
// reads through trajfile.Reader only, so it knows the layout as every
// other reader does.
package export

import (
	"bufio"
	"fmt"
	"os"
	"path/filepath"
	"strconv"

	"trajvault/internal/outdir"
	"trajvault/internal/textnum"
	"trajvault/internal/trajfile"
)

// Export formats.
const (
	FormatXYZ    = "xyz"
	FormatExtXYZ = "extxyz"
	FormatCSV    = "csv"
)

// exportBlock is the number of frames read per HDF5 call.
const exportBlock = 4096

// column is one exported quantity, a time-dependent element read in
// blocks.
type column struct {
	name string
	el   *trajfile.Element
	buf  []float64
}

func (c *column) append(b []byte, v float64) []byte {
	switch {
	case trajfile.IntegerValued(c.el.Path):
		return strconv.AppendInt(b, int64(v), 10)
	case c.el.Exact:
		return c.el.Format.Append(b, v)
	}
	return strconv.AppendFloat(b, v, 'g', -1, 64) // shortest exact repr
}

func (c *column) read(r *trajfile.Reader, start, n int) (err error) {
	if c != nil {
		c.buf, err = r.Raw(c.el, start, n)
	}
	return err
}

// clockColumns are the step and time of every frame, times printed in the
// format recorded for them.
type clockColumns struct {
	c    *trajfile.Clock
	time textnum.Format
	ok   bool
}

func readClock(r *trajfile.Reader) (*clockColumns, error) {
	c, err := r.Clock(r.ClockElement())
	if err != nil {
		return nil, err
	}
	cc := &clockColumns{c: c}
	cc.time, cc.ok = r.TimeFormat(r.ClockElement())
	return cc, nil
}

func (cc *clockColumns) appendTime(b []byte, i int) []byte {
	if cc.ok {
		return cc.time.Append(b, cc.c.Times[i])
	}
	return strconv.AppendFloat(b, cc.c.Times[i], 'g', -1, 64)
}

// Export writes a trajectory file back to text in dir (which must not
// exist): traj.xyz or traj.extxyz for geometries, observables.csv for the
// per-frame observables. Numbers are printed in the precision recorded at
// conversion, digit for digit.
func Export(in, dir, format string) ([]string, error) { return ExportGroup(in, dir, format, "") }

// ExportGroup is Export of the particle group named group ("" the
// file's default group).
func ExportGroup(in, dir, format, group string) ([]string, error) {
	if format != FormatXYZ && format != FormatExtXYZ && format != FormatCSV {
		return nil, fmt.Errorf("export: unknown format %q (want xyz, extxyz or csv)", format)
	}
	if _, err := os.Stat(dir); err == nil {
		return nil, fmt.Errorf("export: %s already exists; trajvault never overwrites outputs", dir)
	}
	r, err := trajfile.OpenReaderWith(in, trajfile.ReadOptions{Group: group, ObservablesOnly: format == FormatCSV})
	if err != nil {
		return nil, err
	}
	defer r.Close()
	tmp, err := outdir.Temp(dir)
	if err != nil {
		return nil, err
	}
	var written []string
	switch format {
	case FormatCSV:
		err = exportCSV(r, filepath.Join(tmp, "observables.csv"))
		written = append(written, "observables.csv")
	default:
		name := "traj." + format
		err = exportXYZ(r, filepath.Join(tmp, name), format == FormatExtXYZ)
		written = append(written, name)
	}
	if err := publish(tmp, dir, err); err != nil {
		return nil, err
	}
	return written, nil
}

// load describes element el for export, or returns nil when absent.
func load(r *trajfile.Reader, name, el string) (*column, error) {
	e, err := r.Element(el)
	if e == nil || err != nil {
		return nil, err
	}
	return &column{name: name, el: e}, nil
}

func exportXYZ(r *trajfile.Reader, out string, extended bool) error {
	pos, err := load(r, "pos", r.Particle(trajfile.Position))
	if err != nil || pos == nil {
		return fmt.Errorf("export: %s: no positions", r.Path)
	}
	clock, err := readClock(r)
	if err != nil {
		return fmt.Errorf("export: %s: %w", r.Path, err)
	}
	var extra []*column
	if extended {
		for _, e := range [][2]string{{"velo", trajfile.Velocity}, {"forces", trajfile.Force}} {
			q, err := load(r, e[0], r.Particle(e[1]))
			if err != nil {
				return fmt.Errorf("export: %s: %w", r.Path, err)
			}
			if q != nil {
				extra = append(extra, q)
			}
		}
	}
	epot, err := load(r, "energy", trajfile.PotentialEnergy)
	if err != nil {
		return fmt.Errorf("export: %s: %w", r.Path, err)
	}
	fh, err := os.Create(out)
	if err != nil {
		return err
	}
	w := bufio.NewWriterSize(fh, 1<<20)
	n, T := r.N, r.T
	props := "species:S:1:pos:R:3"
	unitKeys := appendUnitKey(nil, "pos", pos.el.Unit)
	for _, q := range extra {
		props += ":" + q.name + ":R:3"
		unitKeys = appendUnitKey(unitKeys, q.name, q.el.Unit)
	}
	if epot != nil {
		unitKeys = appendUnitKey(unitKeys, "energy", epot.el.Unit)
	}
	unitKeys = appendUnitKey(unitKeys, "time", clock.c.TimeUnit)
	var b []byte
	for start := 0; start < T; start += exportBlock {
		cnt := min(exportBlock, T-start)
		for _, q := range append([]*column{pos, epot}, extra...) {
			if err := q.read(r, start, cnt); err != nil {
				fh.Close()
				return err
			}
		}
		for t := 0; t < cnt; t++ {
			b = strconv.AppendInt(b[:0], int64(n), 10)
			b = append(b, '\n')
			if extended {
				b = append(b, "Properties="...)
				b = append(b, props...)
				if epot != nil {
					b = append(b, " energy="...)
					b = epot.append(b, epot.buf[t])
				}
				b = append(b, ` pbc="F F F"`...)
				b = append(b, unitKeys...)
				b = append(b, ' ')
			}
			b = append(b, "step="...)
			b = strconv.AppendInt(b, clock.c.Steps[start+t], 10)
			b = append(b, " time="...)
			b = clock.appendTime(b, start+t)
			b = append(b, '\n')
			for i := 0; i < n; i++ {
				b = append(b, r.Symbol(i)...)
				for _, q := range append([]*column{pos}, extra...) {
					for k := 0; k < 3; k++ {
						b = append(b, ' ')
						b = q.append(b, q.buf[(t*n+i)*3+k])
					}
				}
				b = append(b, '\n')
			}
			w.Write(b)
		}
	}
	return closeOut(fh, w)
}

// appendUnitKey writes " KEY_unit=UNIT" (quoted when the unit has a
// space), the unit of the extended-XYZ property or key KEY as stored;
// nothing for a dimensionless quantity.
func appendUnitKey(b []byte, key, unit string) []byte {
	if unit == "" {
		return b
	}
	b = append(b, ' ')
	b = append(b, key...)
	b = append(b, "_unit="...)
	return appendKeyValue(b, unit)
}

// closeOut flushes and closes an output file, keeping the first error.
func closeOut(fh *os.File, w *bufio.Writer) error {
	err := w.Flush()
	if err2 := fh.Close(); err == nil {
		err = err2
	}
	return err
}

// csvColumns are the per-frame observables export writes, in order.
var csvColumns = [][2]string{
	{"kinetic_energy", trajfile.KineticEnergy},
	{"potential_energy", trajfile.PotentialEnergy},
	{"total_energy", trajfile.TotalEnergy},
	{"active_state", trajfile.ActiveState},
	{"state_energy", trajfile.StateEnergies},
	{"population", trajfile.Populations},
}

func exportCSV(r *trajfile.Reader, out string) error {
	clock, err := readClock(r)
	if err != nil {
		return fmt.Errorf("export: %s: %w", r.Path, err)
	}
	var cols []*column
	for _, e := range csvColumns {
		q, err := load(r, e[0], e[1])
		if err != nil {
			return fmt.Errorf("export: %s: %w", r.Path, err)
		}
		if q != nil {
			cols = append(cols, q)
		}
	}
	fh, err := os.Create(out)
	if err != nil {
		return err
	}
	w := bufio.NewWriterSize(fh, 1<<20)
	b := []byte("step,time")
	if clock.c.TimeUnit != "" {
		b = append(b, "["+clock.c.TimeUnit+"]"...)
	}
	for _, q := range cols {
		width := q.el.Width()
		for k := 0; k < width; k++ {
			b = append(b, ',')
			b = append(b, q.name...)
			if width > 1 {
				b = append(b, '_')
				b = strconv.AppendInt(b, int64(k), 10)
			}
			if q.el.Unit != "" {
				b = append(b, "["+q.el.Unit+"]"...)
			}
		}
	}
	b = append(b, '\n')
	w.Write(b)
	for start := 0; start < r.T; start += exportBlock {
		cnt := min(exportBlock, r.T-start)
		for _, q := range cols {
			if err := q.read(r, start, cnt); err != nil {
				fh.Close()
				return err
			}
		}
		for t := 0; t < cnt; t++ {
			b = strconv.AppendInt(b[:0], clock.c.Steps[start+t], 10)
			b = append(b, ',')
			b = clock.appendTime(b, start+t)
			for _, q := range cols {
				width := q.el.Width()
				for k := 0; k < width; k++ {
					b = append(b, ',')
					b = q.append(b, q.buf[t*width+k])
				}
			}
			b = append(b, '\n')
			w.Write(b)
		}
	}
	return closeOut(fh, w)
}

// publish renames the finished temporary folder tmp (ours) into place at
// dir, or removes it when writing failed (err) or the rename does.
func publish(tmp, dir string, err error) error {
	if err == nil {
		err = os.Rename(tmp, dir)
	}
	if err != nil {
		os.RemoveAll(tmp)
	}
	return err
}
