// Package export turns one snapshot of the aggregator's model into
// Prometheus metrics. The model never touches Prometheus types; a
// [Collector] builds const metrics from a fresh [Snapshot] on every scrape.
//
// # Basics
//
// Names follow <namespace>_<subsystem>_<name>_<unit> with base units and
// _total on counters. Every per-job series carries the job's id as label
// job_id: Prometheus's own target label is job, and a job label of ours
// would be renamed exported_job on ingestion.
//
// # Bounded cardinality
//
// Per-job series exist only for running jobs that have an exported flag
// (active and not silenced) or are above normal in their live window. They
// are ranked most severe first and taken while their series fit in
// Snapshot.MaxJobSeries, a cap on per-job series (not jobs): first jobs
// with an exported flag of severity critical, then warning, then info (an
// unknown severity counts as info), then jobs whose highest live level is
// critical, then elevated; equal ranks go in job id order (byte-wise), so
// the same snapshot always gives the same cut. A silenced flag counts for
// nothing, and a flag's own Level does not rank it. sluice_job_series_dropped
// says how many qualifying jobs were left out at this scrape.
//
// Nothing is remembered between scrapes: a job that falls back to normal,
// loses its last flag or ends is absent from the next one. Per job there
// are two series per metric (rate and level), one node count, three per
// exported flag and one per pattern score of at least [MinPatternScore];
// flags are bounded by their reasons (one per metric, one per loaded
// pattern) and scores by the loaded patterns.
//
// # Caveats
//
// Per-job rates are per node (the mean over the job's reporting nodes), so
// they are gauges in bytes or operations per second, not counters.
package export

import (
	"cmp"
	"maps"
	"slices"
	"strings"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// Ingest holds the aggregator's ingest counters.
type Ingest struct {
	Accepted            map[string]uint64 // decoded messages, by kind
	Rejected            map[string]uint64 // by "kind/reason"
	Duplicates          uint64            // samples already applied
	SlowConsumerDropped uint64            // messages the client dropped because ingest fell behind
	StoreErrors         uint64            // failed store writes
	// StreamExpired counts stream messages the stream dropped (age, size)
	// before the aggregator read them.
	StreamExpired uint64
	// StreamPending is the stream messages not yet read; negative when
	// unknown (core NATS), and then not exported.
	StreamPending int64
	// CommitAge is the time since the last successful store write.
	CommitAge time.Duration
	// Rebuilt counts the samples read again after a restart to sum the
	// open windows again; RebuildMissing those the stream no longer held.
	Rebuilt, RebuildMissing uint64
	// StoreWritten is the bytes written to the state file since start-up.
	StoreWritten uint64
	// Pruned counts what was deleted of ended jobs past their retention,
	// by kind (jobs, windows, flags, acknowledgements).
	Pruned map[string]uint64
}

// NewIngest returns zeroed counters with their maps made.
func NewIngest() Ingest {
	return Ingest{Accepted: map[string]uint64{}, Rejected: map[string]uint64{}, Pruned: map[string]uint64{}, StreamPending: -1}
}

// Clone copies the counters.
func (in Ingest) Clone() Ingest {
	c := in
	c.Accepted = copyCounts(in.Accepted)
	c.Rejected = copyCounts(in.Rejected)
	c.Pruned = copyCounts(in.Pruned)
	return c
}

func copyCounts(m map[string]uint64) map[string]uint64 {
	c := make(map[string]uint64, len(m))
	for k, v := range m {
		c[k] = v
	}
	return c
}

// Snapshot is what one scrape reports.
type Snapshot struct {
	Ingest Ingest
	// Jobs are the running jobs, their flags decided (flagging.Attention);
	// an ended job is skipped.
	Jobs      []model.Summary
	Cuts      coding.Cuts
	Baseline  BaselineFigures
	Patterns  []PatternInfo // the pattern library in force
	Watermark time.Time     // latest interval end seen; zero leaves out the lag
	Now       time.Time
	Nodes     int // nodes heard from
	// MaxJobSeries caps the per-job series: jobs are taken most severe
	// first while their series fit; zero (or less) gives none, and every
	// qualifying job counts as dropped.
	MaxJobSeries int
	Agents       []model.AgentStatus // latest heartbeat per node
	// AgentShares is every CPU share the agents' heartbeats reported.
	AgentShares ShareHistogram
	// BrokerConnected is whether the aggregator's connection to its NATS
	// broker is up. The zero value reports it down (and so alerts), which
	// is the safe side for a caller that forgets to fill it in.
	BrokerConnected bool
}

// BaselineFigures is what the scrape says about the learned baseline.
type BaselineFigures struct {
	// Bases says, per metric, whether its cut points in force are learned
	// or seed.
	Bases coding.Bases
	// Windows and Idle count the non-idle and idle windows inside the
	// horizon, per metric.
	Windows, Idle [metric.Count]uint64
	Days          int       // days inside the horizon
	Newest        time.Time // start (UTC midnight) of the newest day; zero when none
	Rejected      uint64    // window values refused (NaN, negative)
}

// PatternInfo is one pattern in force, for sluice_pattern_info: what the
// alert rules read a flag's advice from.
type PatternInfo struct {
	Name, Title, Severity, Advice string
}

// Collector is a prometheus.Collector over snapshots.
type Collector struct {
	snapshot func() Snapshot
}

// NewCollector returns a collector that calls snapshot once per scrape.
func NewCollector(snapshot func() Snapshot) *Collector {
	return &Collector{snapshot: snapshot}
}

const ns = "sluice"

var (
	descAccepted  = prometheus.NewDesc(ns+"_ingest_messages_total", "Messages decoded from the bus, by kind.", []string{"kind"}, nil)
	descRejected  = prometheus.NewDesc(ns+"_ingest_rejected_total", "Messages rejected, by kind and reason (decode errors, duplicates, late or stale samples).", []string{"kind", "reason"}, nil)
	descDupes     = prometheus.NewDesc(ns+"_ingest_duplicates_total", "Samples whose (node, sequence) had already been applied.", nil, nil)
	descSlow      = prometheus.NewDesc(ns+"_ingest_slow_consumer_dropped_total", "Messages the NATS client dropped because ingest fell behind.", nil, nil)
	descStoreErr  = prometheus.NewDesc(ns+"_store_write_errors_total", "Failed batched writes to the state file.", nil, nil)
	descCommitAge = prometheus.NewDesc(ns+"_store_commit_age_seconds", "Time since the state file last took a batch: what a crash now would have the stream deliver again.", nil, nil)
	descExpired   = prometheus.NewDesc(ns+"_ingest_stream_expired_total", "Stream messages the stream dropped (its age or byte bound) before the aggregator read them: samples lost.", nil, nil)
	descRebuilt   = prometheus.NewDesc(ns+"_ingest_rebuild_samples_total", "Samples read again from the stream after a restart to sum the open windows again (the state file keeps them small).", nil, nil)
	descRebuildNo = prometheus.NewDesc(ns+"_ingest_rebuild_missing_total", "Samples to read again after a restart that the stream no longer held: the open windows of that moment miss them.", nil, nil)
	descWritten   = prometheus.NewDesc(ns+"_store_written_bytes_total", "Bytes written to the state file: the pages its commits wrote, and a meta page each.", nil, nil)
	descPruned    = prometheus.NewDesc(ns+"_store_pruned_total", "What was deleted of ended jobs past the state file's retention, by kind: jobs, windows, flags, acknowledgements.", []string{"kind"}, nil)
	descPending   = prometheus.NewDesc(ns+"_ingest_stream_pending_messages", "Stream messages not yet read by the aggregator.", nil, nil)
	descLag       = prometheus.NewDesc(ns+"_ingest_lag_seconds", "Wall-clock time minus the latest interval end seen in any sample.", nil, nil)
	descNodes     = prometheus.NewDesc(ns+"_nodes_known", "Nodes that have sent at least one sample.", nil, nil)
	descRunning   = prometheus.NewDesc(ns+"_jobs_running", "Running jobs, by their highest live-window level.", []string{"level"}, nil)
	descCutBytes  = prometheus.NewDesc(ns+"_cut_point_bytes_per_second", "Per-node cut point in force for a byte metric; basis is learned (baseline) or seed (configured).", []string{"metric", "level", "basis"}, nil)
	descCutOps    = prometheus.NewDesc(ns+"_cut_point_operations_per_second", "Per-node cut point in force for an operation metric; basis is learned (baseline) or seed (configured).", []string{"metric", "level", "basis"}, nil)
	descPatInfo   = prometheus.NewDesc(ns+"_pattern_info", "One series per pattern in force, always 1; its labels carry the title, severity and advice that alert annotations quote.", []string{"pattern", "title", "severity", "advice"}, nil)
	descBaseWin   = prometheus.NewDesc(ns+"_baseline_windows", "Non-idle job-windows inside the baseline horizon, per metric.", []string{"metric"}, nil)
	descBaseIdle  = prometheus.NewDesc(ns+"_baseline_idle_windows", "Idle job-windows inside the baseline horizon, per metric (left out of the quantiles).", []string{"metric"}, nil)
	descBaseDays  = prometheus.NewDesc(ns+"_baseline_day_sketches", "Days inside the baseline horizon that hold windows (one sketch set per day).", nil, nil)
	descBaseAge   = prometheus.NewDesc(ns+"_baseline_newest_day_age_seconds", "Time since the start (UTC midnight) of the newest baseline day.", nil, nil)
	descBaseBad   = prometheus.NewDesc(ns+"_baseline_rejected_values_total", "Window values the baseline refused (NaN or negative).", nil, nil)
	descBroker    = prometheus.NewDesc(ns+"_broker_connected", "Whether the aggregator is connected to its NATS broker (1) or not (0).", nil, nil)
	descJobBytes  = prometheus.NewDesc(ns+"_job_live_bytes_per_second", "A job's live-window rate of a byte metric, mean per node.", []string{"job_id", "metric"}, nil)
	descJobOps    = prometheus.NewDesc(ns+"_job_live_operations_per_second", "A job's live-window rate of an operation metric, mean per node.", []string{"job_id", "metric"}, nil)
	descJobLevel  = prometheus.NewDesc(ns+"_job_level", "A job's live-window level per metric: 0 normal, 1 elevated, 2 critical.", []string{"job_id", "metric"}, nil)
	descJobNodes  = prometheus.NewDesc(ns+"_job_nodes", "Nodes of a job reporting in its live window.", []string{"job_id"}, nil)
	descFlag      = prometheus.NewDesc(ns+"_job_flag_active", "An active, not silenced flag on a running job; always 1 while the flag lasts. Reason is high_rate:<metric> or pattern:<name>; pattern is empty on high-rate flags.", []string{"job_id", "reason", "pattern", "severity", "user", "name"}, nil)
	descFlagScore = prometheus.NewDesc(ns+"_job_flag_score", "Match score of an active flag, 0 to 1 (latest while active; 1 for a high-rate flag).", []string{"job_id", "reason"}, nil)
	descFlagSince = prometheus.NewDesc(ns+"_job_flag_since_timestamp_seconds", "When the condition behind an active flag began.", []string{"job_id", "reason"}, nil)
	descPattern   = prometheus.NewDesc(ns+"_job_pattern_score", "A job's latest match score against a problem pattern, 0 to 1; only scores of 0.5 or more are exported.", []string{"job_id", "pattern"}, nil)
	descDropped   = prometheus.NewDesc(ns+"_job_series_dropped", "Jobs that qualified for per-job series but were left out by the series cap at this scrape.", nil, nil)

	descAgentSeen    = prometheus.NewDesc(ns+"_agent_last_heartbeat_timestamp_seconds", "When a node's agent last sent a heartbeat (its own clock).", []string{"node"}, nil)
	descAgentCPU     = prometheus.NewDesc(ns+"_agent_cpu_seconds_total", "CPU time the node's agent has used since it started.", []string{"node"}, nil)
	descAgentShare   = prometheus.NewDesc(ns+"_agent_cpu_ratio", "Fraction of one core the node's agent used between its last two heartbeats.", []string{"node"}, nil)
	descAgentFleet   = prometheus.NewDesc(ns+"_agent_fleet_cpu_ratio", "The agents' CPU share (fraction of one core) as each heartbeat after an agent's first reports it; rate() of the buckets over a span gives the fleet's distribution in it.", nil, nil)
	descAgentRSS     = prometheus.NewDesc(ns+"_agent_resident_memory_bytes", "Resident memory of the node's agent.", []string{"node"}, nil)
	descAgentQueued  = prometheus.NewDesc(ns+"_agent_queued_samples", "Samples waiting in the node's outage queue.", []string{"node"}, nil)
	descAgentDropped = prometheus.NewDesc(ns+"_agent_dropped_samples_total", "Samples the node's agent dropped past its queue bound since it started.", []string{"node"}, nil)
	descSrcRead      = prometheus.NewDesc(ns+"_agent_source_read_seconds", "Mean time one read of a source takes on the node.", []string{"node", "source"}, nil)
	descSrcUp        = prometheus.NewDesc(ns+"_agent_source_up", "Whether the last read of a source on the node succeeded.", []string{"node", "source"}, nil)
	descSrcInst      = prometheus.NewDesc(ns+"_agent_source_instances", "Instances of a source found at its last read on the node.", []string{"node", "source"}, nil)
	descSrcBad       = prometheus.NewDesc(ns+"_agent_source_malformed_lines_total", "Counter lines a source skipped as malformed on the node since its agent started.", []string{"node", "source"}, nil)

	allDescs = []*prometheus.Desc{descAccepted, descRejected, descDupes, descSlow, descStoreErr, descCommitAge, descExpired, descRebuilt, descRebuildNo, descWritten, descPruned, descPending, descLag, descNodes, descRunning, descCutBytes, descCutOps, descPatInfo, descBaseWin, descBaseIdle, descBaseDays, descBaseAge, descBaseBad, descBroker, descJobBytes, descJobOps, descJobLevel, descJobNodes, descFlag, descFlagScore, descFlagSince, descPattern, descDropped,
		descAgentSeen, descAgentCPU, descAgentShare, descAgentFleet, descAgentRSS, descAgentQueued, descAgentDropped, descSrcRead, descSrcUp, descSrcInst, descSrcBad}
)

// FleetCPUBuckets are the upper bounds of the fleet CPU share histogram:
// from a hundredth of a percent of one core to five percent.
var FleetCPUBuckets = [8]float64{0.0001, 0.0005, 0.001, 0.002, 0.005, 0.01, 0.02, 0.05}

// Describe sends every descriptor the collector may emit.
func (c *Collector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range allDescs {
		ch <- d
	}
}

// Collect emits the metrics of one fresh snapshot.
func (c *Collector) Collect(ch chan<- prometheus.Metric) {
	s := c.snapshot()
	counter := func(d *prometheus.Desc, v uint64, labels ...string) {
		ch <- constMetric(d, prometheus.CounterValue, float64(v), labels...)
	}
	gauge := func(d *prometheus.Desc, v float64, labels ...string) {
		ch <- constMetric(d, prometheus.GaugeValue, v, labels...)
	}
	for kind, n := range s.Ingest.Accepted {
		counter(descAccepted, n, kind)
	}
	for key, n := range s.Ingest.Rejected {
		kind, reason := splitKey(key)
		counter(descRejected, n, kind, reason)
	}
	counter(descDupes, s.Ingest.Duplicates)
	counter(descSlow, s.Ingest.SlowConsumerDropped)
	counter(descStoreErr, s.Ingest.StoreErrors)
	gauge(descCommitAge, s.Ingest.CommitAge.Seconds())
	counter(descExpired, s.Ingest.StreamExpired)
	counter(descRebuilt, s.Ingest.Rebuilt)
	counter(descRebuildNo, s.Ingest.RebuildMissing)
	counter(descWritten, s.Ingest.StoreWritten)
	for _, kind := range []string{"jobs", "windows", "flags", "acknowledgements"} {
		counter(descPruned, s.Ingest.Pruned[kind], kind)
	}
	if s.Ingest.StreamPending >= 0 {
		gauge(descPending, float64(s.Ingest.StreamPending))
	}
	if !s.Watermark.IsZero() {
		gauge(descLag, s.Now.Sub(s.Watermark).Seconds())
	}
	gauge(descNodes, float64(s.Nodes))
	gauge(descBroker, boolGauge(s.BrokerConnected))
	c.collectCuts(s.Cuts, s.Baseline.Bases, gauge)
	collectBaseline(s, counter, gauge)
	for _, p := range s.Patterns {
		gauge(descPatInfo, 1, p.Name, text(p.Title), p.Severity, text(strings.Join(strings.Fields(p.Advice), " ")))
	}
	c.collectJobs(s, gauge)
	collectAgents(s.Agents, ch, counter, gauge)
	ch <- s.AgentShares.metric()
}

func collectAgents(agents []model.AgentStatus, ch chan<- prometheus.Metric, counter func(*prometheus.Desc, uint64, ...string), gauge func(*prometheus.Desc, float64, ...string)) {
	for _, a := range agents {
		gauge(descAgentSeen, float64(a.LastSeen.UnixNano())/1e9, a.Node)
		ch <- constMetric(descAgentCPU, prometheus.CounterValue, a.CPUSeconds, a.Node)
		gauge(descAgentShare, a.CPUShare, a.Node)
		gauge(descAgentRSS, float64(a.RSSBytes), a.Node)
		gauge(descAgentQueued, float64(a.Queued), a.Node)
		counter(descAgentDropped, a.Dropped, a.Node)
		for _, src := range a.Sources {
			gauge(descSrcRead, src.MicrosPerRead/1e6, a.Node, src.Name)
			gauge(descSrcUp, boolGauge(src.OK), a.Node, src.Name)
			gauge(descSrcInst, float64(src.Instances), a.Node, src.Name)
			counter(descSrcBad, src.Malformed, a.Node, src.Name)
		}
	}
}

// ShareHistogram counts the agents' CPU shares, one observation per
// heartbeat after an agent's first, for ever: its counts only grow, as a
// Prometheus histogram's must.
type ShareHistogram struct {
	Count   uint64
	Sum     float64
	Buckets [8]uint64 // per FleetCPUBuckets, each the observations at or below its bound
}

// Observe counts one share.
func (h *ShareHistogram) Observe(share float64) {
	h.Count++
	h.Sum += share
	for i, b := range FleetCPUBuckets {
		if share <= b {
			h.Buckets[i]++
		}
	}
}

func (h ShareHistogram) metric() prometheus.Metric {
	buckets := make(map[float64]uint64, len(FleetCPUBuckets))
	for i, b := range FleetCPUBuckets {
		buckets[b] = h.Buckets[i]
	}
	return prometheus.MustNewConstHistogram(descAgentFleet, h.Count, h.Sum, buckets)
}

// constMetric returns a const metric, or, when a label value is refused
// (not valid UTF-8, say in a node name), an invalid metric carrying the
// error: the registry reports it and the rest of the scrape goes on, where
// MustNewConstMetric would panic inside the scrape.
func constMetric(d *prometheus.Desc, t prometheus.ValueType, v float64, labels ...string) prometheus.Metric {
	m, err := prometheus.NewConstMetric(d, t, v, labels...)
	if err != nil {
		return prometheus.NewInvalidMetric(d, err)
	}
	return m
}

func boolGauge(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

func splitKey(key string) (kind, reason string) {
	for i := range len(key) {
		if key[i] == '/' {
			return key[:i], key[i+1:]
		}
	}
	return key, "other"
}

func (c *Collector) collectCuts(cuts coding.Cuts, bases coding.Bases, gauge func(*prometheus.Desc, float64, ...string)) {
	for _, id := range metric.All() {
		d := descCutOps
		if id.IsBytes() {
			d = descCutBytes
		}
		basis := bases[id].String()
		gauge(d, cuts[id].Elevated, id.String(), coding.Elevated.String(), basis)
		gauge(d, cuts[id].Critical, id.String(), coding.Critical.String(), basis)
	}
}

func collectBaseline(s Snapshot, counter func(*prometheus.Desc, uint64, ...string), gauge func(*prometheus.Desc, float64, ...string)) {
	b := s.Baseline
	for _, id := range metric.All() {
		gauge(descBaseWin, float64(b.Windows[id]), id.String())
		gauge(descBaseIdle, float64(b.Idle[id]), id.String())
	}
	gauge(descBaseDays, float64(b.Days))
	if !b.Newest.IsZero() {
		gauge(descBaseAge, s.Now.Sub(b.Newest).Seconds())
	}
	counter(descBaseBad, b.Rejected)
}

// MinPatternScore is the lowest pattern score exported as
// sluice_job_pattern_score. A lower score says only that the job does not
// look like the pattern, which is true of nearly every job and pattern;
// exporting it would multiply the per-job series by the number of patterns
// and tell nothing.
const MinPatternScore = 0.5

// Ranks of a job for the series cap, most severe last; see the package
// documentation.
const (
	rankNone         = iota // normal and no exported flag: no per-job series
	rankElevated            // highest live level elevated
	rankCritical            // highest live level critical
	rankFlagInfo            // an exported flag of severity info (or unknown)
	rankFlagWarning         // an exported flag of severity warning
	rankFlagCritical        // an exported flag of severity critical
)

// rank is how severe a job is for the series cap: its most severe exported
// flag's severity, else its highest live level.
func rank(j *model.Summary) int {
	r := rankNone
	switch j.LiveLevels.Max() {
	case coding.Elevated:
		r = rankElevated
	case coding.Critical:
		r = rankCritical
	}
	for _, f := range j.ActiveFlags {
		if exported(f) {
			r = max(r, severityRank(f.Severity))
		}
	}
	return r
}

func severityRank(severity model.Severity) int {
	switch severity {
	case model.SeverityCritical:
		return rankFlagCritical
	case model.SeverityWarning:
		return rankFlagWarning
	default:
		return rankFlagInfo
	}
}

// exported reports whether a flag is exported: active and not silenced.
func exported(f model.Flag) bool { return f.State == model.FlagActive && f.Active() }

// ranked is a job that qualifies for per-job series, with its rank.
type ranked struct {
	rank int
	job  *model.Summary
}

func (c *Collector) collectJobs(s Snapshot, gauge func(*prometheus.Desc, float64, ...string)) {
	var byLevel [3]int
	var notable []ranked
	for i := range s.Jobs {
		j := &s.Jobs[i]
		if !j.Running() {
			continue
		}
		byLevel[j.LiveLevels.Max()]++
		if r := rank(j); r > rankNone {
			notable = append(notable, ranked{r, j})
		}
	}
	for l, n := range byLevel {
		gauge(descRunning, float64(n), coding.Level(l).String())
	}
	slices.SortFunc(notable, func(a, b ranked) int {
		return cmp.Or(cmp.Compare(b.rank, a.rank), cmp.Compare(a.job.ID, b.job.ID))
	})
	// The cap counts series, not jobs: most severe first, as long as the
	// next job's series fit.
	keep, budget := 0, s.MaxJobSeries
	for _, r := range notable {
		n := seriesOf(r.job)
		if n > budget {
			break
		}
		budget -= n
		keep++
	}
	gauge(descDropped, float64(len(notable)-keep))
	// The registry sorts each family by label values. Emitting the kept
	// jobs by id, and each job's series by metric and pattern name, hands
	// it families (nearly) in order, which its sort passes over quickly: a
	// third less time per scrape of 5,000 jobs.
	kept := notable[:keep]
	slices.SortFunc(kept, func(a, b ranked) int { return cmp.Compare(a.job.ID, b.job.ID) })
	byName := metric.All()
	slices.SortFunc(byName, func(a, b metric.ID) int { return cmp.Compare(a.String(), b.String()) })
	for _, r := range kept {
		emitJob(r.job, byName, gauge)
	}
}

// seriesOf is the number of series emitJob emits for j.
func seriesOf(j *model.Summary) int {
	n := 1 // nodes
	for _, l := range j.LiveLevels {
		if l > coding.Normal {
			n += 2
		}
	}
	for _, f := range j.ActiveFlags {
		if exported(f) {
			n += 3
		}
	}
	for _, score := range j.PatternScores {
		if score >= MinPatternScore {
			n++
		}
	}
	return n
}

// emitJob emits one job's series, its metrics in the order of ids: the
// live rate and level of each metric above normal (a normal metric says
// nothing the job's absence would not), the node count, three series per
// exported flag and the pattern scores from MinPatternScore up.
func emitJob(j *model.Summary, ids []metric.ID, gauge func(*prometheus.Desc, float64, ...string)) {
	for _, id := range ids {
		if j.LiveLevels[id] == coding.Normal {
			continue
		}
		d := descJobOps
		if id.IsBytes() {
			d = descJobBytes
		}
		gauge(d, j.Live[id], j.ID, id.String())
		gauge(descJobLevel, float64(j.LiveLevels[id]), j.ID, id.String())
	}
	gauge(descJobNodes, float64(j.NodesSeen), j.ID)
	for _, f := range j.ActiveFlags {
		if !exported(f) {
			continue
		}
		// User, name and summary are free text from the scheduler and the
		// tracker; a stray byte is replaced rather than losing the flag.
		reason := f.Reason.String()
		gauge(descFlag, 1, j.ID, reason, f.Pattern, f.Severity.String(), text(j.User), text(j.Name))
		gauge(descFlagScore, f.Score, j.ID, reason)
		gauge(descFlagSince, float64(f.Since.UnixNano())/1e9, j.ID, reason)
	}
	for _, p := range slices.Sorted(maps.Keys(j.PatternScores)) {
		if score := j.PatternScores[p]; score >= MinPatternScore {
			gauge(descPattern, score, j.ID, p)
		}
	}
}

// text makes s a valid label value, replacing bytes that are not UTF-8.
func text(s string) string { return strings.ToValidUTF8(s, "\uFFFD") }
