package tracker

// SeqSet remembers which of a node's recent sequence numbers were applied,
// so a replayed sample changes nothing. It keeps the highest sequence seen
// and a ring bitmap of the span below it.
type SeqSet struct {
	High uint64   `json:"high"`
	Bits []uint64 `json:"bits"`
}

// seqVerdict says what to do with a sequence number.
type seqVerdict int

const (
	seqNew seqVerdict = iota
	seqDuplicate
	seqStale // older than the remembered span: cannot tell, so not applied
)

func newSeqSet(span int) *SeqSet {
	return &SeqSet{Bits: make([]uint64, (span+63)/64)}
}

func (s *SeqSet) span() uint64 { return uint64(len(s.Bits)) * 64 }

func (s *SeqSet) bit(seq uint64) (word int, mask uint64) {
	i := seq % s.span()
	return int(i / 64), 1 << (i % 64)
}

// check classifies seq without recording it.
func (s *SeqSet) check(seq uint64) seqVerdict {
	switch {
	case seq > s.High:
		return seqNew
	case seq+s.span() <= s.High:
		return seqStale
	}
	w, m := s.bit(seq)
	if s.Bits[w]&m != 0 {
		return seqDuplicate
	}
	return seqNew
}

// mark records seq as applied; check must have returned seqNew.
func (s *SeqSet) mark(seq uint64) {
	if seq > s.High {
		if seq-s.High >= s.span() {
			clear(s.Bits)
		} else {
			for q := s.High + 1; q < seq; q++ {
				w, m := s.bit(q)
				s.Bits[w] &^= m
			}
		}
		s.High = seq
	}
	w, m := s.bit(seq)
	s.Bits[w] |= m
}
