package main

import (
	"io"
	"sync"
	"time"

	"github.com/schollz/progressbar/v3"

	"trajvault/internal/progress"
)

// bar is a progress bar on stderr, shown only when stderr is a terminal
// and --quiet is not set; otherwise counting costs nothing and prints
// nothing. Finish clears it so the command's summary follows cleanly.
type bar struct {
	mu sync.Mutex
	pb *progressbar.ProgressBar
}

func (b *bar) SetTotal(n int64) {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.pb.ChangeMax64(n)
}

func (b *bar) Add(n int64) {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.pb.Add64(n)
}

// Clear takes the bar off the terminal so that a line can be printed; the
// next Add draws it again.
func (b *bar) Clear() {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.pb.Clear()
}

func (b *bar) Finish() {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.pb.Clear()
}

// finisher is a counter that can clear its display.
type finisher interface {
	progress.Counter
	Clear()
	Finish()
}

type nopFinisher struct{ progress.Nop }

func (nopFinisher) Finish() {}
func (nopFinisher) Clear()  {}

// newBar makes the progress display for one long step, e.g. "scan" over
// trajectories: done/total, rate and time left.
func newBar(g *globals, what, unit string) finisher {
	if !g.stderrTTY || g.quiet {
		return nopFinisher{}
	}
	return &bar{pb: newProgressBar(g.stderr, what, unit)}
}

func newProgressBar(w io.Writer, what, unit string) *progressbar.ProgressBar {
	return progressbar.NewOptions64(-1,
		progressbar.OptionSetWriter(w),
		progressbar.OptionSetDescription(what),
		progressbar.OptionSetItsString(unit),
		progressbar.OptionShowCount(),
		progressbar.OptionShowIts(),
		progressbar.OptionSetPredictTime(true),
		progressbar.OptionSetWidth(20),
		progressbar.OptionThrottle(100*time.Millisecond),
		progressbar.OptionClearOnFinish(),
	)
}
