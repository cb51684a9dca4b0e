package aggregate

import (
	"cmp"
	"fmt"
	"slices"
	"strings"
	"time"

	"sluice/pkg/api"
	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/flagging"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
	"sluice/pkg/signature"
)

// backend is the service as the API sees it (api.Backend).
type backend struct{ s *Service }

var _ api.Backend = backend{}

func (b backend) Jobs(running bool) []model.Summary {
	s := b.s
	s.mu.Lock()
	defer s.mu.Unlock()
	jobs := s.tr.Summaries()
	if running {
		jobs = slices.DeleteFunc(jobs, func(j model.Summary) bool { return !j.Running() })
	}
	now := s.opts.Now()
	for i := range jobs {
		s.att.DecideAll(jobs[i].ActiveFlags, now)
	}
	return jobs
}

func (b backend) Job(id string) (api.JobDetail, error) {
	s := b.s
	s.mu.Lock()
	sum, ok := s.tr.Job(id)
	s.att.DecideAll(sum.ActiveFlags, s.opts.Now())
	s.mu.Unlock()
	ws, err := s.st.Windows(id)
	if err != nil {
		return api.JobDetail{}, err
	}
	if !ok {
		if len(ws) == 0 {
			return api.JobDetail{}, fmt.Errorf("no job %q: %w", id, api.ErrNotFound)
		}
		sum = forgotten(id, ws)
	}
	if ws == nil {
		ws = []model.Window{}
	}
	return api.JobDetail{Summary: sum, ClosedWindows: ws}, nil
}

// forgotten is the summary of a job the tracker no longer holds, from its
// stored windows.
func forgotten(id string, ws []model.Window) model.Summary {
	last := ws[len(ws)-1]
	sum := model.Summary{
		JobMeta: model.JobMeta{ID: id, Start: ws[0].Start, End: last.End},
		State:   model.JobEnded, Windows: len(ws), LastWindow: &last,
		Signature: map[string]string{}, ActiveFlags: []model.Flag{},
	}
	gs := make([]coding.Grades, len(ws))
	for i, w := range ws {
		gs[i] = w.Grades
	}
	sig := signature.Build(gs)
	for id := range metric.Count {
		sum.Signature[id.String()] = sig.Text(id)
	}
	return sum
}

func (b backend) Explain(id string) (api.JobExplanation, error) {
	s := b.s
	s.mu.Lock()
	sum, ok := s.tr.Job(id)
	xs, _ := s.tr.Explain(id)
	s.att.DecideAll(sum.ActiveFlags, s.opts.Now())
	s.mu.Unlock()
	if !ok {
		ws, err := s.st.Windows(id)
		if err != nil {
			return api.JobExplanation{}, err
		}
		if len(ws) == 0 {
			return api.JobExplanation{}, fmt.Errorf("no job %q: %w", id, api.ErrNotFound)
		}
		sum = forgotten(id, ws)
		xs = explainWindows(s.opts.Tracker.Patterns, ws)
	}
	return api.JobExplanation{Job: sum, ClosedWindows: sum.Windows, Patterns: patternExplanations(s.opts.Tracker.Patterns, xs, sum.ActiveFlags)}, nil
}

// explainWindows explains a job from its stored windows: the matcher's
// state replayed, as after a restart.
func explainWindows(lib *matcher.Library, ws []model.Window) []matcher.Explanation {
	if lib == nil {
		return nil
	}
	m := lib.Replay(ws)
	out := make([]matcher.Explanation, lib.Len())
	for i := range out {
		out[i] = m.Explain(i)
	}
	return out
}

// patternExplanations pairs each explanation with its pattern's advice and
// active flag, flagged first, then matched, then by score.
func patternExplanations(lib *matcher.Library, xs []matcher.Explanation, flags []model.Flag) []api.PatternExplanation {
	out := make([]api.PatternExplanation, len(xs))
	for i, x := range xs {
		out[i] = api.PatternExplanation{Explanation: x, Advice: lib.Pattern(i).Advice}
		for k := range flags {
			if flags[k].Reason == model.PatternOf(x.Pattern) {
				out[i].Flag = &flags[k]
			}
		}
	}
	rank := func(p api.PatternExplanation) int {
		switch {
		case p.Flag != nil:
			return 0
		case p.Matched:
			return 1
		}
		return 2
	}
	slices.SortStableFunc(out, func(a, b api.PatternExplanation) int {
		return cmp.Or(cmp.Compare(rank(a), rank(b)), cmp.Compare(b.Score, a.Score))
	})
	return out
}

func (b backend) Flags(f api.FlagFilter) ([]model.Flag, error) {
	s := b.s
	stored, err := s.st.Flags()
	if err != nil {
		return nil, err
	}
	s.mu.Lock()
	live := map[string]model.Flag{}
	for _, j := range s.tr.Summaries() {
		for _, fl := range j.ActiveFlags {
			live[fl.ID] = fl
		}
	}
	for i, fl := range stored {
		if l, ok := live[fl.ID]; ok && fl.Active() {
			stored[i] = l
		}
	}
	s.att.DecideAll(stored, s.opts.Now())
	s.mu.Unlock()
	out := slices.DeleteFunc(stored, func(fl model.Flag) bool { return !selects(f, &fl) })
	slices.SortStableFunc(out, func(a, b model.Flag) int { return b.Raised.Compare(a.Raised) })
	if out == nil {
		out = []model.Flag{}
	}
	return out, nil
}

// selects reports whether the filter selects fl, whose state is decided.
func selects(f api.FlagFilter, fl *model.Flag) bool {
	switch {
	case f.Job != "" && f.Job != fl.Job:
		return false
	case f.State != nil && *f.State != fl.State:
		return false
	case f.Severity != nil && *f.Severity != fl.Severity:
		return false
	case f.Pattern != "" && f.Pattern != fl.Pattern:
		r, err := model.ParseReason(f.Pattern)
		return err == nil && r == fl.Reason
	}
	return true
}

func (b backend) Acknowledge(id, by, why string) (model.Ack, error) {
	s := b.s
	a, err := flagging.NewAck(id, by, why, s.opts.Now())
	if err != nil {
		return model.Ack{}, fmt.Errorf("ack: %v: %w", err, api.ErrBadRequest)
	}
	found, err := s.st.HasFlag(id)
	if err != nil {
		return model.Ack{}, err
	}
	if !found && !b.isLive(id) {
		return model.Ack{}, fmt.Errorf("no flag %q (see aggregator flags): %w", id, api.ErrNotFound)
	}
	if err := s.st.PutAck(a); err != nil {
		return model.Ack{}, err
	}
	s.mu.Lock()
	s.att.AddAck(a)
	s.mu.Unlock()
	s.log.Info("flag acknowledged", "flag", id, "by", a.By, "why", a.Why)
	return a, nil
}

// isLive reports whether a running job holds a flag with this id (raised
// since the last flush, say).
func (b backend) isLive(id string) bool {
	b.s.mu.Lock()
	defer b.s.mu.Unlock()
	for _, j := range b.s.tr.Summaries() {
		for _, f := range j.ActiveFlags {
			if f.ID == id {
				return true
			}
		}
	}
	return false
}

func (b backend) Silence(job, pattern string, d time.Duration, by, why string) (model.Silence, error) {
	s := b.s
	sl, err := flagging.NewSilence(job, pattern, d, by, why, s.opts.Now())
	if err != nil {
		return model.Silence{}, fmt.Errorf("silence: %v: %w", err, api.ErrBadRequest)
	}
	if err := s.st.PutSilence(sl); err != nil {
		return model.Silence{}, err
	}
	s.mu.Lock()
	s.att.AddSilence(sl)
	s.mu.Unlock()
	s.log.Info("silence added", "id", sl.ID, "job", sl.Job, "pattern", sl.Pattern, "until", sl.Until, "by", sl.By, "why", sl.Why)
	return sl, nil
}

func (b backend) Unsilence(id string) error {
	s := b.s
	s.mu.Lock()
	found := s.att.Unsilence(id)
	s.mu.Unlock()
	if !found {
		return fmt.Errorf("no silence %q (see aggregator flags silences): %w", id, api.ErrNotFound)
	}
	return s.st.DeleteSilence(id)
}

func (b backend) Silences() []model.Silence {
	s := b.s
	s.mu.Lock()
	defer s.mu.Unlock()
	out := s.att.Silences(s.opts.Now())
	if out == nil {
		out = []model.Silence{}
	}
	return out
}

func (b backend) Agents() []model.AgentStatus {
	s := b.s
	s.mu.Lock()
	agents := s.agentsLocked()
	s.mu.Unlock()
	slices.SortFunc(agents, func(a, b model.AgentStatus) int { return strings.Compare(a.Node, b.Node) })
	return agents
}

func (b backend) Patterns() []*pattern.Pattern {
	if lib := b.s.opts.Tracker.Patterns; lib != nil {
		return lib.Patterns()
	}
	return nil
}

func (b backend) Baseline() api.BaselineReport {
	b.s.mu.Lock()
	defer b.s.mu.Unlock()
	return b.s.learn.report()
}

func (b backend) BaselineDays(origin baseline.Origin) []api.DatedDay {
	b.s.mu.Lock()
	defer b.s.mu.Unlock()
	return b.s.learn.days(origin)
}

func (b backend) ImportBaseline(days map[baseline.DayKey]*baseline.Day) error {
	s := b.s
	s.mu.Lock()
	s.learn.imported(days)
	s.recomputeLocked()
	s.mu.Unlock()
	s.flush()
	s.log.Info("baseline imported", "days", len(days))
	return b.Health()
}

func (b backend) Health() error {
	b.s.mu.Lock()
	defer b.s.mu.Unlock()
	return b.s.flushErr
}
