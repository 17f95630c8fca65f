package ingest

// keySeq stores an increasing sequence of (record index, step) pairs as
// runs of constant stride, so that memory grows with the number of
// restarts and stride changes, not with the number of frames.
type keySeq struct {
	runs []run
	n    int
}

type run struct {
	idx0  int   // file record index of the first element
	key0  int64 // its step
	dkey  int64 // stride of steps
	count int
}

func (k *keySeq) push(idx int, key int64) {
	k.n++
	if len(k.runs) > 0 {
		r := &k.runs[len(k.runs)-1]
		last := r.key0 + r.dkey*int64(r.count-1)
		if r.idx0+r.count == idx {
			if r.count == 1 && key > r.key0 {
				r.dkey = key - r.key0
				r.count++
				return
			}
			if key == last+r.dkey && r.dkey > 0 {
				r.count++
				return
			}
		}
	}
	k.runs = append(k.runs, run{idx0: idx, key0: key, dkey: 1, count: 1})
}

func (k *keySeq) last() (int64, bool) {
	if len(k.runs) == 0 {
		return 0, false
	}
	r := k.runs[len(k.runs)-1]
	return r.key0 + r.dkey*int64(r.count-1), true
}

func (k *keySeq) first() (int64, bool) {
	if len(k.runs) == 0 {
		return 0, false
	}
	return k.runs[0].key0, true
}

// truncateFrom drops the elements with key >= key and returns the record
// index ranges [a, b) they came from.
func (k *keySeq) truncateFrom(key int64) [][2]int {
	var dropped [][2]int
	for len(k.runs) > 0 {
		r := &k.runs[len(k.runs)-1]
		if r.key0 >= key {
			dropped = append(dropped, [2]int{r.idx0, r.idx0 + r.count})
			k.n -= r.count
			k.runs = k.runs[:len(k.runs)-1]
			continue
		}
		// keep elements with key0 + dkey*j < key
		keep := int((key - r.key0 + r.dkey - 1) / r.dkey)
		if keep < r.count {
			dropped = append(dropped, [2]int{r.idx0 + keep, r.idx0 + r.count})
			k.n -= r.count - keep
			r.count = keep
		}
		break
	}
	return dropped
}

// iter calls fn for each (record index, key) in order; fn returns false
// to stop.
func (k *keySeq) iter(fn func(idx int, key int64) bool) {
	for _, r := range k.runs {
		for j := 0; j < r.count; j++ {
			if !fn(r.idx0+j, r.key0+r.dkey*int64(j)) {
				return
			}
		}
	}
}

// contains reports whether every key of a is in b (both increasing).
func contains(b, a *keySeq) (bool, int64) {
	ok, missing := true, int64(0)
	ri, j := 0, 0
	bnext := func() (int64, bool) {
		for ri < len(b.runs) {
			r := b.runs[ri]
			if j < r.count {
				v := r.key0 + r.dkey*int64(j)
				j++
				return v, true
			}
			ri, j = ri+1, 0
		}
		return 0, false
	}
	cur, has := bnext()
	a.iter(func(_ int, key int64) bool {
		for has && cur < key {
			cur, has = bnext()
		}
		if !has || cur != key {
			ok, missing = false, key
			return false
		}
		return true
	})
	return ok, missing
}
