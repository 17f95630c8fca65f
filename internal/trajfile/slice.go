package trajfile

import (
	"fmt"
	"slices"
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
	row := e.Width()
	out := make([]float64, 0, len(frames)*len(offs))
	block := r.readBlock(e, frames)
	for i := 0; i < len(frames); {
		// Group the frames that fall in the same block of the time axis.
		b := frames[i] / block
		j := i + 1
		for j < len(frames) && frames[j]/block == b {
			j++
		}
		first, last := frames[i], frames[j-1]
		v, err := r.f.ReadRows(e.Path+Value, e.Shape, first, last-first+1)
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
func (r *Reader) readBlock(e *Element, frames []int) int {
	chunk := 0
	if info, err := r.f.Info(e.Path + Value); err == nil && len(info.Chunk) > 0 {
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
