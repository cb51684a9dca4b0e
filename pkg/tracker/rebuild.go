package tracker

import "sluice/pkg/report"

// ReplayFrom is the lowest stream position of the samples that the open
// windows and live windows of running jobs have summed: what the state
// file does not keep (model.JobRecord) and a restarted aggregator sums
// again by reading the stream from there. 0 means no position is known
// (nothing summed, or samples given without one).
func (t *Tracker) ReplayFrom() uint64 {
	var from uint64
	for _, j := range t.jobs {
		if !j.finished {
			from = lowestPos(from, j.replayFrom())
		}
	}
	return from
}

// Rebuild sums again, after a restart, a sample applied before it (its
// stream position is at or before the last one saved): it goes into the
// open windows and live windows of its jobs, and nothing else changes, as
// the rest of what it did is in the restored records.
//
// It counts only if it was applied the first time: its node's restored
// sequence set holds its number (the set was saved with the same commit),
// and it was not counted already in this rebuild (a second copy in the
// stream was refused the first time too). Whether it counts for a job is
// decided as before, against the job's restored end and closed windows.
// A live slice older than the job's live window is not kept.
func (t *Tracker) Rebuild(s *report.Sample, pos uint64) {
	if t.checkInterval(s) != nil {
		return
	}
	if seqs := t.nodes[s.Node]; seqs == nil || seqs.check(s.Seq) != seqDuplicate {
		return
	}
	seen := t.rebuilt[s.Node]
	if seen == nil {
		seen = newSeqSet(t.opts.DedupeSpan)
		t.rebuilt[s.Node] = seen
	}
	if seen.check(s.Seq) != seqNew {
		return
	}
	seen.mark(s.Seq)
	for _, a := range attributions(s) {
		j := t.jobs[a.job]
		if j == nil || j.finished {
			continue
		}
		t.rebuildFor(j, s, a, pos)
	}
}

// rebuildFor places one job's share of a rebuilt sample. A sample of a
// window closed since was placed the first time if it came no later than
// the close (ClosedAt): the window is done with it, the live window may
// still hold it. Only the latest closed window can: the live window is
// no longer than a window.
func (t *Tracker) rebuildFor(j *job, s *report.Sample, a attribution, pos uint64) {
	if j.meta.Ended() && s.End.After(j.meta.End.Add(t.opts.Grace)) {
		return // late the first time
	}
	idx := j.windowIndex(s.End, t.opts.Window)
	sl := slice{end: s.End, seconds: s.End.Sub(s.Start).Seconds(), values: a.values, pos: pos}
	switch {
	case idx >= j.closed:
		j.placeWindow(idx, s.Node, sl)
	case idx < j.closed-1 || pos > j.closedAt:
		return
	}
	if s.End.After(j.lastSample.Add(-t.opts.Live)) {
		j.placeLive(s.Node, sl)
	}
}

// EndRebuild drops what Rebuild kept to tell copies apart.
func (t *Tracker) EndRebuild() { clear(t.rebuilt) }
