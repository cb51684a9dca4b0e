package block

// Opens returns how many times s has opened its file, so that tests can
// tell a kept descriptor from a reopened one.
func Opens(s *Source) int { return s.file.Opens() }

// ParseBuf parses data the way Source.Read does, from a buffer in memory.
func ParseBuf(data []byte) Stats { return parseBuf(data, nil, nil) }

// Unwrapper exposes one device's unwrap state.
type Unwrapper struct{ ds devState }

// Update records d and returns the counters a Source would report for it.
func (u *Unwrapper) Update(d Device) map[string]uint64 {
	u.ds.update(&d)
	return u.ds.counters()
}
