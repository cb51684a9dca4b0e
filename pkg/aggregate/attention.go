package aggregate

import (
	"cmp"
	"encoding/json"
	"errors"
	"fmt"
	"net/http"
	"slices"
	"strings"
	"time"

	"sluice/pkg/export"
	"sluice/pkg/model"
)

// Limits on a silence's length: long enough for a weekend, short enough
// that a forgotten one ends.
const (
	MinSilence = time.Minute
	MaxSilence = 30 * 24 * time.Hour
)

// SilenceRequest is the body of POST /api/v1/silences.
type SilenceRequest struct {
	Job     string `json:"job"`
	Pattern string `json:"pattern"` // a pattern name or a reason such as "critical:creates"
	For     string `json:"for"`     // a Go duration, e.g. "2h"
	By      string `json:"by"`
	Why     string `json:"why"`
}

// AckRequest is the body of POST /api/v1/flags/{id}/ack.
type AckRequest struct {
	By  string `json:"by"`
	Why string `json:"why"`
}

func (r SilenceRequest) silence(now time.Time) (model.Silence, error) {
	d, err := time.ParseDuration(r.For)
	switch {
	case err != nil:
		return model.Silence{}, fmt.Errorf("for %q: %w", r.For, err)
	case d < MinSilence || d > MaxSilence:
		return model.Silence{}, fmt.Errorf("for %s: must be between %s and %s", d, MinSilence, MaxSilence)
	case r.Job == "" && r.Pattern == "":
		return model.Silence{}, errors.New("a silence needs a job, a pattern, or both")
	case strings.TrimSpace(r.By) == "" || strings.TrimSpace(r.Why) == "":
		return model.Silence{}, errors.New("say who silences and why (by, why)")
	}
	return model.Silence{
		ID:  fmt.Sprintf("%d-%s-%s", now.UnixNano(), cmp.Or(r.Job, "any"), cmp.Or(r.Pattern, "any")),
		Job: r.Job, Pattern: r.Pattern, Until: now.Add(d), By: r.By, Why: r.Why, Created: now,
	}, nil
}

// attention holds the silences and acknowledgements, guarded by the
// service lock.
type attention struct {
	silences []model.Silence
	acks     map[string]model.Ack
}

// mark sets Silenced and Ack on flags as of now.
func (a *attention) mark(fs []model.Flag, now time.Time) {
	for i := range fs {
		f := &fs[i]
		if ack, ok := a.acks[f.ID]; ok {
			f.Ack = &ack
		}
		f.Silenced = f.Active() && slices.ContainsFunc(a.silences, func(s model.Silence) bool { return s.Covers(*f, now) })
	}
}

func (a *attention) markJobs(js []model.Summary, now time.Time) {
	for i := range js {
		a.mark(js[i].ActiveFlags, now)
	}
}

func (s *Service) loadAttention() error {
	sls, err := s.st.Silences()
	if err != nil {
		return fmt.Errorf("aggregator: %w", err)
	}
	acks, err := s.st.Acks()
	if err != nil {
		return fmt.Errorf("aggregator: %w", err)
	}
	s.mu.Lock()
	s.att = attention{silences: sls, acks: acks}
	s.mu.Unlock()
	return nil
}

func decodeBody(w http.ResponseWriter, r *http.Request, v any) bool {
	dec := json.NewDecoder(http.MaxBytesReader(w, r.Body, 64<<10))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		http.Error(w, "bad request body: "+err.Error(), http.StatusBadRequest)
		return false
	}
	return true
}

func (s *Service) handleSilence(w http.ResponseWriter, r *http.Request) {
	var req SilenceRequest
	if !decodeBody(w, r, &req) {
		return
	}
	sl, err := req.silence(s.opts.Now())
	if err != nil {
		http.Error(w, "silence: "+err.Error(), http.StatusBadRequest)
		return
	}
	if err := s.st.PutSilence(sl); err != nil {
		http.Error(w, err.Error(), http.StatusInternalServerError)
		return
	}
	s.mu.Lock()
	s.att.silences = append(s.att.silences, sl)
	s.mu.Unlock()
	s.log.Info("silence added", "id", sl.ID, "job", sl.Job, "pattern", sl.Pattern, "until", sl.Until, "by", sl.By, "why", sl.Why)
	writeJSON(w, sl)
}

func (s *Service) handleUnsilence(w http.ResponseWriter, r *http.Request) {
	id := r.PathValue("id")
	s.mu.Lock()
	n := len(s.att.silences)
	s.att.silences = slices.DeleteFunc(s.att.silences, func(sl model.Silence) bool { return sl.ID == id })
	found := len(s.att.silences) < n
	s.mu.Unlock()
	if !found {
		http.Error(w, "no such silence: "+id, http.StatusNotFound)
		return
	}
	if err := s.st.DeleteSilence(id); err != nil {
		http.Error(w, err.Error(), http.StatusInternalServerError)
		return
	}
	writeJSON(w, map[string]string{"deleted": id})
}

func (s *Service) handleSilences(w http.ResponseWriter, _ *http.Request) {
	now := s.opts.Now()
	s.mu.Lock()
	active := slices.DeleteFunc(slices.Clone(s.att.silences), func(sl model.Silence) bool { return !now.Before(sl.Until) })
	s.mu.Unlock()
	writeJSON(w, map[string]any{"silences": active})
}

func (s *Service) handleAck(w http.ResponseWriter, r *http.Request) {
	id := r.PathValue("id")
	var req AckRequest
	if !decodeBody(w, r, &req) {
		return
	}
	if strings.TrimSpace(req.By) == "" {
		http.Error(w, "ack: say who acknowledges (by)", http.StatusBadRequest)
		return
	}
	found, err := s.st.HasFlag(id)
	if err != nil {
		http.Error(w, err.Error(), http.StatusInternalServerError)
		return
	}
	if !found {
		http.Error(w, "no such flag: "+id, http.StatusNotFound)
		return
	}
	a := model.Ack{Flag: id, By: req.By, Why: req.Why, At: s.opts.Now()}
	if err := s.st.PutAck(a); err != nil {
		http.Error(w, err.Error(), http.StatusInternalServerError)
		return
	}
	s.mu.Lock()
	s.att.acks[id] = a
	s.mu.Unlock()
	s.log.Info("flag acknowledged", "flag", id, "by", a.By, "why", a.Why)
	writeJSON(w, a)
}

// flagList is every stored flag, the active ones as they are now, marked
// with silences and acknowledgements, most recent first.
func (s *Service) flagList() ([]model.Flag, error) {
	stored, err := s.st.Flags()
	if err != nil {
		return nil, err
	}
	now := s.opts.Now()
	s.mu.Lock()
	live := map[string]model.Flag{}
	for _, j := range s.tr.Summaries() {
		for _, f := range j.ActiveFlags {
			live[f.ID] = f
		}
	}
	for i, f := range stored {
		if l, ok := live[f.ID]; ok && f.Active() {
			stored[i] = l
		}
	}
	s.att.mark(stored, now)
	s.mu.Unlock()
	slices.SortStableFunc(stored, func(a, b model.Flag) int { return b.Raised.Compare(a.Raised) })
	return stored, nil
}

// PatternInfo is one pattern in force, as GET /api/v1/patterns lists it;
// File is the pattern's file text, which "aggregator explain" parses.
type PatternInfo struct {
	Name     string `json:"name"`
	Title    string `json:"title"`
	Severity string `json:"severity"`
	Kind     string `json:"kind"`
	Source   string `json:"source"`
	File     string `json:"file"`
}

func (s *Service) handlePatterns(w http.ResponseWriter, _ *http.Request) {
	out := []PatternInfo{}
	if lib := s.opts.Tracker.Patterns; lib != nil {
		for _, p := range lib.Patterns() {
			text, err := p.Marshal()
			if err != nil {
				http.Error(w, fmt.Sprintf("pattern %s: %v", p.Name, err), http.StatusInternalServerError)
				return
			}
			out = append(out, PatternInfo{Name: p.Name, Title: p.Title, Severity: p.Severity.String(), Kind: p.Kind(), Source: p.Source, File: string(text)})
		}
	}
	writeJSON(w, map[string]any{"patterns": out})
}

// patternInfo lists the patterns in force for sluice_pattern_info.
func (s *Service) patternInfo() []export.PatternInfo {
	lib := s.opts.Tracker.Patterns
	if lib == nil {
		return nil
	}
	var out []export.PatternInfo
	for _, p := range lib.Patterns() {
		out = append(out, export.PatternInfo{Name: p.Name, Title: p.Title, Severity: p.Severity.String(), Advice: p.Advice})
	}
	return out
}
