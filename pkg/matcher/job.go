package matcher

import (
	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

// Verdict is one pattern's result at one evaluation: what the flag
// machine is given, and what an explanation explains.
type Verdict struct {
	// Score is in [0, 1]; see the package doc for each kind's meaning.
	Score float64
	// Matched reports Score >= the pattern's threshold.
	Matched bool
	// Start is the index (in the job's closed windows, 0-based) of the
	// first window of the match: the best Sellers or Euclidean alignment,
	// or the oldest window of a rule's last n that held. -1 when unknown.
	Start int
	// Open says the verdict counted the open window as a provisional next
	// window (rules only, from JobMatch.Open).
	Open bool
}

// JobMatch is one job's matching state against every pattern of a library.
type JobMatch struct {
	lib     *Library
	rules   []RuleState // by entry; zero for examples
	sellers []*Sellers
	shapes  []*Shape
	hists   []*Histograms // by Library.lasts
	windows int
	closed  []Verdict // by entry, from the latest closed window
	latest  []Verdict // by entry, from the latest evaluation
	grades  [metric.Count]coding.Grade

	// recent holds the last lib.keep closed windows, oldest first from
	// index next, so that an explanation shows what was evaluated; open
	// is the open window of the latest evaluation, if it was one.
	recent []View
	next   int
	open   *Open
}

// NewMatch returns a job's fresh matching state.
func (l *Library) NewMatch() *JobMatch {
	n := len(l.entries)
	j := &JobMatch{
		lib: l, rules: make([]RuleState, n),
		sellers: make([]*Sellers, n), shapes: make([]*Shape, n),
		closed: make([]Verdict, n), latest: make([]Verdict, n),
		recent: make([]View, 0, l.keep),
	}
	for i, e := range l.entries {
		j.closed[i] = Verdict{Start: -1}
		switch {
		case e.p.Rule != nil:
			j.rules[i] = NewRuleState(e.p.Rule.Hold)
		case e.p.Example.Method == pattern.Sellers:
			j.sellers[i] = NewSellers(e.tmpl)
		case e.p.Example.Method == pattern.Euclidean:
			j.shapes[i] = NewShape(e.tmpl)
		}
	}
	copy(j.latest, j.closed)
	for _, last := range l.lasts {
		h, _ := NewHistograms(last) // last >= 0, checked by the pattern loader
		j.hists = append(j.hists, h)
	}
	return j
}

// Windows is the number of closed windows pushed.
func (j *JobMatch) Windows() int { return j.windows }

// Window pushes one closed window and returns each pattern's verdict, in
// library order. The slice is reused by the next call.
func (j *JobMatch) Window(v View) []Verdict {
	copy(j.grades[:], v.Grades[:])
	for _, h := range j.hists {
		h.Push(j.grades[:])
	}
	j.remember(v)
	idx := j.windows
	j.windows++
	for i, e := range j.lib.entries {
		j.closed[i] = j.score(i, e, &v, idx)
	}
	copy(j.latest, j.closed)
	j.open = nil
	return j.closed
}

// remember keeps v among the last lib.keep closed windows.
func (j *JobMatch) remember(v View) {
	if len(j.recent) < cap(j.recent) {
		j.recent = append(j.recent, v)
		return
	}
	j.recent[j.next] = v
	j.next = (j.next + 1) % len(j.recent)
}

// recentWindows returns up to n of the latest closed windows, oldest
// first.
func (j *JobMatch) recentWindows(n int) []View {
	n = min(n, len(j.recent))
	out := make([]View, 0, n)
	for k := len(j.recent) - n; k < len(j.recent); k++ {
		out = append(out, j.recent[(j.next+k)%len(j.recent)])
	}
	return out
}

func (j *JobMatch) score(i int, e entry, v *View, idx int) Verdict {
	p := e.p
	if p.Rule != nil {
		st := &j.rules[i]
		s := st.Push(RuleHolds(p.Rule, v))
		return Verdict{Score: s, Matched: st.Matched(), Start: ruleStart(st, idx)}
	}
	switch p.Example.Method {
	case pattern.Sellers:
		j.sellers[i].Push(j.grades[:])
		m := j.sellers[i].Last()
		return Verdict{Score: m.Score, Matched: m.Score >= p.Threshold, Start: m.Start}
	case pattern.Euclidean:
		j.shapes[i].Push(j.grades[:])
		m, ok := j.shapes[i].Last()
		if !ok {
			return Verdict{Start: -1}
		}
		return Verdict{Score: m.Score, Matched: m.Score >= p.Threshold, Start: m.Start}
	default: // ks
		h := j.hists[e.hist]
		if h.N() < p.Example.Len() {
			return Verdict{Start: -1} // too few windows to compare distributions
		}
		s := e.tmpl.KSScore(h)
		return Verdict{Score: s, Matched: s >= p.Threshold, Start: idx + 1 - h.N()}
	}
}

// ruleStart is the index of the oldest window among a rule's last n that
// held, or -1.
func ruleStart(st *RuleState, idx int) int {
	if st.Count() == 0 {
		return -1
	}
	return idx + 1 - st.Span()
}

// Open scores every rule pattern with the open window as a provisional
// next window (see RuleHoldsOpen); example patterns keep their latest
// closed-window verdict, since grades of part of a window are not
// comparable with those of whole ones. No matching state changes: the
// provisional push is thrown away. The slice is reused by the next call.
func (j *JobMatch) Open(o Open) []Verdict {
	j.open = &o
	for i, e := range j.lib.entries {
		if e.p.Rule == nil {
			j.latest[i] = j.closed[i]
			continue
		}
		st := j.rules[i] // a copy
		s := st.Push(RuleHoldsOpen(e.p.Rule, &o))
		j.latest[i] = Verdict{Score: s, Matched: st.Matched(), Start: ruleStart(&st, j.windows), Open: true}
	}
	return j.latest
}

// Verdicts returns the latest evaluation's verdicts, in library order;
// the slice is the job's own and changes with the next evaluation.
func (j *JobMatch) Verdicts() []Verdict { return j.latest }

// Replay returns a job's state rebuilt from its closed windows, in order:
// the same state the live job reached, since matching depends on nothing
// else.
func (l *Library) Replay(windows []model.Window) *JobMatch {
	j := l.NewMatch()
	for i := range windows {
		j.Window(ViewOf(&windows[i]))
	}
	return j
}
