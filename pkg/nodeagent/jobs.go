package nodeagent

import (
	"slices"
	"time"

	"sluice/pkg/mapping"
	"sluice/pkg/metric"
	"sluice/pkg/report"
)

// JobLister is a source that also discovers the jobs on the node (from
// cgroups); the agent reconciles its list with the hooks' records.
type JobLister interface {
	Jobs() []string
}

// JobsFrom says where the agent learns which jobs run on the node.
type JobsFrom string

// The places jobs are learnt from.
const (
	JobsFromHooks   JobsFrom = "hooks"   // the scheduler hooks' records only
	JobsFromCgroups JobsFrom = "cgroups" // job cgroups found by a JobLister source only
	JobsFromBoth    JobsFrom = "both"    // the union, with disagreements logged
)

// runningJobs lists the jobs running at any time after since, from the
// hooks' records, the job cgroups, or both (Config.JobsFrom).
func (a *Agent) runningJobs(since time.Time) []string {
	var hooks, cgroups []string
	if a.cfg.JobsFrom != JobsFromCgroups {
		for _, r := range a.records() {
			if r.Running(since) {
				hooks = append(hooks, r.ID)
			}
		}
	}
	if a.cfg.JobsFrom != JobsFromHooks {
		for _, src := range a.cfg.Sources {
			if l, ok := src.(JobLister); ok {
				cgroups = append(cgroups, l.Jobs()...)
			}
		}
	}
	if a.cfg.JobsFrom == JobsFromBoth {
		a.reconcile(hooks, cgroups)
	}
	ids := append(hooks, cgroups...)
	slices.Sort(ids)
	return slices.Compact(ids)
}

// reconcile logs, once per job, a job that only one of the two places
// knows: a hook that did not run, or a cgroup the pattern does not match.
func (a *Agent) reconcile(hooks, cgroups []string) {
	if len(cgroups) == 0 && !a.hasJobLister() {
		return // nothing to compare with
	}
	for _, id := range hooks {
		if !slices.Contains(cgroups, id) && !a.disagreed[id] {
			a.disagreed[id] = true
			a.log.Info("job recorded by the hooks has no cgroup", "job", id)
		}
	}
	for _, id := range cgroups {
		if !slices.Contains(hooks, id) && !a.disagreed[id] {
			a.disagreed[id] = true
			a.log.Info("job cgroup found without a hook record", "job", id)
		}
	}
}

func (a *Agent) hasJobLister() bool {
	for _, src := range a.cfg.Sources {
		if _, ok := src.(JobLister); ok {
			return true
		}
	}
	return false
}

// perJob gathers the deltas of per-job readings during one Collect.
type perJob struct {
	values  map[string]*metric.Values
	sources []string // kinds that gave per-job readings
}

// target is where a delta is summed: the node's values, or its job's.
func (p *perJob) target(job string, node *metric.Values) *metric.Values {
	if job == "" {
		return node
	}
	v := p.values[job]
	if v == nil {
		v = &metric.Values{}
		p.values[job] = v
	}
	return v
}

// listed returns running with every job a per-job source gave values for
// added, sorted: a job's own values are never dropped for want of a
// listing, as when the hooks have no record of it (JobsFromHooks) or its
// cgroup went at this very read.
func (p *perJob) listed(running []string) []string {
	n := len(running)
	for job := range p.values {
		if !slices.Contains(running[:n], job) {
			running = append(running, job)
		}
	}
	if len(running) > n {
		slices.Sort(running)
	}
	return running
}

// blocks builds the per-job split of a sample: when a per-job source gave
// readings, each listed job gets the per-job sources' values for the
// metrics they measure (zero for a job they did not report) and the node's
// values for the rest, which the filesystem client cannot split. A job
// alone on the node is split too: the aggregator takes a job's block where
// there is one and the node's values otherwise, so without a block its own
// values would be lost, and its figures would change meaning whenever a
// neighbour came or went. A node without per-job readings gets no split.
func (p *perJob) blocks(jobs []string, node metric.Values, table mapping.Table) []report.JobValues {
	if len(p.sources) == 0 {
		return nil
	}
	var covered [metric.Count]bool
	for _, kind := range p.sources {
		for _, id := range table[kind] {
			covered[id] = true
		}
	}
	out := make([]report.JobValues, 0, len(jobs))
	for _, job := range jobs {
		v := node
		own := p.values[job]
		for i := range v {
			if covered[i] {
				v[i] = 0
				if own != nil {
					v[i] = own[i]
				}
			}
		}
		out = append(out, report.JobValues{Job: job, Values: v})
	}
	return out
}
