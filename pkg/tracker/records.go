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
		t.jobs[j.meta.ID] = j
	}
	for n, s := range nodes {
		if want := (t.opts.DedupeSpan + 63) / 64; len(s.Bits) != want {
			return fmt.Errorf("node %s: dedupe span of %d bits on file, %d configured", n, len(s.Bits)*64, want*64)
		}
		t.nodes[n] = seqSetOf(s)
	}
	t.watermark = watermark
	return nil
}

// record is the job as the state file keeps it; it shares nothing with j.
func (j *job) record() model.JobRecord {
	sig, _ := j.signature.MarshalBinary() // cannot fail
	r := model.JobRecord{
		Meta: j.meta, Closed: j.closed, LastSample: j.lastSample, Totals: j.totals,
		LiveRates: j.liveRates, LiveLevels: j.liveLevels, LiveNodes: j.liveNodes,
		Streaks: j.streaks.Records(), FlagsRaised: j.flagsRaised, Finished: j.finished,
		Live:      make(map[string][]model.SliceRecord, len(j.live)),
		Open:      make(map[int]model.OpenRecord, len(j.open)),
		Signature: sig,
	}
	r.Meta.Nodes = slices.Clone(j.meta.Nodes)
	for n, ss := range j.live {
		recs := make([]model.SliceRecord, len(ss))
		for i, s := range ss {
			recs[i] = model.SliceRecord{End: s.end, Seconds: s.seconds, Values: s.values}
		}
		r.Live[n] = recs
	}
	for idx, w := range j.open {
		o := model.OpenRecord{Nodes: make(map[string]model.AccumRecord, len(w.nodes))}
		for n, a := range w.nodes {
			o.Nodes[n] = model.AccumRecord{Seconds: a.seconds, Values: a.values}
		}
		r.Open[idx] = o
	}
	if j.lastWindow != nil {
		w := *j.lastWindow
		r.LastWindow = &w
	}
	return r
}

// jobOf rebuilds a job from its record.
func jobOf(r *model.JobRecord) *job {
	j := newJob(r.Meta)
	j.meta.Nodes = slices.Clone(r.Meta.Nodes)
	j.closed, j.lastSample, j.totals = r.Closed, r.LastSample, r.Totals
	j.liveRates, j.liveLevels, j.liveNodes = r.LiveRates, r.LiveLevels, r.LiveNodes
	j.streaks = flagging.FromRecords(r.Streaks)
	j.flagsRaised, j.finished = r.FlagsRaised, r.Finished
	for n, recs := range r.Live {
		ss := make([]slice, len(recs))
		for i, s := range recs {
			ss[i] = slice{end: s.End, seconds: s.Seconds, values: s.Values}
		}
		j.live[n] = ss
	}
	for idx, o := range r.Open {
		w := newOpenWindow()
		for n, a := range o.Nodes {
			w.add(n, a.Seconds, a.Values)
		}
		j.open[idx] = w
	}
	if r.LastWindow != nil {
		w := *r.LastWindow
		j.lastWindow = &w
	}
	return j
}
