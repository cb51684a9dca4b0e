package aggregate

import (
	"context"
	"time"
)

// pruneBatch is how many ended jobs one prune transaction deletes.
const pruneBatch = 500

// prune deletes from the state file what it holds of jobs that ended more
// than KeepEnded ago, a batch per transaction, and counts it.
func (s *Service) prune(ctx context.Context) {
	cutoff := s.opts.Now().Add(-s.opts.KeepEnded)
	for ctx.Err() == nil {
		p, err := s.st.Prune(cutoff, pruneBatch)
		if err != nil {
			s.log.Error("pruning ended jobs failed; will try again", "err", err)
			return
		}
		s.mu.Lock()
		s.pruned.Jobs += p.Jobs
		s.pruned.Windows += p.Windows
		s.pruned.Flags += p.Flags
		s.pruned.Acks += p.Acks
		s.mu.Unlock()
		if !p.More {
			return
		}
		time.Sleep(10 * time.Millisecond) // let a commit in between
	}
}
