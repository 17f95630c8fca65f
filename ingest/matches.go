package ingest

import (
	"fmt"
	"slices"

	"trajvault/internal/finding"
)

// Problem codes of the cross-checks between a recipe's rules and what
// the logs hold (README, "Problems scan reports"); see scan.go for the
// others.
const (
	PRuleUnmatched = "P19" // a recipe rule matched no line of its log
	PHopMissing    = "P20" // the active state changes without a hop event
)

// activeTrack follows one file's active state record by record: the
// changes, each at the step (join key) of the record that shows the new
// state, with the step of the record before it, so that a hop logged
// anywhere in between accounts for it.
type activeTrack struct {
	seen      bool
	prev      int
	prevKey   int64
	changes   []activeChange
	firstLine int // line of the first change
}

type activeChange struct {
	after, at int64 // the change happened in (after, at]
	from, to  int
	line      int
}

// maxActiveChanges bounds the changes kept per file; more are counted.
const maxActiveChanges = 1 << 20

// noteActive records the active state of the record at key.
func (a *activeTrack) noteActive(state int, key int64, line int) {
	if a.seen && key <= a.prevKey {
		// A restart repeats steps: forget changes at or after them.
		i := len(a.changes)
		for i > 0 && a.changes[i-1].at >= key {
			i--
		}
		a.changes = a.changes[:i]
	}
	if a.seen && state != a.prev && key > a.prevKey && len(a.changes) < maxActiveChanges {
		a.changes = append(a.changes, activeChange{after: a.prevKey, at: key, from: a.prev, to: state, line: line})
	}
	a.seen, a.prev, a.prevKey = true, state, key
}

// checkRecipeRules reports every rule of a recipe log that matched no
// line of its file (P19): a pattern that matches nothing reads nothing,
// silently; for a hop rule that leaves the hop log empty while the run
// hopped. A hop rule that matched nothing in a run whose active state
// never changes is consistent, and is a note.
func (t *TrajReport) checkRecipeRules(srcs []source) {
	changes := t.activeChanges()
	for _, s := range srcs {
		rc, ok := s.(ruleCounter)
		if !ok {
			continue
		}
		for _, r := range rc.unmatchedRules() {
			sev, what := finding.Warning, "reads nothing"
			if r.event == "hop" {
				what = "reads no hop events, so the stored hop log is empty"
				if changes == 0 {
					sev, what = finding.Note, "reads no hop events; the active state never changes either, so there may have been none"
				}
			}
			t.add(PRuleUnmatched, sev, s.file(), 0, "recipe rule %d of this log (match: %q) matched no line: it %s; check the pattern against a line of the log", r.index+1, r.match, what)
		}
	}
}

// ruleCounter is implemented by sources read with recipe rules; it is
// optional so that the shared source interface stays as it is.
type ruleCounter interface {
	unmatchedRules() []unmatchedRule
}

type unmatchedRule struct {
	index        int // 0-based, in the recipe's order
	match, event string
}

func (s *logSource) unmatchedRules() []unmatchedRule {
	var out []unmatchedRule
	for i, r := range s.spec.Rules {
		if i >= len(s.matched) || s.matched[i] == 0 {
			out = append(out, unmatchedRule{index: i, match: r.Match, event: r.Event})
		}
	}
	return out
}

// activeChanges counts the changes of the active state over all files.
func (t *TrajReport) activeChanges() int {
	n := 0
	for _, f := range t.Files {
		n += len(f.activity.changes)
	}
	return n
}

// checkHopEvents reports changes of the active state that no accepted hop
// event accounts for (P20): the hop log would miss them, and with it the
// audit's hop checks. A change between the records at steps p and k is
// accounted for by an accepted hop logged at a step in (p, k]; hop
// events without steps are matched by count. Only the first file that
// holds active states is followed (the others repeat it).
func (t *TrajReport) checkHopEvents() {
	var act *FileReport
	for _, f := range t.Files {
		if f.activity.seen {
			act = f
			break
		}
	}
	if act == nil || len(act.activity.changes) == 0 {
		return
	}
	var steps []int64
	unstepped := 0
	for _, f := range t.Files {
		for _, h := range f.hopEvents {
			switch {
			case h.frustrated:
			case h.hasStep:
				steps = append(steps, h.step)
			default:
				unstepped++
			}
		}
	}
	changes := act.activity.changes
	if len(steps) == 0 && unstepped > 0 {
		if unstepped < len(changes) {
			t.add(PHopMissing, finding.Warning, act.File, changes[0].line, "the active state changes %d times but only %d accepted hop events are logged (without steps to match them by); the hop log misses the others: check the hop rule of the recipe", len(changes), unstepped)
		}
		return
	}
	missing := 0
	var first activeChange
	j := 0
	slices.Sort(steps)
	for _, c := range changes {
		for j < len(steps) && steps[j] <= c.after {
			j++
		}
		if j < len(steps) && steps[j] <= c.at {
			j++ // this hop accounts for this change
			continue
		}
		if missing == 0 {
			first = c
		}
		missing++
	}
	if missing == 0 {
		return
	}
	src := "no hop events are logged at all"
	if len(steps) > 0 {
		src = fmt.Sprintf("%d accepted hop events are logged", len(steps))
	}
	t.add(PHopMissing, finding.Warning, act.File, first.line, "the active state changes %d times without an accepted hop event logged between the records (first from state %d to %d by step %d); %s. The stored hop log will miss them, and the audit's hop checks with it: check the hop rule of the recipe, or the log", missing, first.from, first.to, first.at, src)
}

// countMatch counts a match of rule i of a recipe log (for P19).
func (s *logSource) countMatch(i int) {
	if s.matched == nil {
		s.matched = make([]int, len(s.spec.Rules))
	}
	s.matched[i]++
}
