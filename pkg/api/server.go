package api

import (
	"encoding/json"
	"errors"
	"fmt"
	"net/http"
	"time"

	"sluice/pkg/baseline"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

// Backend is what the handlers ask; the aggregator service implements it.
// Errors wrap ErrNotFound or ErrBadRequest where those apply.
type Backend interface {
	// Jobs lists the tracked jobs (running only, if running), their flags
	// decided.
	Jobs(running bool) []model.Summary
	Job(id string) (JobDetail, error)
	Explain(id string) (JobExplanation, error)
	Flags(f FlagFilter) ([]model.Flag, error)
	Acknowledge(id, by, why string) (model.Ack, error)
	// Silence silences the flags of job and pattern (either may be
	// empty, not both) for d.
	Silence(job, pattern string, d time.Duration, by, why string) (model.Silence, error)
	Unsilence(id string) error
	Silences() []model.Silence
	Agents() []model.AgentStatus
	Patterns() []*pattern.Pattern
	Baseline() BaselineReport
	// BaselineDays copies the stored days of one origin, or of both merged
	// per day when origin is empty, in day order.
	BaselineDays(origin baseline.Origin) []DatedDay
	// ImportBaseline replaces the import origin of each day given.
	ImportBaseline(days map[baseline.DayKey]*baseline.Day) error
	// Health is nil while the state file can be written.
	Health() error
}

// DatedDay is a copy of one day's windows.
type DatedDay struct {
	Day baseline.DayKey
	D   *baseline.Day
}

// Handler serves the API of b, /healthz, and metrics (if not nil) at
// /metrics.
func Handler(b Backend, metrics http.Handler) http.Handler {
	s := &server{b: b}
	mux := http.NewServeMux()
	if metrics != nil {
		mux.Handle("GET /metrics", metrics)
	}
	mux.HandleFunc("GET /healthz", s.health)
	mux.HandleFunc("GET /api/v1/jobs", s.jobs)
	mux.HandleFunc("GET /api/v1/jobs/{id}", s.job)
	mux.HandleFunc("GET /api/v1/jobs/{id}/explain", s.explain)
	mux.HandleFunc("GET /api/v1/agents", s.agents)
	mux.HandleFunc("GET /api/v1/baseline", s.baseline)
	mux.HandleFunc("GET /api/v1/baseline/export", s.exportBaseline)
	mux.HandleFunc("POST /api/v1/baseline/import", s.importBaseline)
	mux.HandleFunc("GET /api/v1/patterns", s.patterns)
	mux.HandleFunc("GET /api/v1/patterns/{name}", s.pattern)
	mux.HandleFunc("GET /api/v1/flags", s.flags)
	mux.HandleFunc("POST /api/v1/flags/{id}/ack", s.ack)
	mux.HandleFunc("GET /api/v1/silences", s.silences)
	mux.HandleFunc("POST /api/v1/silences", s.silence)
	mux.HandleFunc("DELETE /api/v1/silences/{id}", s.unsilence)
	return mux
}

type server struct{ b Backend }

func (s *server) health(w http.ResponseWriter, _ *http.Request) {
	if err := s.b.Health(); err != nil {
		http.Error(w, "store: "+err.Error(), http.StatusServiceUnavailable)
		return
	}
	_, _ = w.Write([]byte("ok\n"))
}

func (s *server) jobs(w http.ResponseWriter, r *http.Request) {
	var running bool
	switch st := r.URL.Query().Get("state"); st {
	case "", "all":
	case "running":
		running = true
	default:
		fail(w, fmt.Errorf("%w: state %q: want running or all", ErrBadRequest, st))
		return
	}
	writeJSON(w, JobList{Jobs: s.b.Jobs(running)})
}

func (s *server) job(w http.ResponseWriter, r *http.Request) {
	d, err := s.b.Job(r.PathValue("id"))
	if err != nil {
		fail(w, err)
		return
	}
	writeJSON(w, d)
}

func (s *server) explain(w http.ResponseWriter, r *http.Request) {
	x, err := s.b.Explain(r.PathValue("id"))
	if err != nil {
		fail(w, err)
		return
	}
	writeJSON(w, x)
}

func (s *server) agents(w http.ResponseWriter, _ *http.Request) {
	writeJSON(w, AgentList{Agents: s.b.Agents()})
}

func (s *server) baseline(w http.ResponseWriter, _ *http.Request) {
	writeJSON(w, s.b.Baseline())
}

func (s *server) patterns(w http.ResponseWriter, _ *http.Request) {
	out := PatternList{Patterns: []PatternFile{}}
	for _, p := range s.b.Patterns() {
		ap, err := patternOf(p)
		if err != nil {
			fail(w, err)
			return
		}
		out.Patterns = append(out.Patterns, ap)
	}
	writeJSON(w, out)
}

func (s *server) pattern(w http.ResponseWriter, r *http.Request) {
	name := r.PathValue("name")
	for _, p := range s.b.Patterns() {
		if p.Name == name {
			ap, err := patternOf(p)
			if err != nil {
				fail(w, err)
				return
			}
			writeJSON(w, ap)
			return
		}
	}
	fail(w, fmt.Errorf("%w: no pattern %q in force", ErrNotFound, name))
}

func patternOf(p *pattern.Pattern) (PatternFile, error) {
	text, err := p.Marshal()
	if err != nil {
		return PatternFile{}, fmt.Errorf("pattern %s: %w", p.Name, err)
	}
	return PatternFile{Name: p.Name, Title: p.Title, Severity: p.Severity, Kind: p.Kind(), Source: p.Source, File: string(text)}, nil
}

func (s *server) flags(w http.ResponseWriter, r *http.Request) {
	f, err := parseFlagFilter(r)
	if err != nil {
		fail(w, err)
		return
	}
	fs, err := s.b.Flags(f)
	if err != nil {
		fail(w, err)
		return
	}
	writeJSON(w, FlagList{Flags: fs})
}

func parseFlagFilter(r *http.Request) (FlagFilter, error) {
	q := r.URL.Query()
	f := FlagFilter{Job: q.Get("job"), Pattern: q.Get("pattern")}
	if v := q.Get("state"); v != "" {
		st, err := model.ParseFlagState(v)
		if err != nil {
			return f, fmt.Errorf("%w: %v; want active, silenced or cleared", ErrBadRequest, err)
		}
		f.State = &st
	}
	if v := q.Get("severity"); v != "" {
		sv, err := model.ParseSeverity(v)
		if err != nil {
			return f, fmt.Errorf("%w: %v", ErrBadRequest, err)
		}
		f.Severity = &sv
	}
	return f, nil
}

func (s *server) ack(w http.ResponseWriter, r *http.Request) {
	var req AckRequest
	if !decodeBody(w, r, &req) {
		return
	}
	a, err := s.b.Acknowledge(r.PathValue("id"), req.By, req.Why)
	if err != nil {
		fail(w, err)
		return
	}
	writeJSON(w, a)
}

func (s *server) silences(w http.ResponseWriter, _ *http.Request) {
	writeJSON(w, SilenceList{Silences: s.b.Silences()})
}

func (s *server) silence(w http.ResponseWriter, r *http.Request) {
	var req SilenceRequest
	if !decodeBody(w, r, &req) {
		return
	}
	d, err := ParseDuration(req.For)
	if err != nil {
		fail(w, fmt.Errorf("%w: silence for: %v", ErrBadRequest, err))
		return
	}
	sl, err := s.b.Silence(req.Job, req.Pattern, d, req.By, req.Why)
	if err != nil {
		fail(w, err)
		return
	}
	writeJSON(w, sl)
}

func (s *server) unsilence(w http.ResponseWriter, r *http.Request) {
	id := r.PathValue("id")
	if err := s.b.Unsilence(id); err != nil {
		fail(w, err)
		return
	}
	writeJSON(w, map[string]string{"deleted": id})
}

// decodeBody reads a small JSON body into v, refusing unknown fields.
func decodeBody(w http.ResponseWriter, r *http.Request, v any) bool {
	dec := json.NewDecoder(http.MaxBytesReader(w, r.Body, 64<<10))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		http.Error(w, "bad request body: "+err.Error(), http.StatusBadRequest)
		return false
	}
	return true
}

// fail answers err with the status its kind calls for.
func fail(w http.ResponseWriter, err error) {
	status := http.StatusInternalServerError
	switch {
	case errors.Is(err, ErrNotFound):
		status = http.StatusNotFound
	case errors.Is(err, ErrBadRequest):
		status = http.StatusBadRequest
	}
	http.Error(w, err.Error(), status)
}

func writeJSON(w http.ResponseWriter, v any) {
	w.Header().Set("Content-Type", "application/json")
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	_ = enc.Encode(v)
}
