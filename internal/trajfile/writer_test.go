package trajfile

import (
	"path/filepath"
	"strings"
	"testing"
)

// TestWriterRejectsStepsOutOfOrder, also across a chunk boundary (a
// regression: the check once read the emptied chunk buffer).
func TestWriterRejectsStepsOutOfOrder(t *testing.T) {
	w, err := Create(filepath.Join(t.TempDir(), "x.h5"), Spec{Species: []int{1}, Masses: []float64{1.008}, ChunkFrames: 2})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Abort()
	for _, s := range []int64{0, 1, 2} {
		if err := w.WriteFrame(&Frame{Step: s, Position: []float64{0, 0, 0}}); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.WriteFrame(&Frame{Step: 1, Position: []float64{0, 0, 0}}); err == nil || !strings.Contains(err.Error(), "must increase") {
		t.Errorf("err = %v", err)
	}
}
