package ingest

import (
	"bufio"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"runtime/metrics"
	"sync"
	"testing"
	"time"
)

// synthetic writes a trajectory folder of frames x atoms quickly.
func synthetic(t testing.TB, frames, atoms int) string {
	dir := filepath.Join(t.TempDir(), fmt.Sprintf("syn-%d", frames))
	os.MkdirAll(dir, 0o755)
	g, _ := os.Create(filepath.Join(dir, "geom.xyz"))
	e, _ := os.Create(filepath.Join(dir, "energies.dat"))
	gw, ew := bufio.NewWriterSize(g, 1<<20), bufio.NewWriterSize(e, 1<<20)
	fmt.Fprintln(ew, "# step time[fs] Epot[hartree] Ekin[hartree]")
	for f := 0; f < frames; f++ {
		fmt.Fprintf(gw, "%d\nstep=%d time=%.2f\n", atoms, f, 0.5*float64(f))
		for a := 0; a < atoms; a++ {
			x := float64((f*7+a*13)%1000) / 997
			fmt.Fprintf(gw, "C %.6f %.6f %.6f\n", x, 1-x, x*x)
		}
		fmt.Fprintf(ew, "%d %.2f %.8f %.8f\n", f, 0.5*float64(f), -40-float64(f%97)/1e3, float64(f%89)/1e4)
	}
	gw.Flush()
	ew.Flush()
	g.Close()
	e.Close()
	return dir
}

// peakHeap runs fn and samples the live heap (runtime/metrics) every
// millisecond, returning the largest sample.
func peakHeap(fn func()) uint64 {
	runtime.GC()
	s := []metrics.Sample{{Name: "/memory/classes/heap/objects:bytes"}}
	var peak uint64
	stop := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		for {
			metrics.Read(s)
			if v := s[0].Value.Uint64(); v > peak {
				peak = v
			}
			select {
			case <-stop:
				return
			case <-time.After(time.Millisecond):
			}
		}
	}()
	fn()
	close(stop)
	wg.Wait()
	return peak
}

// TestConvertMemoryIsFlat: converting 10x more frames must not need more
// memory (streaming), checked by the live heap of two runs.
func TestConvertMemoryIsFlat(t *testing.T) {
	if testing.Short() {
		t.Skip("writes ~20 MB of logs")
	}
	opt := ConvertOptions{Options: Options{Units: map[string]string{"position": "angstrom"}}}
	run := func(frames int) uint64 {
		dir := synthetic(t, frames, 20)
		tr, _ := TrajectoryFrom([]string{dir}, nil)
		return peakHeap(func() {
			rep, _ := Scan(context.Background(), tr, opt.Options)
			if _, err := Convert(context.Background(), rep, filepath.Join(t.TempDir(), "o.h5"), opt); err != nil {
				t.Fatal(err)
			}
		})
	}
	small, large := run(10000), run(100000)
	t.Logf("peak live heap: %d frames %.1f MiB, %d frames %.1f MiB", 10000, float64(small)/(1<<20), 100000, float64(large)/(1<<20))
	if large > small+small/2+(4<<20) {
		t.Errorf("memory grows with frames: %d -> %d bytes", small, large)
	}
}
