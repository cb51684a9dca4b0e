package tracker

import (
	"fmt"

	"sluice/pkg/model"
)

// seqSet remembers which of a node's recent sequence numbers were applied,
// so a replayed sample changes nothing. It keeps the highest sequence seen
// and a ring bitmap of the span below it: number q is bit q%span.
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

// lowest is the lowest number the span covers.
func (s *seqSet) lowest() uint64 {
	if s.high < s.span() {
		return 0
	}
	return s.high - s.span() + 1
}

// record gives the applied numbers as ranges, highest first. It walks the
// ring a word at a time where a word is all set or all clear, so a node
// that lost nothing costs a pass over its words, not its bits.
func (s *seqSet) record() model.SeqRecord {
	r := model.SeqRecord{High: s.high, Span: int(s.span())}
	low := s.lowest()
	for q := s.high; ; {
		set, step := s.run(q, low)
		if set {
			if n := len(r.Applied); n > 0 && r.Applied[n-1].First == q+1 {
				r.Applied[n-1].First = q - step + 1
			} else {
				r.Applied = append(r.Applied, model.SeqRange{First: q - step + 1, Last: q})
			}
		}
		if q-low < step {
			return r
		}
		q -= step
	}
}

// run says whether q is set and how many numbers from q down (q
// included, none below low) are the same: a whole word's worth when q
// is a word's top bit and the word is uniform, else one.
func (s *seqSet) run(q, low uint64) (set bool, n uint64) {
	w, m := s.bit(q)
	set = s.bits[w]&m != 0
	if m == 1<<63 && q-low >= 63 {
		switch s.bits[w] {
		case ^uint64(0):
			return true, 64
		case 0:
			return false, 64
		}
	}
	return set, 1
}

// seqSetOf rebuilds a set from its record; span is the configured one.
func seqSetOf(r model.SeqRecord, span int) (*seqSet, error) {
	s := newSeqSet(span)
	if r.Span != int(s.span()) {
		return nil, fmt.Errorf("dedupe span of %d on file, %d configured", r.Span, s.span())
	}
	s.high = r.High
	low := s.lowest()
	for _, a := range r.Applied {
		for q := max(a.First, low); q <= a.Last && q <= r.High; q++ {
			w, m := s.bit(q)
			s.bits[w] |= m
		}
	}
	return s, nil
}
