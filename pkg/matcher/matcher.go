// Package matcher scores every running job against the pattern library as
// its windows close, and on its live window.
//
// # Basics
//
// [Compile] turns patterns into a [Library] shared by every job; each job
// gets a [Job] from [Library.NewJob]. [Job.Window] takes one closed window
// and returns every pattern's score for it, in time proportional to the
// patterns' lengths, not to the job's age:
//
//   - a rule pattern pushes whether its conditions held into a k-of-n
//     window (pattern.RuleState); its score is the share of the last n
//     windows that held;
//   - a sellers example adds one column to Sellers' semi-global edit
//     distance matrix; its score is 1 − cost/length of the best match
//     ending at this window;
//   - a ks example compares the grade histograms of the job's last windows
//     with the pattern's; its score is 1 − D;
//   - a euclidean example compares the last windows with the pattern at
//     the one offset where they line up; its score is 1 − distance/max.
//
// [Job.Live] evaluates rule patterns once more with the open window as a
// provisional next window, without changing any state: a rule can then
// match part-way into a window rather than at its end, but only on bounds
// that the closed window cannot contradict. Example patterns
// are scored on closed windows only; grades of part of a window are not
// comparable with those of whole ones.
//
// # Caveats
//
// A Job is not safe for concurrent use. Its state is not persisted: the
// aggregator rebuilds it after a restart by replaying the job's stored
// windows ([Job.Window] on each, in order), which gives the same state.
package matcher

import (
	"fmt"
	"slices"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/pattern"
	"sluice/pkg/similarity"
)

// Library is a compiled pattern set.
type Library struct {
	entries []entry
	lasts   []int // the distinct window counts of the ks patterns
}

type entry struct {
	p    *pattern.Pattern
	sim  *similarity.Pattern // examples only
	hist int                 // ks only: index into lasts and Job.hists
}

// Compile checks and prepares patterns for matching.
func Compile(ps []*pattern.Pattern) (*Library, error) {
	lib := &Library{}
	for _, p := range ps {
		e := entry{p: p}
		if ex := p.Example; ex != nil {
			metrics := make([]int, len(ex.Metrics))
			for i, id := range ex.Metrics {
				metrics[i] = int(id)
			}
			sp, err := similarity.NewPattern(metrics, ex.Windows())
			if err != nil {
				return nil, fmt.Errorf("pattern %s (%s): %w", p.Name, p.Source, err)
			}
			e.sim = sp
			if ex.Method == pattern.KS {
				e.hist = slices.Index(lib.lasts, ex.Last)
				if e.hist < 0 {
					e.hist = len(lib.lasts)
					lib.lasts = append(lib.lasts, ex.Last)
				}
			}
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

// Len is the number of patterns.
func (l *Library) Len() int { return len(l.entries) }

// Score is one pattern's score at one evaluation.
type Score struct {
	// Score is in [0, 1]; see the package doc for each kind's meaning.
	Score float64
	// Matched reports Score >= the pattern's threshold.
	Matched bool
	// Start is the index (in the job's closed windows, 0-based) of the
	// first window of the match: the best Sellers or Euclidean alignment,
	// or the oldest window of a rule's last n that held. -1 when unknown.
	Start int
}

// Job is one job's matching state against every pattern of a library.
type Job struct {
	lib     *Library
	rules   []pattern.RuleState // by entry; zero for examples
	sellers []*similarity.Sellers
	shapes  []*similarity.Shape
	hists   []*similarity.Histograms // by Library.lasts
	windows int
	scores  []Score
	window  [metric.Count]coding.Grade
}

// NewJob returns a job's fresh state.
func (l *Library) NewJob() *Job {
	j := &Job{
		lib: l, rules: make([]pattern.RuleState, len(l.entries)),
		sellers: make([]*similarity.Sellers, len(l.entries)),
		shapes:  make([]*similarity.Shape, len(l.entries)),
		scores:  make([]Score, len(l.entries)),
	}
	for i, e := range l.entries {
		switch {
		case e.p.Rule != nil:
			j.rules[i] = e.p.Rule.NewState()
		case e.p.Example.Method == pattern.Sellers:
			j.sellers[i] = similarity.NewSellers(e.sim)
		case e.p.Example.Method == pattern.Euclidean:
			j.shapes[i] = similarity.NewShape(e.sim)
		}
	}
	for _, last := range l.lasts {
		h, _ := similarity.NewHistograms(last) // last >= 0, checked by the pattern loader
		j.hists = append(j.hists, h)
	}
	return j
}

// Windows is the number of closed windows pushed.
func (j *Job) Windows() int { return j.windows }

// Window pushes one closed window and returns each pattern's score, in
// library order. The slice is reused by the next call.
func (j *Job) Window(v pattern.WindowView) []Score {
	copy(j.window[:], v.Grades[:])
	for _, h := range j.hists {
		h.Push(j.window[:])
	}
	idx := j.windows
	j.windows++
	for i, e := range j.lib.entries {
		j.scores[i] = j.score(i, e, v, idx)
	}
	return j.scores
}

func (j *Job) score(i int, e entry, v pattern.WindowView, idx int) Score {
	p := e.p
	if p.Rule != nil {
		st := &j.rules[i]
		s := st.Push(p.Rule.Holds(v))
		return Score{Score: s, Matched: st.Matched(), Start: ruleStart(st, idx)}
	}
	switch p.Example.Method {
	case pattern.Sellers:
		j.sellers[i].Push(j.window[:])
		m := j.sellers[i].Last()
		return Score{Score: m.Score, Matched: m.Score >= p.Threshold, Start: m.Start}
	case pattern.Euclidean:
		j.shapes[i].Push(j.window[:])
		m, ok := j.shapes[i].Last()
		if !ok {
			return Score{Start: -1}
		}
		return Score{Score: m.Score, Matched: m.Score >= p.Threshold, Start: m.Start}
	default: // ks
		h := j.hists[e.hist]
		if h.N() < p.Example.Len() {
			return Score{Start: -1} // too few windows to compare distributions
		}
		s := e.sim.KSScore(h)
		return Score{Score: s, Matched: s >= p.Threshold, Start: idx + 1 - h.N()}
	}
}

// ruleStart is the index of the oldest window among a rule's last n that
// held, or -1.
func ruleStart(st *pattern.RuleState, idx int) int {
	if st.Count() == 0 {
		return -1
	}
	return idx + 1 - st.Span()
}

// Live scores every rule pattern with the open window as a provisional
// next window, given as two bounds (see pattern.Rule.HoldsBetween);
// example patterns keep their latest closed-window score. Nothing is
// changed.
func (j *Job) Live(low, high pattern.WindowView) []Score {
	out := make([]Score, len(j.lib.entries))
	for i, e := range j.lib.entries {
		if e.p.Rule == nil {
			out[i] = j.scores[i]
			continue
		}
		st := j.rules[i] // a copy: the provisional push is thrown away
		s := st.Push(e.p.Rule.HoldsBetween(low, high))
		out[i] = Score{Score: s, Matched: st.Matched(), Start: ruleStart(&st, j.windows)}
	}
	return out
}
