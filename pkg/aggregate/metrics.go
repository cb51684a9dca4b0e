package aggregate

import (
	"net/http"

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
		collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}),
		collectors.NewGoCollector(),
	)
	return reg
}

func (s *Service) metricsHandler() http.Handler {
	return promhttp.HandlerFor(s.Registry(), promhttp.HandlerOpts{ErrorHandling: promhttp.ContinueOnError})
}

// Snapshot copies what one scrape reports; the flags' states are decided
// by the same flagging.Attention the API asks.
func (s *Service) Snapshot() export.Snapshot {
	var in export.Ingest
	if sub := s.sub.Load(); sub != nil {
		c := sub.Counts()
		in = export.Ingest{Accepted: c.Taken, Rejected: c.Refused, Duplicates: c.Duplicates, SlowConsumerDropped: c.SlowConsumerDropped,
			StreamExpired: c.Expired, StreamPending: c.Pending, Rebuilt: c.Rebuilt, RebuildMissing: c.RebuildMissing}
	} else {
		in = export.NewIngest()
		in.StreamPending = -1
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	in.StoreErrors = s.storeErrors
	if s.st != nil {
		in.StoreWritten = uint64(s.st.Written())
	}
	in.Pruned = map[string]uint64{"jobs": uint64(s.pruned.Jobs), "windows": uint64(s.pruned.Windows),
		"flags": uint64(s.pruned.Flags), "acknowledgements": uint64(s.pruned.Acks)}
	now := s.opts.Now()
	in.CommitAge = now.Sub(s.committed)
	var running []model.Summary
	for _, j := range s.tr.Summaries() {
		if j.Running() {
			s.att.DecideAll(j.ActiveFlags, now)
			running = append(running, j)
		}
	}
	return export.Snapshot{
		Agents:          s.agentsLocked(),
		AgentShares:     s.shares,
		Ingest:          in,
		Jobs:            running,
		Cuts:            s.tr.Coding().Levels,
		Baseline:        s.learn.exported(),
		Patterns:        s.patternInfo(),
		Watermark:       s.tr.Watermark(),
		Now:             now,
		Nodes:           s.tr.Nodes(),
		MaxJobSeries:    s.opts.MaxJobSeries,
		BrokerConnected: s.brokerConnected(),
	}
}

// agentsLocked copies the agents' latest status; the caller holds mu.
func (s *Service) agentsLocked() []model.AgentStatus {
	agents := make([]model.AgentStatus, 0, len(s.agents))
	for _, a := range s.agents {
		agents = append(agents, a)
	}
	return agents
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
