package model

import "time"

// Silence keeps matching flags out of Prometheus until it expires: per
// job, per pattern (or reason), or both. Flags stay listed, marked
// silenced.
type Silence struct {
	ID      string    `json:"id"`
	Job     string    `json:"job,omitempty"`     // empty: every job
	Pattern string    `json:"pattern,omitempty"` // pattern name, or a reason such as "critical:creates"; empty: every flag
	Until   time.Time `json:"until"`
	By      string    `json:"by"`
	Why     string    `json:"why"`
	Created time.Time `json:"created"`
}

// Covers reports whether the silence applies to f at t.
func (s Silence) Covers(f Flag, t time.Time) bool {
	if !t.Before(s.Until) {
		return false
	}
	if s.Job != "" && s.Job != f.Job {
		return false
	}
	return s.Pattern == "" || s.Pattern == f.Pattern || s.Pattern == f.Reason
}

// Ack records that someone has taken a flag in hand. It changes nothing
// else: the flag stays exported until it clears or is silenced.
type Ack struct {
	Flag string    `json:"flag"`
	By   string    `json:"by"`
	Why  string    `json:"why"`
	At   time.Time `json:"at"`
}
