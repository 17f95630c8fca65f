package trajfile

import (
	"fmt"
	"math"
	"slices"

	"trajvault/internal/h5"
)

// sliceBlockFrames is the most frames one contiguous read of a window
// asks for (rounded up to whole chunks), so that memory stays bounded
// however long the window is.
const sliceBlockFrames = 4096

// Window reads element e at the given frames (strictly increasing, each
// in [0, T)) and, per trailing dimension d of e's shape, only the indices
// keep[d] (increasing; nil or a missing entry keeps the whole dimension).
// For a per-atom element [T][N][3], keep = [][]int{atoms} picks atoms; for
// couplings [T][S][S], keep = [][]int{states, states} picks a state block.
// Values come back frame-major in the selection's order, as stored.
//
// Only the chunks that hold selected frames are read: frames are grouped
// by the dataset's chunks along time (HDF5 User's Guide, "chunking":
// the chunk is the unit of I/O and of filtering) and each group is one
// row-range read, so each touched chunk is decompressed once. Files
// without chunking are read frame by frame when the frames are not
// consecutive. Atoms and states are picked in memory: the HDF5 layer's
// row reads take whole rows.
func (r *Reader) Window(e *Element, frames []int, keep [][]int) ([]float64, error) {
	if len(keep) > e.Shape.Rank-1 {
		return nil, fmt.Errorf("trajfile: %s: %d index lists for %d trailing dimensions", e.Path, len(keep), e.Shape.Rank-1)
	}
	for i, f := range frames {
		if f < 0 || f >= e.Shape.Dims[0] || (i > 0 && f <= frames[i-1]) {
			return nil, fmt.Errorf("trajfile: %s: frame %d out of order or outside 0..%d", e.Path, f, e.Shape.Dims[0]-1)
		}
	}
	dims := e.Shape.Dims[1:]
	for d, k := range keep {
		for i, x := range k {
			if x < 0 || x >= dims[d] || (i > 0 && x <= k[i-1]) {
				return nil, fmt.Errorf("trajfile: %s: index %d of dimension %d out of order or outside 0..%d", e.Path, x, d+1, dims[d]-1)
			}
		}
	}
	offs := rowOffsets(dims, keep)
	v, err := r.gather(e.Path+Value, e.Shape, frames, offs)
	if err == nil {
		r.signZerosWindow(e, v, frames, offs)
	}
	return v, err
}

// signZerosWindow gives back the sign of listed negative zeros
// (NegativeZerosAttr) in a window read: v holds, per selected frame, the
// values at offsets offs (increasing) of its row.
func (r *Reader) signZerosWindow(e *Element, v []float64, frames, offs []int) {
	row := int64(e.Width())
	if row == 0 {
		return
	}
	negZero := math.Copysign(0, -1)
	for _, idx := range r.negativeZeros(e.Path + Value) {
		fi, ok := slices.BinarySearch(frames, int(idx/row))
		if !ok {
			continue
		}
		oi, ok := slices.BinarySearch(offs, int(idx%row))
		if !ok {
			continue
		}
		if j := fi*len(offs) + oi; j < len(v) && v[j] == 0 {
			v[j] = negZero
		}
	}
}

// gather reads rows frames (increasing, checked) of the dataset at path
// and keeps offsets offs of each row, grouping the reads by chunk.
func (r *Reader) gather(path string, shape h5.Shape, frames, offs []int) ([]float64, error) {
	row := shape.Len() / max(shape.Dims[0], 1)
	out := make([]float64, 0, len(frames)*len(offs))
	block := r.readBlock(path, frames)
	for i := 0; i < len(frames); {
		// Group the frames that fall in the same block of the time axis.
		b := frames[i] / block
		j := i + 1
		for j < len(frames) && frames[j]/block == b {
			j++
		}
		first, last := frames[i], frames[j-1]
		v, err := r.f.ReadRows(path, shape, first, last-first+1)
		if err != nil {
			return nil, err
		}
		for _, f := range frames[i:j] {
			base := (f - first) * row
			for _, o := range offs {
				out = append(out, v[base+o])
			}
		}
		i = j
	}
	return out, nil
}

// readBlock is the length of the aligned spans of the time axis that
// Window reads in one call: whole chunks along time, at least
// sliceBlockFrames when the frames are consecutive; a single frame for
// unchunked data read sparsely (contiguous storage reads exactly the rows
// asked for, so sparse frames are best read one by one).
func (r *Reader) readBlock(path string, frames []int) int {
	chunk := 0
	if info, err := r.f.Describe(path); err == nil && len(info.Chunk) > 0 {
		chunk = max(info.Chunk[0], 1)
	}
	dense := len(frames) > 0 && frames[len(frames)-1]-frames[0] == len(frames)-1
	switch {
	case chunk == 0 && !dense:
		return 1
	case chunk == 0:
		return sliceBlockFrames
	case dense:
		return chunk * ((sliceBlockFrames + chunk - 1) / chunk)
	}
	return chunk
}

// rowOffsets lists, in row-major order, the offsets within one frame's
// row of the kept elements.
func rowOffsets(dims []int, keep [][]int) []int {
	offs := []int{0}
	for d, n := range dims {
		idx := []int(nil)
		if d < len(keep) && keep[d] != nil {
			idx = keep[d]
		} else {
			idx = make([]int, n)
			for i := range idx {
				idx[i] = i
			}
		}
		next := make([]int, 0, len(offs)*len(idx))
		for _, o := range offs {
			for _, x := range idx {
				next = append(next, o*n+x)
			}
		}
		offs = next
	}
	return slices.Clip(offs)
}

// OpenWindowReader opens a trajectory file for reading windows of it: as
// OpenReader, but without reading the clock of every frame, which for an
// explicit clock of a long run costs more than the window itself (16 MB
// for 1e6 frames). Steps and Times stay nil: ClockAt reads the clock of
// the frames wanted. The rest (group, species, masses, T, States,
// TimeStep) is read as OpenReader reads it.
func OpenWindowReader(path string) (*Reader, error) { return open(path, ReadOptions{}, false) }

// OpenWindowReaderWith is OpenWindowReader for the particle group o
// names.
func OpenWindowReaderWith(path string, o ReadOptions) (*Reader, error) {
	return open(path, o, false)
}

// ClockAt reads the steps and times (in the stored time unit) of element
// el at frames (increasing, in [0, T)): computed for H5MD fixed mode
// (value i = offset + i increment), read by chunk for explicit clocks.
// Steps of explicit clocks pass through float64 and are exact up to 2^53.
func (r *Reader) ClockAt(el string, frames []int) (*Clock, error) {
	info, err := r.f.Describe(el + Value)
	if err != nil || info.Shape.Rank == 0 {
		return nil, fmt.Errorf("no values for %s", el)
	}
	T := info.Shape.Dims[0]
	for i, f := range frames {
		if f < 0 || f >= T || (i > 0 && f <= frames[i-1]) {
			return nil, fmt.Errorf("trajfile: %s: frame %d out of order or outside 0..%d", el, f, T-1)
		}
	}
	c := &Clock{Steps: make([]int64, len(frames)), Times: make([]float64, len(frames))}
	if a, err := r.f.Attr(el+Time, UnitAttr); err == nil && len(a.Strings) == 1 {
		c.TimeUnit = a.Strings[0]
	}
	si, err := r.f.Describe(el + Step)
	if err != nil {
		return nil, fmt.Errorf("no step for %s", el)
	}
	ti, err := r.f.Describe(el + Time)
	if err != nil {
		return nil, fmt.Errorf("no time for %s", el)
	}
	if si.Shape.Rank == 0 {
		c.Fixed = true
		st, _, err := r.f.ReadInt64(el + Step)
		tm, _, err2 := r.f.ReadFloat64(el + Time)
		if err != nil || err2 != nil || ti.Shape.Rank != 0 || len(st) != 1 || len(tm) != 1 {
			return nil, fmt.Errorf("%s: fixed-mode step and time must both be scalars", el)
		}
		so, to := int64(numAttr(r.f, el+Step, OffsetAttr)), numAttr(r.f, el+Time, OffsetAttr)
		for i, f := range frames {
			c.Steps[i] = so + int64(f)*st[0]
			c.Times[i] = to + float64(f)*tm[0]
		}
		return c, nil
	}
	if si.Shape.Rank != 1 || ti.Shape.Rank != 1 || si.Shape.Dims[0] != T || ti.Shape.Dims[0] != T {
		return nil, fmt.Errorf("%s: step/time lengths differ from value", el)
	}
	steps, err := r.gather(el+Step, si.Shape, frames, []int{0})
	if err != nil {
		return nil, err
	}
	if c.Times, err = r.gather(el+Time, ti.Shape, frames, []int{0}); err != nil {
		return nil, err
	}
	for i, s := range steps {
		c.Steps[i] = int64(s)
	}
	return c, nil
}
