package flagging

import (
	"cmp"
	"errors"
	"fmt"
	"slices"
	"strings"
	"time"

	"sluice/pkg/model"
)

// Limits on a silence's length: long enough for a long weekend, short
// enough that a forgotten one ends.
const (
	MinSilence = time.Minute
	MaxSilence = 30 * 24 * time.Hour
)

// Attention holds the silences and acknowledgements, and decides from them
// how each flag stands.
type Attention struct {
	silences []model.Silence
	acks     map[string]model.Ack
}

// NewAttention returns the attention given by stored silences and acks.
func NewAttention(silences []model.Silence, acks map[string]model.Ack) *Attention {
	if acks == nil {
		acks = map[string]model.Ack{}
	}
	return &Attention{silences: slices.Clone(silences), acks: acks}
}

// Decide sets f's State and Ack as of now: cleared if it is over,
// silenced if a silence covers it, else active.
func (a *Attention) Decide(f *model.Flag, now time.Time) {
	if ack, ok := a.acks[f.ID]; ok {
		f.Ack = &ack
	}
	switch {
	case !f.Active():
		f.State = model.FlagCleared
	case slices.ContainsFunc(a.silences, func(s model.Silence) bool { return Covers(s, f, now) }):
		f.State = model.FlagSilenced
	default:
		f.State = model.FlagActive
	}
}

// DecideAll decides every flag of fs.
func (a *Attention) DecideAll(fs []model.Flag, now time.Time) {
	for i := range fs {
		a.Decide(&fs[i], now)
	}
}

// Covers reports whether silence s applies to f at now: s has not expired,
// names f's job or none, and names f's pattern, f's reason or nothing.
func Covers(s model.Silence, f *model.Flag, now time.Time) bool {
	if !now.Before(s.Until) {
		return false
	}
	if s.Job != "" && s.Job != f.Job {
		return false
	}
	if s.Pattern == "" || (f.Pattern != "" && s.Pattern == f.Pattern) {
		return true
	}
	r, err := model.ParseReason(s.Pattern)
	return err == nil && r == f.Reason
}

// NewSilence checks and returns the silence by asks for as of now: the
// flags of job (empty: every job) and pattern (a pattern name or a
// reason; empty: every flag), for d; AddSilence puts it in force.
func NewSilence(job, pattern string, d time.Duration, by, why string, now time.Time) (model.Silence, error) {
	switch {
	case d < MinSilence || d > MaxSilence:
		return model.Silence{}, fmt.Errorf("for %s: must be between %s and %s", d, MinSilence, MaxSilence)
	case job == "" && pattern == "":
		return model.Silence{}, errors.New("a silence needs a job, a pattern, or both")
	case strings.TrimSpace(by) == "" || strings.TrimSpace(why) == "":
		return model.Silence{}, errors.New("say who silences and why (by, why)")
	}
	s := model.Silence{
		ID:  fmt.Sprintf("%d-%s-%s", now.UnixNano(), cmp.Or(job, "any"), cmp.Or(pattern, "any")),
		Job: job, Pattern: pattern, Until: now.Add(d), By: by, Why: why, Created: now,
	}
	return s, nil
}

// AddSilence puts s in force.
func (a *Attention) AddSilence(s model.Silence) { a.silences = append(a.silences, s) }

// Unsilence ends the silence with the given id; false if there is none.
func (a *Attention) Unsilence(id string) bool {
	n := len(a.silences)
	a.silences = slices.DeleteFunc(a.silences, func(s model.Silence) bool { return s.ID == id })
	return len(a.silences) < n
}

// Silences returns the silences in force at now.
func (a *Attention) Silences(now time.Time) []model.Silence {
	return slices.DeleteFunc(slices.Clone(a.silences), func(s model.Silence) bool { return !now.Before(s.Until) })
}

// NewAck checks and returns the record that by has the flag with the
// given id in hand; AddAck keeps it.
func NewAck(id, by, why string, now time.Time) (model.Ack, error) {
	if strings.TrimSpace(by) == "" {
		return model.Ack{}, errors.New("say who acknowledges (by)")
	}
	return model.Ack{Flag: id, By: by, Why: why, At: now}, nil
}

// AddAck keeps an acknowledgement.
func (a *Attention) AddAck(ack model.Ack) { a.acks[ack.Flag] = ack }
