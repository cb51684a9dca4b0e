package nodeagent

import (
	"context"
	"errors"
	"fmt"
	"os"
	"slices"
	"syscall"
	"time"

	"sluice/pkg/metric"
	"sluice/pkg/source"
)

// SourceReport is what one read of a source found, for agent check.
type SourceReport struct {
	Name      string
	Instances []string    // reading keys
	Metrics   []metric.ID // metrics its counters map to
	// PerJob says its readings are per job (the jobio source): Metrics go
	// to each reported job's block of the sample, not to the node's values.
	PerJob    bool
	Malformed int
	Err       error // nil, or wrapping source.ErrNoData when there is nothing to read
}

// Check reads every source once and reports what each found and which
// metrics it will produce, and checks that the state directory is
// writable. It does not touch the delta state or the broker.
func (a *Agent) Check(ctx context.Context) ([]SourceReport, error) {
	var reports []SourceReport
	for _, src := range a.cfg.Sources {
		r := SourceReport{Name: src.Name()}
		readings, err := src.Read(ctx)
		r.Err = err
		seen := map[metric.ID]bool{}
		for _, rd := range readings {
			r.Instances = append(r.Instances, rd.Key)
			r.PerJob = r.PerJob || rd.Job != ""
			r.Malformed += rd.Malformed
			for name := range rd.Counters {
				if id, ok := a.cfg.Mapping[src.Name()][name]; ok {
					seen[id] = true
				}
			}
			for _, id := range rd.Present.IDs() {
				seen[id] = true
			}
		}
		for id := range seen {
			r.Metrics = append(r.Metrics, id)
		}
		slices.Sort(r.Metrics)
		reports = append(reports, r)
	}
	return reports, a.checkStateDir()
}

func (a *Agent) checkStateDir() error {
	f, err := os.CreateTemp(a.jobs.Path(), ".check-*")
	if err != nil {
		return fmt.Errorf("state directory %s is not writable: %w", a.jobs.Path(), err)
	}
	f.Close()
	return os.Remove(f.Name())
}

// Usable reports whether at least one source found counters and none
// failed for a reason other than having no data.
func Usable(reports []SourceReport) error {
	var errs []error
	found := false
	for _, r := range reports {
		switch {
		case r.Err == nil:
			found = found || len(r.Instances) > 0
		case errors.Is(r.Err, source.ErrNoData):
		default:
			errs = append(errs, fmt.Errorf("source %s: %w", r.Name, r.Err))
		}
	}
	if !found {
		errs = append(errs, errors.New("no source found any counters: the agent would publish only zeros"))
	}
	return errors.Join(errs...)
}

// SourceBench is one source's measured cost.
type SourceBench struct {
	Name      string
	Instances int
	Reads     int
	Wall      time.Duration // per read
	CPU       time.Duration // per read, user+system of this process
}

// Bench reads each source n times and measures wall and CPU time per read,
// then does the same for whole Collect calls (every source, deltas,
// mapping, job list), reported under the name "all (collect)".
func (a *Agent) Bench(ctx context.Context, n int) ([]SourceBench, error) {
	var out []SourceBench
	for _, src := range a.cfg.Sources {
		b := SourceBench{Name: src.Name(), Reads: n}
		var err error
		b.Wall, b.CPU, err = measure(n, func() error {
			rs, err := src.Read(ctx)
			b.Instances = len(rs)
			if errors.Is(err, source.ErrNoData) {
				return nil
			}
			return err
		})
		if err != nil {
			return nil, fmt.Errorf("bench %s: %w", src.Name(), err)
		}
		out = append(out, b)
	}
	all := SourceBench{Name: "all (collect)", Reads: n}
	for _, b := range out {
		all.Instances += b.Instances
	}
	var err error
	all.Wall, all.CPU, err = measure(n, func() error { _, _, err := a.Collect(ctx); return err })
	if err != nil {
		return nil, fmt.Errorf("bench collect: %w", err)
	}
	return append(out, all), nil
}

func measure(n int, f func() error) (wall, cpu time.Duration, err error) {
	c0, t0 := cpuTime(), time.Now()
	for range n {
		if err := f(); err != nil {
			return 0, 0, err
		}
	}
	wall, cpu = time.Since(t0), cpuTime()-c0
	return wall / time.Duration(n), cpu / time.Duration(n), nil
}

// cpuTime is this process's user+system CPU time.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// Interval is the sampling interval in force.
func (a *Agent) Interval() time.Duration { return a.cfg.Interval }
