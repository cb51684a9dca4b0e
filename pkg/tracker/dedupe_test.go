package tracker

import (
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/model"
)

// TestSeqRecordIsTheAppliedNumbers marks random numbers (runs, gaps, jumps
// past the span, retries) and checks the record's ranges list exactly the
// numbers check calls applied, highest first, and that the set rebuilt
// from the record answers check the same for every number.
func TestSeqRecordIsTheAppliedNumbers(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 13))
	for trial := range 300 {
		span := 64 * (1 + r.IntN(6))
		s := newSeqSet(span)
		next := uint64(r.IntN(3))
		for range r.IntN(1200) {
			switch r.IntN(10) {
			case 0:
				next += uint64(r.IntN(3 * span)) // an agent restart's jump
			case 1:
				next -= min(next, uint64(r.IntN(span))) // a retry of an older one
			}
			if s.check(next) == seqNew {
				s.mark(next)
			}
			next++
		}
		rec := s.record()
		var want []model.SeqRange
		for q := int64(s.high); q >= int64(s.lowest()); q-- {
			if s.check(uint64(q)) != seqDuplicate {
				continue
			}
			if n := len(want); n > 0 && want[n-1].First == uint64(q)+1 {
				want[n-1].First = uint64(q)
			} else {
				want = append(want, model.SeqRange{First: uint64(q), Last: uint64(q)})
			}
		}
		require.Equal(t, want, rec.Applied, "trial %d", trial)
		back, err := seqSetOf(rec, span)
		require.NoError(t, err)
		assert.Equal(t, s, back, "trial %d", trial)
	}
}

func TestSeqRecordOfAnotherSpanIsRefused(t *testing.T) {
	s := newSeqSet(128)
	s.mark(5)
	_, err := seqSetOf(s.record(), 256)
	assert.ErrorContains(t, err, "dedupe span of 128 on file, 256 configured")
}
