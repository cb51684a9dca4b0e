package tracker

import (
	"fmt"
	"slices"
	"time"

	"sluice/pkg/flagging"
	"sluice/pkg/model"
)

// DirtyJobs returns the records of the jobs changed since the last call
// and the ids of jobs forgotten since then, for the store.
func (t *Tracker) DirtyJobs() (changed []model.JobRecord, gone []string) {
	for id := range t.dirtyJobs {
		if j, ok := t.jobs[id]; ok {
			changed = append(changed, j.record())
		}
	}
	clear(t.dirtyJobs)
	gone, t.gone = t.gone, nil
	return changed, gone
}

// DirtyNodes returns the records of the sequence sets changed since the
// last call.
func (t *Tracker) DirtyNodes() map[string]model.SeqRecord {
	out := make(map[string]model.SeqRecord, len(t.dirtyNodes))
	for n := range t.dirtyNodes {
		out[n] = t.nodes[n].record()
	}
	clear(t.dirtyNodes)
	return out
}

// Restore loads persisted state into an empty tracker.
func (t *Tracker) Restore(jobs []model.JobRecord, nodes map[string]model.SeqRecord, watermark time.Time) error {
	if len(t.jobs) > 0 || len(t.nodes) > 0 {
		return fmt.Errorf("restore into a tracker that already holds state")
	}
	for i := range jobs {
		j := jobOf(&jobs[i])
		// A record without a signature has no closed window to build one
		// from (the store rebuilds a missing one from the windows).
		if b := jobs[i].Signature; b != nil {
			if err := j.signature.UnmarshalBinary(b); err != nil {
				return fmt.Errorf("signature of job %q: %w", j.meta.ID, err)
			}
		}
		if jobs[i].Evaluated {
			j.signature.SetLive(jobs[i].LiveGrades)
		}
		t.jobs[j.meta.ID] = j
	}
	for n, r := range nodes {
		s, err := seqSetOf(r, t.opts.DedupeSpan)
		if err != nil {
			return fmt.Errorf("node %s: %w", n, err)
		}
		t.nodes[n] = s
	}
	t.watermark = watermark
	return nil
}

// record is the job as the state file keeps it; it shares nothing with j.
// It carries the signature only when windows were added to it since the
// last record.
func (j *job) record() model.JobRecord {
	r := model.JobRecord{
		Meta: j.meta, Closed: j.closed, ClosedAt: j.closedAt, LastSample: j.lastSample, Totals: j.totals,
		LiveRates: j.liveRates, LiveLevels: j.liveLevels, LiveNodes: j.liveNodes,
		Streaks: j.streaks.Records(), FlagsRaised: j.flagsRaised, Finished: j.finished,
		Unevaluated: j.dirty, LiveGrades: j.signature.Live, Evaluated: j.signature.HasLive,
	}
	r.Meta.Nodes = slices.Clone(j.meta.Nodes)
	if j.signed {
		r.Signature, _ = j.signature.MarshalBinary() // cannot fail
		j.signed = false
	}
	if j.lastWindow != nil {
		w := *j.lastWindow
		r.LastWindow = &w
	}
	return r
}

// jobOf rebuilds a job from its record; its open windows and live window
// start empty, for Rebuild to fill.
func jobOf(r *model.JobRecord) *job {
	j := newJob(r.Meta)
	j.meta.Nodes = slices.Clone(r.Meta.Nodes)
	j.closed, j.closedAt, j.lastSample, j.totals = r.Closed, r.ClosedAt, r.LastSample, r.Totals
	j.liveRates, j.liveLevels, j.liveNodes = r.LiveRates, r.LiveLevels, r.LiveNodes
	j.streaks = flagging.FromRecords(r.Streaks)
	j.flagsRaised, j.finished, j.dirty = r.FlagsRaised, r.Finished, r.Unevaluated

	if r.LastWindow != nil {
		w := *r.LastWindow
		j.lastWindow = &w
	}
	return j
}
