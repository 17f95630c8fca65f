package ingest

// readers are the input formats, in the order their files are opened
// (the geometry first). Adding a reader means one file holding the
// reader, its source and its Reader value, and one line here (see
// DEVELOPERS.md, "How to add a reader").
var readers = []*Reader{&xyzFormat, &h5mdFormat, &tableFormat, &logFormat}

// register adds a reader (for tests: a toy reader proves that a format
// needs nothing outside its own file and this list) and returns a
// function that removes it again.
func register(r *Reader) (undo func()) {
	readers = append(readers, r)
	return func() {
		for i, x := range readers {
			if x == r {
				readers = append(readers[:i:i], readers[i+1:]...)
				return
			}
		}
	}
}
