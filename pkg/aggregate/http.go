package aggregate

import (
	"encoding/json"
	"net/http"
	"slices"
	"strings"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"sluice/pkg/export"
	"sluice/pkg/model"
)

// Registry returns a new registry holding the service's collector and the
// process and Go runtime collectors. It is made per service, never global.
func (s *Service) Registry() *prometheus.Registry {
	reg := prometheus.NewRegistry()
	reg.MustRegister(
		export.NewCollector(s.Snapshot),
		collectors.NewProcessCollector(collectors.ProcessCollectorOpts{Namespace: "sluice_aggregator"}),
		collectors.NewGoCollector(),
	)
	return reg
}

// Snapshot copies what one scrape reports.
func (s *Service) Snapshot() export.Snapshot {
	s.mu.Lock()
	defer s.mu.Unlock()
	var running []model.Summary
	for _, j := range s.tr.Summaries() {
		if j.State == "running" {
			running = append(running, j)
		}
	}
	s.att.markJobs(running, s.opts.Now())
	return export.Snapshot{
		Agents:          s.agentsLocked(),
		Ingest:          s.ingest.Clone(),
		Jobs:            running,
		Cuts:            s.tr.Coding().Levels,
		Baseline:        s.learn.exported(),
		Patterns:        s.patternInfo(),
		Watermark:       s.tr.Watermark(),
		Now:             s.opts.Now(),
		Nodes:           s.tr.Nodes(),
		MaxJobSeries:    s.opts.MaxJobSeries,
		BrokerConnected: s.brokerConnected(),
	}
}

// agentsLocked copies the agents' latest status; the caller holds mu.
func (s *Service) agentsLocked() []model.Agent {
	agents := make([]model.Agent, 0, len(s.agents))
	for _, a := range s.agents {
		agents = append(agents, a)
	}
	return agents
}

// JobDetail is a job's summary with its closed windows, as
// /api/v1/jobs/{id} returns it.
type JobDetail struct {
	model.Summary
	ClosedWindows []model.Window `json:"closed_windows"`
}

func (s *Service) handler() http.Handler {
	mux := http.NewServeMux()
	mux.Handle("GET /metrics", promhttp.HandlerFor(s.Registry(), promhttp.HandlerOpts{ErrorHandling: promhttp.ContinueOnError}))
	mux.HandleFunc("GET /healthz", func(w http.ResponseWriter, _ *http.Request) {
		s.mu.Lock()
		err := s.flushErr
		s.mu.Unlock()
		if err != nil {
			http.Error(w, "store: "+err.Error(), http.StatusServiceUnavailable)
			return
		}
		_, _ = w.Write([]byte("ok\n"))
	})
	mux.HandleFunc("GET /api/v1/jobs", func(w http.ResponseWriter, r *http.Request) {
		s.mu.Lock()
		jobs := s.tr.Summaries()
		s.att.markJobs(jobs, s.opts.Now())
		s.mu.Unlock()
		if r.URL.Query().Get("state") == "running" {
			jobs = slices.DeleteFunc(jobs, func(j model.Summary) bool { return j.State != "running" })
		}
		writeJSON(w, map[string]any{"jobs": jobs})
	})
	mux.HandleFunc("GET /api/v1/jobs/{id}", func(w http.ResponseWriter, r *http.Request) {
		id := r.PathValue("id")
		s.mu.Lock()
		sum, ok := s.tr.Job(id)
		s.att.mark(sum.ActiveFlags, s.opts.Now())
		s.mu.Unlock()
		if !ok {
			http.Error(w, "no such job: "+id, http.StatusNotFound)
			return
		}
		ws, err := s.st.Windows(id)
		if err != nil {
			http.Error(w, err.Error(), http.StatusInternalServerError)
			return
		}
		writeJSON(w, JobDetail{Summary: sum, ClosedWindows: ws})
	})
	mux.HandleFunc("GET /api/v1/agents", func(w http.ResponseWriter, _ *http.Request) {
		s.mu.Lock()
		agents := s.agentsLocked()
		s.mu.Unlock()
		slices.SortFunc(agents, func(a, b model.Agent) int { return strings.Compare(a.Node, b.Node) })
		writeJSON(w, map[string]any{"agents": agents})
	})
	mux.HandleFunc("GET /api/v1/baseline", func(w http.ResponseWriter, _ *http.Request) {
		s.mu.Lock()
		rep := s.learn.report()
		s.mu.Unlock()
		writeJSON(w, rep)
	})
	mux.HandleFunc("GET /api/v1/baseline/export", s.handleExport)
	mux.HandleFunc("POST /api/v1/baseline/import", s.handleImport)
	mux.HandleFunc("GET /api/v1/patterns", s.handlePatterns)
	mux.HandleFunc("POST /api/v1/silences", s.handleSilence)
	mux.HandleFunc("GET /api/v1/silences", s.handleSilences)
	mux.HandleFunc("DELETE /api/v1/silences/{id}", s.handleUnsilence)
	mux.HandleFunc("POST /api/v1/flags/{id}/ack", s.handleAck)
	mux.HandleFunc("GET /api/v1/flags", func(w http.ResponseWriter, _ *http.Request) {
		fs, err := s.flagList()
		if err != nil {
			http.Error(w, err.Error(), http.StatusInternalServerError)
			return
		}
		writeJSON(w, map[string]any{"flags": fs})
	})
	return mux
}

func writeJSON(w http.ResponseWriter, v any) {
	w.Header().Set("Content-Type", "application/json")
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	_ = enc.Encode(v)
}
