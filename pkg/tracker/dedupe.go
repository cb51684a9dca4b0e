package tracker

import (
	"slices"

	"sluice/pkg/model"
)

// seqSet remembers which of a node's recent sequence numbers were applied,
// so a replayed sample changes nothing. It keeps the highest sequence seen
// and a ring bitmap of the span below it.
type seqSet struct {
	high uint64
	bits []uint64
}

// seqVerdict says what to do with a sequence number.
type seqVerdict int

const (
	seqNew seqVerdict = iota
	seqDuplicate
	seqStale // older than the remembered span: cannot tell, so not applied
)

func newSeqSet(span int) *seqSet {
	return &seqSet{bits: make([]uint64, (span+63)/64)}
}

func (s *seqSet) span() uint64 { return uint64(len(s.bits)) * 64 }

func (s *seqSet) bit(seq uint64) (word int, mask uint64) {
	i := seq % s.span()
	return int(i / 64), 1 << (i % 64)
}

// check classifies seq without recording it.
func (s *seqSet) check(seq uint64) seqVerdict {
	switch {
	case seq > s.high:
		return seqNew
	case seq+s.span() <= s.high:
		return seqStale
	}
	w, m := s.bit(seq)
	if s.bits[w]&m != 0 {
		return seqDuplicate
	}
	return seqNew
}

// mark records seq as applied; check must have returned seqNew.
func (s *seqSet) mark(seq uint64) {
	if seq > s.high {
		if seq-s.high >= s.span() {
			clear(s.bits)
		} else {
			for q := s.high + 1; q < seq; q++ {
				w, m := s.bit(q)
				s.bits[w] &^= m
			}
		}
		s.high = seq
	}
	w, m := s.bit(seq)
	s.bits[w] |= m
}

func (s *seqSet) record() model.SeqRecord {
	return model.SeqRecord{High: s.high, Bits: slices.Clone(s.bits)}
}

func seqSetOf(r model.SeqRecord) *seqSet {
	return &seqSet{high: r.High, bits: slices.Clone(r.Bits)}
}
