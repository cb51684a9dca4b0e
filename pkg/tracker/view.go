package tracker

import (
	"cmp"
	"slices"

	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// Job returns a copy of a job's summary.
func (t *Tracker) Job(id string) (model.Summary, bool) {
	j, ok := t.jobs[id]
	if !ok {
		return model.Summary{}, false
	}
	return summarize(j), true
}

// Summaries lists every tracked job, running first, then by id.
func (t *Tracker) Summaries() []model.Summary {
	out := make([]model.Summary, 0, len(t.jobs))
	for _, id := range t.sortedJobIDs() {
		out = append(out, summarize(t.jobs[id]))
	}
	slices.SortStableFunc(out, func(a, b model.Summary) int { return cmp.Compare(a.State, b.State) })
	return out
}

func summarize(j *job) model.Summary {
	s := model.Summary{
		JobMeta:     j.meta,
		State:       model.JobRunning,
		NodesSeen:   len(j.live),
		LastSample:  j.lastSample,
		Live:        j.liveRates,
		LiveLevels:  j.liveLevels,
		LiveGrades:  j.signature.Live,
		Signature:   make(map[string]string, metric.Count),
		Windows:     j.closed,
		Totals:      j.totals,
		ActiveFlags: j.streaks.Active(),
	}
	if s.ActiveFlags == nil {
		s.ActiveFlags = []model.Flag{}
	}
	s.Nodes = slices.Clone(j.meta.Nodes)
	for id := range metric.Count {
		s.Signature[id.String()] = j.signature.Text(id)
	}
	if j.finished {
		s.State = model.JobEnded
	}
	if j.lastWindow != nil {
		w := *j.lastWindow
		s.LastWindow = &w
	}
	for r, h := range j.streaks {
		if r.Kind == model.PatternMatch && h.Score > 0 {
			if s.PatternScores == nil {
				s.PatternScores = map[string]float64{}
			}
			s.PatternScores[r.Pattern] = h.Score
		}
	}
	return s
}

// Explain returns, for a tracked job, the explanation of every pattern's
// latest verdict, in library order: what the flags were decided on. False
// when the job is not tracked; a job with no evaluation yet explains
// verdicts of no windows.
func (t *Tracker) Explain(id string) ([]matcher.Explanation, bool) {
	j, ok := t.jobs[id]
	if !ok {
		return nil, false
	}
	lib := t.opts.Patterns
	if lib == nil {
		return []matcher.Explanation{}, true
	}
	m := t.matcherOf(j)
	out := make([]matcher.Explanation, lib.Len())
	for i := range out {
		out[i] = m.Explain(i)
	}
	return out, true
}
