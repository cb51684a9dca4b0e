// Package export turns one snapshot of the aggregator's model into
// Prometheus metrics. The model never touches Prometheus types; a
// [Collector] builds const metrics from a fresh [Snapshot] on every scrape.
//
// # Basics
//
// Names follow <namespace>_<subsystem>_<name>_<unit> with base units and
// _total on counters. Per-job series exist only for running jobs that are
// flagged or above normal in their live window, most severe first, capped
// at Snapshot.MaxJobSeries; how many were left out is itself a metric.
//
// # Caveats
//
// Per-job rates are per node (the mean over the job's reporting nodes), so
// they are gauges in bytes or operations per second, not counters.
package export

import (
	"cmp"
	"slices"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"sluice/pkg/level"
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
}

// NewIngest returns zeroed counters with their maps made.
func NewIngest() Ingest {
	return Ingest{Accepted: map[string]uint64{}, Rejected: map[string]uint64{}}
}

// Clone copies the counters.
func (in Ingest) Clone() Ingest {
	c := in
	c.Accepted = maps(in.Accepted)
	c.Rejected = maps(in.Rejected)
	return c
}

func maps(m map[string]uint64) map[string]uint64 {
	c := make(map[string]uint64, len(m))
	for k, v := range m {
		c[k] = v
	}
	return c
}

// Snapshot is what one scrape reports.
type Snapshot struct {
	Ingest       Ingest
	Jobs         []model.Summary // running jobs
	Cuts         level.Cuts
	Baseline     Baseline
	Watermark    time.Time // latest interval end seen
	Now          time.Time
	Nodes        int // nodes heard from
	MaxJobSeries int
	Agents       []model.Agent // latest heartbeat per node
}

// Baseline is what the scrape says about the learned baseline.
type Baseline struct {
	// Sources says, per metric, whether its cut points in force are
	// "learned" or "seed".
	Sources [metric.Count]string
	// Windows and Idle count the non-idle and idle windows inside the
	// horizon, per metric.
	Windows, Idle [metric.Count]uint64
	Days          int       // days inside the horizon
	Newest        time.Time // start (UTC midnight) of the newest day; zero when none
	Rejected      uint64    // window values refused (NaN, negative)
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
	descLag       = prometheus.NewDesc(ns+"_ingest_lag_seconds", "Wall-clock time minus the latest interval end seen in any sample.", nil, nil)
	descNodes     = prometheus.NewDesc(ns+"_nodes_known", "Nodes that have sent at least one sample.", nil, nil)
	descRunning   = prometheus.NewDesc(ns+"_jobs_running", "Running jobs, by their highest live-window level.", []string{"level"}, nil)
	descCutBytes  = prometheus.NewDesc(ns+"_cut_point_bytes_per_second", "Per-node cut point in force for a byte metric; source is learned (baseline) or seed (configured).", []string{"metric", "level", "source"}, nil)
	descCutOps    = prometheus.NewDesc(ns+"_cut_point_operations_per_second", "Per-node cut point in force for an operation metric; source is learned (baseline) or seed (configured).", []string{"metric", "level", "source"}, nil)
	descBaseWin   = prometheus.NewDesc(ns+"_baseline_windows", "Non-idle job-windows inside the baseline horizon, per metric.", []string{"metric"}, nil)
	descBaseIdle  = prometheus.NewDesc(ns+"_baseline_idle_windows", "Idle job-windows inside the baseline horizon, per metric (left out of the quantiles).", []string{"metric"}, nil)
	descBaseDays  = prometheus.NewDesc(ns+"_baseline_day_sketches", "Days inside the baseline horizon that hold windows (one sketch set per day).", nil, nil)
	descBaseAge   = prometheus.NewDesc(ns+"_baseline_newest_day_age_seconds", "Time since the start (UTC midnight) of the newest baseline day.", nil, nil)
	descBaseBad   = prometheus.NewDesc(ns+"_baseline_rejected_values_total", "Window values the baseline refused (NaN or negative).", nil, nil)
	descJobBytes  = prometheus.NewDesc(ns+"_job_live_bytes_per_second", "A job's live-window rate of a byte metric, mean per node.", []string{"job", "metric"}, nil)
	descJobOps    = prometheus.NewDesc(ns+"_job_live_operations_per_second", "A job's live-window rate of an operation metric, mean per node.", []string{"job", "metric"}, nil)
	descJobLevel  = prometheus.NewDesc(ns+"_job_level", "A job's live-window level per metric: 0 normal, 1 elevated, 2 critical.", []string{"job", "metric"}, nil)
	descJobNodes  = prometheus.NewDesc(ns+"_job_nodes", "Nodes of a job reporting in its live window.", []string{"job"}, nil)
	descFlag      = prometheus.NewDesc(ns+"_job_flag_active", "An active flag on a running job; always 1 while the flag lasts.", []string{"job", "reason", "severity", "user", "name"}, nil)
	descFlagSince = prometheus.NewDesc(ns+"_job_flag_since_timestamp_seconds", "When the condition behind an active flag began.", []string{"job", "reason"}, nil)
	descDropped   = prometheus.NewDesc(ns+"_job_series_capped", "Jobs that qualified for per-job series but were left out by the series cap.", nil, nil)

	descAgentSeen    = prometheus.NewDesc(ns+"_agent_last_heartbeat_timestamp_seconds", "When a node's agent last sent a heartbeat (its own clock).", []string{"node"}, nil)
	descAgentCPU     = prometheus.NewDesc(ns+"_agent_cpu_seconds_total", "CPU time the node's agent has used since it started.", []string{"node"}, nil)
	descAgentShare   = prometheus.NewDesc(ns+"_agent_cpu_ratio", "Fraction of one core the node's agent used between its last two heartbeats.", []string{"node"}, nil)
	descAgentFleet   = prometheus.NewDesc(ns+"_agent_fleet_cpu_ratio", "Distribution over nodes of the agents' CPU share (fraction of one core).", nil, nil)
	descAgentRSS     = prometheus.NewDesc(ns+"_agent_resident_memory_bytes", "Resident memory of the node's agent.", []string{"node"}, nil)
	descAgentQueued  = prometheus.NewDesc(ns+"_agent_queued_samples", "Samples waiting in the node's outage queue.", []string{"node"}, nil)
	descAgentDropped = prometheus.NewDesc(ns+"_agent_dropped_samples_total", "Samples the node's agent dropped past its queue bound since it started.", []string{"node"}, nil)
	descSrcRead      = prometheus.NewDesc(ns+"_agent_source_read_seconds", "Mean time one read of a source takes on the node.", []string{"node", "source"}, nil)
	descSrcUp        = prometheus.NewDesc(ns+"_agent_source_up", "Whether the last read of a source on the node succeeded.", []string{"node", "source"}, nil)
	descSrcInst      = prometheus.NewDesc(ns+"_agent_source_instances", "Instances of a source found at its last read on the node.", []string{"node", "source"}, nil)
	descSrcBad       = prometheus.NewDesc(ns+"_agent_source_malformed_lines_total", "Counter lines a source skipped as malformed on the node since its agent started.", []string{"node", "source"}, nil)

	allDescs = []*prometheus.Desc{descAccepted, descRejected, descDupes, descSlow, descStoreErr, descLag, descNodes, descRunning, descCutBytes, descCutOps, descBaseWin, descBaseIdle, descBaseDays, descBaseAge, descBaseBad, descJobBytes, descJobOps, descJobLevel, descJobNodes, descFlag, descFlagSince, descDropped,
		descAgentSeen, descAgentCPU, descAgentShare, descAgentFleet, descAgentRSS, descAgentQueued, descAgentDropped, descSrcRead, descSrcUp, descSrcInst, descSrcBad}
)

// FleetCPUBuckets are the upper bounds of the fleet CPU share histogram:
// from a hundredth of a percent of one core to five percent.
var FleetCPUBuckets = []float64{0.0001, 0.0005, 0.001, 0.002, 0.005, 0.01, 0.02, 0.05}

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
		ch <- prometheus.MustNewConstMetric(d, prometheus.CounterValue, float64(v), labels...)
	}
	gauge := func(d *prometheus.Desc, v float64, labels ...string) {
		ch <- prometheus.MustNewConstMetric(d, prometheus.GaugeValue, v, labels...)
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
	if !s.Watermark.IsZero() {
		gauge(descLag, s.Now.Sub(s.Watermark).Seconds())
	}
	gauge(descNodes, float64(s.Nodes))
	c.collectCuts(s.Cuts, s.Baseline.Sources, gauge)
	collectBaseline(s, counter, gauge)
	c.collectJobs(s, gauge)
	collectAgents(s.Agents, ch, counter, gauge)
}

func collectAgents(agents []model.Agent, ch chan<- prometheus.Metric, counter func(*prometheus.Desc, uint64, ...string), gauge func(*prometheus.Desc, float64, ...string)) {
	buckets := make(map[float64]uint64, len(FleetCPUBuckets))
	for _, b := range FleetCPUBuckets {
		buckets[b] = 0
	}
	var sum float64
	for _, a := range agents {
		gauge(descAgentSeen, float64(a.LastSeen.UnixNano())/1e9, a.Node)
		ch <- prometheus.MustNewConstMetric(descAgentCPU, prometheus.CounterValue, a.CPUSeconds, a.Node)
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
		sum += a.CPUShare
		for _, b := range FleetCPUBuckets {
			if a.CPUShare <= b {
				buckets[b]++
			}
		}
	}
	ch <- prometheus.MustNewConstHistogram(descAgentFleet, uint64(len(agents)), sum, buckets)
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

func (c *Collector) collectCuts(cuts level.Cuts, sources [metric.Count]string, gauge func(*prometheus.Desc, float64, ...string)) {
	for _, id := range metric.All() {
		d := descCutOps
		if id.IsBytes() {
			d = descCutBytes
		}
		src := cmp.Or(sources[id], "seed")
		gauge(d, cuts[id].Elevated, id.String(), level.Elevated.String(), src)
		gauge(d, cuts[id].Critical, id.String(), level.Critical.String(), src)
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

func (c *Collector) collectJobs(s Snapshot, gauge func(*prometheus.Desc, float64, ...string)) {
	var byLevel [3]int
	var notable []model.Summary
	for _, j := range s.Jobs {
		l := j.LiveLevels.Max()
		byLevel[l]++
		if l > level.Normal || len(j.ActiveFlags) > 0 {
			notable = append(notable, j)
		}
	}
	for l, n := range byLevel {
		gauge(descRunning, float64(n), level.Level(l).String())
	}
	slices.SortFunc(notable, func(a, b model.Summary) int {
		return cmp.Or(
			cmp.Compare(len(b.ActiveFlags), len(a.ActiveFlags)),
			cmp.Compare(b.LiveLevels.Max(), a.LiveLevels.Max()),
			cmp.Compare(a.ID, b.ID))
	})
	capped := 0
	if len(notable) > s.MaxJobSeries {
		capped = len(notable) - s.MaxJobSeries
		notable = notable[:s.MaxJobSeries]
	}
	gauge(descDropped, float64(capped))
	for _, j := range notable {
		emitJob(j, gauge)
	}
}

func emitJob(j model.Summary, gauge func(*prometheus.Desc, float64, ...string)) {
	for _, id := range metric.All() {
		d := descJobOps
		if id.IsBytes() {
			d = descJobBytes
		}
		gauge(d, j.Live[id], j.ID, id.String())
		gauge(descJobLevel, float64(j.LiveLevels[id]), j.ID, id.String())
	}
	gauge(descJobNodes, float64(j.NodesSeen), j.ID)
	for _, f := range j.ActiveFlags {
		gauge(descFlag, 1, j.ID, f.Reason, f.Level.String(), j.User, j.Name)
		gauge(descFlagSince, float64(f.Since.UnixNano())/1e9, j.ID, f.Reason)
	}
}
