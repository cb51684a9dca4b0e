package matcher

import (
	"fmt"
	"slices"

	"sluice/pkg/pattern"
)

// Library is a compiled pattern set, shared by every job.
type Library struct {
	entries []entry
	lasts   []int // the distinct window counts of the ks patterns
	keep    int   // closed windows a job keeps for explanations
}

type entry struct {
	p    *pattern.Pattern
	tmpl *Template // examples only
	hist int       // ks only: index into lasts and Job.hists
}

// Compile checks and prepares patterns for matching.
func Compile(ps []*pattern.Pattern) (*Library, error) {
	lib := &Library{keep: 1}
	for _, p := range ps {
		e := entry{p: p}
		switch {
		case p.Rule != nil:
			lib.keep = max(lib.keep, min(p.Rule.Hold.N, pattern.MaxWindows))
		case p.Example != nil:
			ex := p.Example
			metrics := make([]int, len(ex.Metrics))
			for i, id := range ex.Metrics {
				metrics[i] = int(id)
			}
			tmpl, err := NewTemplate(metrics, ex.Windows())
			if err != nil {
				return nil, fmt.Errorf("pattern %s (%s): %w", p.Name, p.Source, err)
			}
			e.tmpl = tmpl
			lib.keep = max(lib.keep, ex.Len())
			if ex.Method == pattern.KS {
				e.hist = slices.Index(lib.lasts, ex.Last)
				if e.hist < 0 {
					e.hist = len(lib.lasts)
					lib.lasts = append(lib.lasts, ex.Last)
				}
			}
		default:
			return nil, fmt.Errorf("pattern %s (%s): neither a rule nor an example", p.Name, p.Source)
		}
		lib.entries = append(lib.entries, e)
	}
	return lib, nil
}

// Patterns lists the library's patterns in order.
func (l *Library) Patterns() []*pattern.Pattern {
	ps := make([]*pattern.Pattern, len(l.entries))
	for i, e := range l.entries {
		ps[i] = e.p
	}
	return ps
}

// Pattern returns the i-th pattern.
func (l *Library) Pattern(i int) *pattern.Pattern { return l.entries[i].p }

// Len is the number of patterns.
func (l *Library) Len() int { return len(l.entries) }
