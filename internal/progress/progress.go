// Package progress is how long work says how far it has got. Jobs take a
// Counter and never print; the command that runs them decides whether and
// how to show it (a bar on a terminal, nothing when piped).
package progress

// Counter counts units of work done (trajectories, files, bytes).
// Implementations are safe for concurrent use.
type Counter interface {
	// SetTotal says how many units the work has, when known.
	SetTotal(n int64)
	// Add records n more units done.
	Add(n int64)
}

// Nop counts nothing; jobs use it when the caller gave no counter.
type Nop struct{}

func (Nop) SetTotal(int64) {}
func (Nop) Add(int64)      {}

// Or returns c, or Nop when c is nil.
func Or(c Counter) Counter {
	if c == nil {
		return Nop{}
	}
	return c
}
