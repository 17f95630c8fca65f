package export

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path"
	"path/filepath"
	"strconv"
	"strings"

	"trajvault/internal/outdir"
	"trajvault/internal/trajfile"
)

// Formats a selection can be written in, besides xyz, extxyz and csv.
const (
	FormatJSON = "json"
	FormatNPY  = "npy"
)

// Formats lists every export format.
var Formats = []string{FormatCSV, FormatXYZ, FormatExtXYZ, FormatJSON, FormatNPY}

// batchFrames is the number of selected frames read per pass, bounding
// memory however long the selection is.
const batchFrames = 4096

// Options describe one export of a selection.
type Options struct {
	Format string
	Sel    Selection
	// Restart writes one whole frame (Sel.Frames names it) with every
	// quantity stored for it: positions, velocities, forces, energies,
	// active state, populations, amplitudes and couplings.
	Restart bool
	// Convention is ConventionStored (also "") or ConventionASE (extended
	// XYZ only).
	Convention string
}

// defaults are the quantities a format writes when the selection names
// none.
func defaults(format string, restart bool, sel Selection) []string {
	switch {
	case format == FormatCSV && sel.Atoms != "":
		// Atoms were chosen: their positions are what was asked for.
		return []string{"position", "kinetic_energy", "potential_energy", "total_energy", "active_state", "state_energies", "populations"}
	case restart:
		return []string{"position", "velocity", "force", "kinetic_energy", "potential_energy", "total_energy",
			"active_state", "state_energies", "populations", "amplitudes", "couplings"}
	case format == FormatXYZ:
		return []string{"position"}
	case format == FormatExtXYZ:
		return []string{"position", "velocity", "force", "potential_energy"}
	case format == FormatCSV:
		return []string{"kinetic_energy", "potential_energy", "total_energy", "active_state", "state_energies", "populations"}
	}
	return QuantityNames()
}

func checkFormat(format string) error {
	for _, f := range Formats {
		if f == format {
			return nil
		}
	}
	return &SelectionError{"--format", format, "unknown format; want " + strings.Join(Formats, ", ")}
}

// ExportSelection writes the selection of file in to dir (which must not
// exist) in o.Format, with selection.json saying what was selected. It
// reads only the chunks that hold the selected frames. Numbers keep the
// precision recorded at conversion. Errors that are the user's selection
// wrap ErrSelection.
func ExportSelection(in, dir string, o Options) ([]string, error) {
	if err := checkFormat(o.Format); err != nil {
		return nil, err
	}
	ase := o.Convention == ConventionASE
	switch {
	case o.Convention != "" && o.Convention != ConventionStored && !ase:
		return nil, &SelectionError{"--convention", o.Convention, "unknown convention; want " + strings.Join(Conventions, " or ")}
	case ase && o.Format != FormatExtXYZ:
		return nil, &SelectionError{"--convention", o.Convention, "the ase convention is a way of writing extended XYZ; add --format extxyz"}
	}
	if _, err := os.Stat(dir); err == nil {
		return nil, fmt.Errorf("export: %s already exists; trajvault never overwrites outputs", dir)
	}
	r, err := trajfile.OpenWindowReaderWith(in, trajfile.ReadOptions{Group: o.Sel.Group})
	if err != nil {
		return nil, err
	}
	defer r.Close()
	p, err := resolve(r, o.Sel, defaults(o.Format, o.Restart, o.Sel))
	if err != nil {
		return nil, err
	}
	if p.wantH && (o.Format == FormatXYZ || o.Format == FormatExtXYZ) {
		return nil, &SelectionError{"--quantities", "hops", "hops are an event table; write them with --format csv, json or npy"}
	}
	if (o.Format == FormatXYZ || o.Format == FormatExtXYZ) && !p.has("position") {
		return nil, &SelectionError{"--quantities", strings.Join(o.Sel.Quantities, ","), "XYZ needs position; add it or use --format csv, json or npy"}
	}
	tmp, err := outdir.Temp(dir)
	if err != nil {
		return nil, err
	}
	var written []string
	create := func(name string, fill func(w *bufio.Writer) error) {
		if err != nil {
			return
		}
		written = append(written, name)
		fh, e := os.Create(filepath.Join(tmp, name))
		if e != nil {
			err = e
			return
		}
		w := bufio.NewWriterSize(fh, 1<<20)
		if err = fill(w); err != nil {
			fh.Close()
			return
		}
		err = closeOut(fh, w)
	}
	create("selection.json", func(w *bufio.Writer) error {
		h := p.header()
		if ase {
			h.Convention = ConventionASE
			h.Description += "; " + aseNote
		}
		b, e := json.MarshalIndent(h, "", "  ")
		w.Write(append(b, '\n'))
		return e
	})
	switch o.Format {
	case FormatXYZ, FormatExtXYZ:
		create("traj."+o.Format, func(w *bufio.Writer) error {
			if ase {
				return p.writeASE(w)
			}
			return p.writeXYZ(w, o.Format == FormatExtXYZ)
		})
	case FormatCSV:
		if len(p.qs) > 0 {
			create("values.csv", func(w *bufio.Writer) error { return p.writeCSV(w, true) })
		}
		if p.wantH {
			create("hops.csv", func(w *bufio.Writer) error { p.writeHopsCSV(w); return nil })
		}
	case FormatJSON:
		create("values.json", p.writeJSON)
	case FormatNPY:
		err = p.writeNPY(tmp, &written)
	}
	if err := publish(tmp, dir, err); err != nil {
		return nil, err
	}
	return written, nil
}

// Values is a selection resolved against an open file, ready to be
// printed: every usage error (a selection outside the data) has been
// found by OpenValues, before anything is written.
type Values struct {
	r *trajfile.Reader
	p *plan
}

// OpenValues opens file in and resolves sel against it. Close the
// result.
func OpenValues(in string, sel Selection) (*Values, error) {
	r, err := trajfile.OpenWindowReaderWith(in, trajfile.ReadOptions{Group: sel.Group})
	if err != nil {
		return nil, err
	}
	p, err := resolve(r, sel, defaults(FormatJSON, false, sel))
	if err != nil {
		r.Close()
		return nil, err
	}
	return &Values{r: r, p: p}, nil
}

// Close releases the file.
func (v *Values) Close() error { return v.r.Close() }

// WriteCSV prints the values as CSV, after a comment line saying what
// was selected, with the hops as a second table.
func (v *Values) WriteCSV(w io.Writer) error {
	p := v.p
	bw := bufio.NewWriterSize(w, 1<<16)
	var err error
	if len(p.qs) > 0 {
		err = p.writeCSV(bw, true)
	} else {
		bw.WriteString("# " + p.describe() + "\n")
	}
	if err == nil && p.wantH {
		if len(p.qs) > 0 {
			bw.WriteString("\n")
		}
		p.writeHopsCSV(bw)
	}
	if err2 := bw.Flush(); err == nil {
		err = err2
	}
	return err
}

// WriteJSON prints the values as one JSON object: "selection" (Header),
// "frame", "step" and "time" of the selected frames, "values" by
// quantity name ([frame][...] nested arrays) and "hops" when selected.
// Numbers keep their recorded digits. The object ends with a newline.
func (v *Values) WriteJSON(w io.Writer) error {
	bw := bufio.NewWriterSize(w, 1<<16)
	err := v.p.writeJSON(bw)
	if err2 := bw.Flush(); err == nil {
		err = err2
	}
	return err
}

// WriteValues prints the selection of file in to w as CSV (with a
// comment line saying what was selected, and hops as a second table) or
// JSON (Values.WriteJSON).
func WriteValues(w io.Writer, in string, sel Selection, format string) error {
	if format != FormatCSV && format != FormatJSON {
		return &SelectionError{"--format", format, "values print as csv or json"}
	}
	v, err := OpenValues(in, sel)
	if err != nil {
		return err
	}
	defer v.Close()
	if format == FormatJSON {
		return v.WriteJSON(w)
	}
	return v.WriteCSV(w)
}

func (p *plan) has(name string) bool {
	for _, q := range p.qs {
		if q.def.name == name {
			return true
		}
	}
	return false
}

func (p *plan) get(name string) *quantity {
	for _, q := range p.qs {
		if q.def.name == name {
			return q
		}
	}
	return nil
}

// atomList is the selected atoms (every atom when none was named).
func (p *plan) atomList() []int {
	if p.atoms != nil {
		return p.atoms
	}
	return seq(p.r.N)
}

func (p *plan) stateList() []int {
	if p.states != nil {
		return p.states
	}
	return seq(p.r.States)
}

// framesSpec is the frame selection as given, or "all".
func (p *plan) framesSpec() string {
	switch {
	case p.sel.Time != "":
		return "time " + p.sel.Time
	case p.sel.Frames != "":
		return p.sel.Frames
	}
	return "all"
}

// describe is the one-line statement of what was selected.
func (p *plan) describe() string {
	var names []string
	for _, q := range p.qs {
		names = append(names, q.def.name)
	}
	if p.wantH {
		names = append(names, "hops")
	}
	syms := make([]string, 0, len(p.atomList()))
	for _, a := range p.atomList() {
		syms = append(syms, p.r.Symbol(a))
	}
	file := filepath.Base(p.r.Path)
	if len(p.r.Groups()) > 1 {
		file += " [" + path.Base(p.r.Group) + "]" // which particle group
	}
	s := fmt.Sprintf("selection of %s: frames %s (%d of %d); atoms %s (%s) of %d",
		file, p.framesSpec(), len(p.frames), p.r.T, rangeText(p.atomList()), abbreviate(syms, 12), p.r.N)
	if p.r.States > 0 {
		s += fmt.Sprintf("; states %s of %d", rangeText(p.stateList()), p.r.States)
	}
	return s + "; quantities " + strings.Join(names, ", ") + "; indices from 0"
}

// rangeText writes increasing indices compactly: "0-2,7".
func rangeText(idx []int) string {
	var parts []string
	for i := 0; i < len(idx); {
		j := i
		for j+1 < len(idx) && idx[j+1] == idx[j]+1 {
			j++
		}
		if j > i {
			parts = append(parts, fmt.Sprintf("%d-%d", idx[i], idx[j]))
		} else {
			parts = append(parts, strconv.Itoa(idx[i]))
		}
		i = j + 1
	}
	if len(parts) == 0 {
		return "none"
	}
	return strings.Join(parts, ",")
}

// Header is the machine-readable statement of a selection (selection.json
// and the "selection" member of JSON output).
type Header struct {
	File         string           `json:"file"`
	Group        string           `json:"particle_group"`
	Description  string           `json:"description"`
	Frames       string           `json:"frames"`
	FrameCount   int              `json:"frame_count"`
	FramesInFile int              `json:"frames_in_file"`
	FirstFrame   int              `json:"first_frame"`
	LastFrame    int              `json:"last_frame"`
	TimeUnit     string           `json:"time_unit,omitempty"`
	Atoms        []int            `json:"atoms"`
	Species      []string         `json:"species"`
	AtomsInFile  int              `json:"atoms_in_file"`
	States       []int            `json:"states"`
	StatesInFile int              `json:"states_in_file"`
	Quantities   []QuantityHeader `json:"quantities"`
	Hops         *int             `json:"hops,omitempty"`
	// Convention is "ase" when the numbers were converted to the ASE
	// convention (ConventionASE); Quantities then give the stored units.
	Convention string `json:"convention,omitempty"`
}

// QuantityHeader describes one selected quantity.
type QuantityHeader struct {
	Name   string `json:"name"`
	Path   string `json:"path"`
	Unit   string `json:"unit,omitempty"`
	Format string `json:"format,omitempty"` // recorded printed format
	Shape  []int  `json:"shape"`            // of the selected values
}

func (p *plan) header() Header {
	h := Header{
		File: filepath.Base(p.r.Path), Group: path.Base(p.r.Group), Description: p.describe(), Frames: p.framesSpec(),
		FrameCount: len(p.frames), FramesInFile: p.r.T,
		FirstFrame: p.frames[0], LastFrame: p.frames[len(p.frames)-1],
		TimeUnit: p.clock.c.TimeUnit, Atoms: p.atomList(), AtomsInFile: p.r.N,
		States: p.stateList(), StatesInFile: p.r.States, Quantities: []QuantityHeader{},
	}
	for _, a := range h.Atoms {
		h.Species = append(h.Species, p.r.Symbol(a))
	}
	for _, q := range p.qs {
		qh := QuantityHeader{Name: q.def.name, Path: q.el.Path + trajfile.Value, Unit: q.el.Unit,
			Shape: append([]int{len(p.frames)}, q.dims...)}
		if q.el.Exact {
			qh.Format = q.el.Format.String()
		}
		h.Quantities = append(h.Quantities, qh)
	}
	if p.wantH {
		n := len(p.hops)
		h.Hops = &n
	}
	return h
}

// each calls fn for every batch of selected frames with the values of
// every selected quantity (frame-major, as Window returns them); off is
// the index in p.frames (and p.clock) of the batch's first frame.
func (p *plan) each(qs []*quantity, fn func(off int, frames []int, vals [][]float64) error) error {
	vals := make([][]float64, len(qs))
	for b := 0; b < len(p.frames); b += batchFrames {
		fr := p.frames[b:min(b+batchFrames, len(p.frames))]
		for i, q := range qs {
			var err error
			if vals[i], err = p.r.Window(q.el, fr, q.keep); err != nil {
				return fmt.Errorf("%s: %w", p.r.Path, err)
			}
		}
		if err := fn(b, fr, vals); err != nil {
			return err
		}
	}
	return nil
}

// writeCSV writes one row per selected frame: frame, step, time and every
// selected value, after a comment line saying what was selected.
func (p *plan) writeCSV(w *bufio.Writer, comment bool) error {
	if comment {
		w.WriteString("# " + p.describe() + "\n")
	}
	b := []byte("frame,step,time")
	if u := p.clock.c.TimeUnit; u != "" {
		b = append(b, "["+u+"]"...)
	}
	for _, q := range p.qs {
		for _, l := range q.labels {
			b = append(b, ',')
			b = append(b, q.def.name...)
			if l != "" {
				b = append(b, '_')
				b = append(b, l...)
			}
			if q.el.Unit != "" {
				b = append(b, "["+q.el.Unit+"]"...)
			}
		}
	}
	w.Write(append(b, '\n'))
	return p.each(p.qs, func(off int, frames []int, vals [][]float64) error {
		for t, f := range frames {
			b = strconv.AppendInt(b[:0], int64(f), 10)
			b = append(b, ',')
			b = strconv.AppendInt(b, p.clock.c.Steps[off+t], 10)
			b = append(b, ',')
			b = p.clock.appendTime(b, off+t)
			for i, q := range p.qs {
				wd := q.width()
				for _, v := range vals[i][t*wd : (t+1)*wd] {
					b = append(b, ',')
					b = q.append(b, v)
				}
			}
			w.Write(append(b, '\n'))
		}
		return nil
	})
}

func (p *plan) writeHopsCSV(w *bufio.Writer) {
	fmt.Fprintf(w, "# hops between frames %d and %d (steps %d..%d), states %s: %d\n",
		p.frames[0], p.frames[len(p.frames)-1], p.clock.c.Steps[0], p.clock.c.Steps[len(p.frames)-1], rangeText(p.stateList()), len(p.hops))
	w.WriteString("step,from_state,to_state,kind\n")
	for _, h := range p.hops {
		fmt.Fprintf(w, "%d,%d,%d,%s\n", h.Step, h.From, h.To, hopKind(h))
	}
}

func hopKind(h trajfile.Hop) string {
	if h.Frustrated {
		return "frustrated"
	}
	return "accepted"
}

// xyzNames are the extended XYZ property names of the per-atom
// quantities (common practice in extended XYZ files).
var xyzNames = map[string]string{"position": "pos", "velocity": "velo", "force": "forces"}

// xyzKey is the comment-line key of a per-frame quantity: the potential
// energy is energy=, the key extended XYZ readers take as the energy
// (common practice); the rest keep their names.
func xyzKey(name string) string {
	if name == "potential_energy" {
		return "energy"
	}
	return name
}

// writeXYZ writes the selected frames and atoms as (extended) XYZ. The
// comment line carries step, time and the frame index; extended XYZ adds
// the selected per-frame quantities as key=value pairs (arrays quoted).
func (p *plan) writeXYZ(w *bufio.Writer, extended bool) error {
	atoms := p.atomList()
	var perAtomQ, frameQ []*quantity
	perAtomQ = append(perAtomQ, p.get("position"))
	for _, q := range p.qs {
		switch {
		case q.def.name == "position":
		case q.def.kind == perAtom:
			if extended {
				perAtomQ = append(perAtomQ, q)
			}
		case extended:
			frameQ = append(frameQ, q)
		}
	}
	props := "species:S:1"
	var unitKeys []byte
	for _, q := range perAtomQ {
		props += ":" + xyzNames[q.def.name] + ":R:3"
		unitKeys = appendUnitKey(unitKeys, xyzNames[q.def.name], q.el.Unit)
	}
	for _, q := range frameQ {
		unitKeys = appendUnitKey(unitKeys, xyzKey(q.def.name), q.el.Unit)
	}
	unitKeys = appendUnitKey(unitKeys, "time", p.clock.c.TimeUnit)
	all := append(append([]*quantity{}, perAtomQ...), frameQ...)
	var b []byte
	return p.each(all, func(off int, frames []int, vals [][]float64) error {
		for t, f := range frames {
			b = strconv.AppendInt(b[:0], int64(len(atoms)), 10)
			b = append(b, '\n')
			if extended {
				b = append(b, "Properties="...)
				b = append(b, props...)
				for i, q := range frameQ {
					wd := q.width()
					b = append(b, ' ')
					b = append(b, xyzKey(q.def.name)...)
					b = append(b, '=')
					if wd > 1 {
						b = append(b, '"')
					}
					for k, v := range vals[len(perAtomQ)+i][t*wd : (t+1)*wd] {
						if k > 0 {
							b = append(b, ' ')
						}
						b = q.append(b, v)
					}
					if wd > 1 {
						b = append(b, '"')
					}
				}
				b = append(b, ` pbc="F F F"`...)
				b = append(b, unitKeys...)
				b = append(b, ' ')
			}
			b = append(b, "step="...)
			b = strconv.AppendInt(b, p.clock.c.Steps[off+t], 10)
			b = append(b, " time="...)
			b = p.clock.appendTime(b, off+t)
			b = append(b, " frame="...)
			b = strconv.AppendInt(b, int64(f), 10)
			b = append(b, '\n')
			for ai, a := range atoms {
				b = append(b, p.r.Symbol(a)...)
				for i, q := range perAtomQ {
					wd := q.width() / len(atoms)
					base := t*q.width() + ai*wd
					for _, v := range vals[i][base : base+wd] {
						b = append(b, ' ')
						b = q.append(b, v)
					}
				}
				b = append(b, '\n')
			}
			w.Write(b)
		}
		return nil
	})
}

// writeJSON writes one JSON object: the selection header, the frames'
// indices, steps and times, every selected quantity as nested arrays
// [frame][...] and the selected hops. Numbers keep their recorded digits.
func (p *plan) writeJSON(w *bufio.Writer) error {
	hb, err := json.Marshal(p.header())
	if err != nil {
		return err
	}
	w.WriteString(`{"selection":`)
	w.Write(hb)
	var b []byte
	// list writes one value per selected frame; f gets the frame's index
	// in p.frames.
	list := func(key string, f func(b []byte, i int) []byte) {
		w.WriteString(",\n\"" + key + "\":[")
		for i := range p.frames {
			b = b[:0]
			if i > 0 {
				b = append(b, ',')
			}
			w.Write(f(b, i))
		}
		w.WriteString("]")
	}
	list("frame", func(b []byte, i int) []byte { return strconv.AppendInt(b, int64(p.frames[i]), 10) })
	list("step", func(b []byte, i int) []byte { return strconv.AppendInt(b, p.clock.c.Steps[i], 10) })
	list("time", func(b []byte, i int) []byte {
		if p.clock.ok && p.clock.time.Exp {
			tf := p.clock.time
			tf.ExpChar = 'e'
			return tf.Append(b, p.clock.c.Times[i])
		}
		return p.clock.appendTime(b, i)
	})
	w.WriteString(",\n\"values\":{")
	for qi, q := range p.qs {
		if qi > 0 {
			w.WriteString(",")
		}
		w.WriteString("\n\"" + q.def.name + "\":[")
		first := true
		err := p.each([]*quantity{q}, func(_ int, frames []int, vals [][]float64) error {
			wd := q.width()
			for t := range frames {
				b = b[:0]
				if !first {
					b = append(b, ',')
				}
				first = false
				b = nestJSON(b, q, vals[0][t*wd:(t+1)*wd], q.dims)
				w.Write(b)
			}
			return nil
		})
		if err != nil {
			return err
		}
		w.WriteString("]")
	}
	w.WriteString("}")
	if p.wantH {
		w.WriteString(",\n\"hops\":[")
		for i, h := range p.hops {
			if i > 0 {
				w.WriteString(",")
			}
			fmt.Fprintf(w, `{"step":%d,"from_state":%d,"to_state":%d,"kind":%q}`, h.Step, h.From, h.To, hopKind(h))
		}
		w.WriteString("]")
	}
	w.WriteString("}\n")
	return nil
}

// nestJSON writes v (row-major over dims) as nested JSON arrays; a
// per-frame scalar (no dims) is a bare number.
func nestJSON(b []byte, q *quantity, v []float64, dims []int) []byte {
	if len(dims) == 0 {
		return q.appendJSON(b, v[0])
	}
	b = append(b, '[')
	step := len(v) / max(dims[0], 1)
	for i := 0; i < dims[0]; i++ {
		if i > 0 {
			b = append(b, ',')
		}
		b = nestJSON(b, q, v[i*step:(i+1)*step], dims[1:])
	}
	return append(b, ']')
}

// writeNPY writes one .npy file per selected quantity (shape [frames,
// ...selected dims]) plus frame.npy, step.npy and time.npy, and hops.npy
// (rows of step, from_state, to_state, kind with 0 accepted and 1
// frustrated) when hops are selected. Integer data are '<i8', the rest
// '<f8'.
func (p *plan) writeNPY(dir string, written *[]string) error {
	write := func(name, descr string, shape []int, fill func(n *npyWriter) error) error {
		*written = append(*written, name)
		hdr, err := npyHeader(descr, shape)
		if err != nil {
			return err
		}
		fh, err := os.Create(filepath.Join(dir, name))
		if err != nil {
			return err
		}
		w := bufio.NewWriterSize(fh, 1<<20)
		w.Write(hdr)
		if err := fill(&npyWriter{w: w, integer: descr == "<i8"}); err != nil {
			fh.Close()
			return err
		}
		return closeOut(fh, w)
	}
	nf := len(p.frames)
	err := write("frame.npy", "<i8", []int{nf}, func(n *npyWriter) error {
		for _, f := range p.frames {
			n.put(float64(f))
		}
		return nil
	})
	if err == nil {
		err = write("step.npy", "<i8", []int{nf}, func(n *npyWriter) error {
			for _, s := range p.clock.c.Steps {
				binary64(n, s)
			}
			return nil
		})
	}
	if err == nil {
		err = write("time.npy", "<f8", []int{nf}, func(n *npyWriter) error {
			for _, t := range p.clock.c.Times {
				n.put(t)
			}
			return nil
		})
	}
	for _, q := range p.qs {
		if err != nil {
			return err
		}
		descr := "<f8"
		if q.integer() {
			descr = "<i8"
		}
		err = write(q.def.name+".npy", descr, append([]int{nf}, q.dims...), func(n *npyWriter) error {
			return p.each([]*quantity{q}, func(_ int, _ []int, vals [][]float64) error {
				for _, v := range vals[0] {
					n.put(v)
				}
				return nil
			})
		})
	}
	if err == nil && p.wantH {
		err = write("hops.npy", "<i8", []int{len(p.hops), 4}, func(n *npyWriter) error {
			for _, h := range p.hops {
				binary64(n, h.Step)
				n.put(float64(h.From))
				n.put(float64(h.To))
				k := 0.0
				if h.Frustrated {
					k = 1
				}
				n.put(k)
			}
			return nil
		})
	}
	return err
}

// binary64 writes an int64 exactly (steps may exceed 2^53).
func binary64(n *npyWriter, v int64) {
	for i := range n.buf {
		n.buf[i] = byte(uint64(v) >> (8 * i))
	}
	n.w.Write(n.buf[:])
}
