package baseline

import (
	"errors"
	"fmt"
	"iter"
	"math"
	"time"

	"github.com/DataDog/sketches-go/ddsketch"
	"github.com/DataDog/sketches-go/ddsketch/mapping"
	"github.com/DataDog/sketches-go/ddsketch/store"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// RelativeAccuracy is the sketches' accuracy α: a quantile is within α·x of
// the true value x at its rank (DDSketch paper, Section 2). It is part of the
// storage format; changing it needs a new format version.
const RelativeAccuracy = 0.01

// MaxBins is the most bins one metric's sketch keeps. With α = 1% a bin is
// about 2% wide, so 2048 bins span about 17 decades; past that the lowest
// bins collapse into one (see the package doc). A full sketch encodes in 4
// to 6 KiB (two or three bytes per bin), the bound on one metric's share of
// a stored day.
const MaxBins = 2048

// The sentinel errors. Errors returned by this package wrap one of them
// where a caller may want to count by reason.
var (
	// ErrInvalidValue is a window value that is negative, NaN, infinite or
	// too large for the sketch.
	ErrInvalidValue = errors.New("invalid window value")
	// ErrUnknownMetric is a metric ID at or above metric.Count.
	ErrUnknownMetric = errors.New("unknown metric")
	// ErrCorrupt is stored bytes that do not decode to a Day.
	ErrCorrupt = errors.New("corrupt baseline day")
)

// DayKey names one UTC calendar day as the number of days since 1970-01-01
// UTC (negative before it). An integer rather than a date string: it is what
// the horizon arithmetic and the per-window map lookup want; [DayKey.String]
// and [ParseDayKey] give the "2006-01-02" form for keys and files.
type DayKey int32

const secondsPerDay = 24 * 60 * 60

// DayOf returns the UTC day t falls in.
func DayOf(t time.Time) DayKey {
	s := t.Unix()
	d := s / secondsPerDay
	if s%secondsPerDay < 0 {
		d-- // floor division for instants before 1970
	}
	return DayKey(d)
}

// ParseDayKey reads a day in the form "2006-01-02".
func ParseDayKey(s string) (DayKey, error) {
	t, err := time.Parse(time.DateOnly, s)
	if err != nil {
		return 0, fmt.Errorf("day %q: %w", s, err)
	}
	return DayOf(t), nil
}

// Time returns the day's start, midnight UTC.
func (k DayKey) Time() time.Time { return time.Unix(int64(k)*secondsPerDay, 0).UTC() }

// String returns the day as "2006-01-02".
func (k DayKey) String() string { return k.Time().Format(time.DateOnly) }

// MarshalText encodes the day as "2006-01-02".
func (k DayKey) MarshalText() ([]byte, error) { return []byte(k.String()), nil }

// UnmarshalText decodes the form MarshalText writes.
func (k *DayKey) UnmarshalText(b []byte) error {
	d, err := ParseDayKey(string(b))
	if err != nil {
		return err
	}
	*k = d
	return nil
}

// Day is one UTC day's window values: one sketch of the non-idle values and
// one idle count per metric. The zero Day is not usable; use [NewDay] or
// [Day.UnmarshalBinary].
type Day struct {
	sketches [metric.Count]*ddsketch.DDSketch
	idle     [metric.Count]uint64
}

// NewDay returns an empty day.
func NewDay() *Day {
	d := &Day{}
	m := newMapping()
	for i := range d.sketches {
		d.sketches[i] = newSketch(m)
	}
	return d
}

// newMapping returns the logarithmic index mapping of RelativeAccuracy. The
// exact logarithm costs a few nanoseconds more per insert than ddsketch's
// interpolated mappings but gives the tightest bins for the accuracy, which
// keeps the stored day small.
func newMapping() *mapping.LogarithmicMapping {
	m, err := mapping.NewLogarithmicMapping(RelativeAccuracy)
	if err != nil {
		// Cannot happen: RelativeAccuracy is a constant inside (0, 1).
		panic(fmt.Sprintf("baseline: index mapping for accuracy %g: %v", RelativeAccuracy, err))
	}
	return m
}

// newSketch returns an empty sketch on m with collapsing lowest dense stores
// of MaxBins. The negative store never receives a value (negative rates are
// refused) and allocates nothing while empty.
func newSketch(m mapping.IndexMapping) *ddsketch.DDSketch {
	return ddsketch.NewDDSketch(m, store.NewCollapsingLowestDenseStore(MaxBins), store.NewCollapsingLowestDenseStore(MaxBins))
}

// Add records one window's value for metric id: idle below the metric's idle
// floor, in the sketch otherwise. A negative, NaN or infinite value is
// refused with an error wrapping [ErrInvalidValue]; an unknown id with
// [ErrUnknownMetric].
func (d *Day) Add(id metric.ID, rate float64) error { return d.AddWithCount(id, rate, 1) }

// AddWithCount records count windows of the same value, as Add does for
// one. Adding each (value, count) pair of [Day.Bins] to an empty day, and
// the idle count as value 0, reproduces the day's sketches exactly.
func (d *Day) AddWithCount(id metric.ID, rate float64, count uint64) error {
	if id >= metric.Count {
		return fmt.Errorf("add %d windows of value %g: %w %d", count, rate, ErrUnknownMetric, id)
	}
	if !(rate >= 0) || math.IsInf(rate, 1) { // also refuses NaN
		return fmt.Errorf("add %s value %g: %w", id, rate, ErrInvalidValue)
	}
	if count == 0 {
		return nil
	}
	if coding.IsIdle(id, rate) {
		d.idle[id] += count
		return nil
	}
	if err := d.sketches[id].AddWithCount(rate, float64(count)); err != nil {
		return fmt.Errorf("add %s value %g: %w: %w", id, rate, ErrInvalidValue, err)
	}
	return nil
}

// Idle returns the number of idle windows of metric id.
func (d *Day) Idle(id metric.ID) uint64 {
	if id >= metric.Count {
		return 0
	}
	return d.idle[id]
}

// Windows returns the number of non-idle windows of metric id, the count
// its quantiles are over.
func (d *Day) Windows(id metric.ID) uint64 {
	if id >= metric.Count {
		return 0
	}
	return uint64(d.sketches[id].GetCount())
}

// IsEmpty reports whether the day holds no window at all, idle or not.
func (d *Day) IsEmpty() bool {
	for i, s := range d.sketches {
		if !s.IsEmpty() || d.idle[i] != 0 {
			return false
		}
	}
	return true
}

// Quantile returns the value at quantile q (0 to 1) of metric id's non-idle
// windows; ok is false when there are none or q is outside [0, 1].
func (d *Day) Quantile(id metric.ID, q float64) (value float64, ok bool) {
	if id >= metric.Count {
		return 0, false
	}
	v, err := d.sketches[id].GetValueAtQuantile(q)
	if err != nil {
		return 0, false
	}
	return v, true
}

// Bins yields metric id's non-idle bins in ascending order of value: each
// bin's representative value (within RelativeAccuracy of every value in the
// bin) and its count of windows. Idle windows are not a bin; see
// [Day.Idle]. A representative that would fall below the idle floor is
// raised to the floor, which lies in the same bin, so that re-adding the
// pairs with AddWithCount puts every window back into its bin.
func (d *Day) Bins(id metric.ID) iter.Seq2[float64, uint64] {
	return func(yield func(float64, uint64) bool) {
		if id >= metric.Count {
			return
		}
		s := d.sketches[id]
		floor := idleFloor(id)
		s.GetPositiveValueStore().ForEach(func(index int, count float64) bool {
			v := max(s.Value(index), floor)
			return !yield(v, uint64(count))
		})
	}
}

// idleFloor returns the smallest value of metric id that coding.IsIdle does not
// call idle.
func idleFloor(id metric.ID) float64 {
	if id.IsBytes() {
		return coding.IdleBytesPerSecond
	}
	return coding.IdleOpsPerSecond
}

// Merge adds every window of o to d.
func (d *Day) Merge(o *Day) {
	for i := range d.sketches {
		// Cannot fail: every Day uses the same mapping.
		_ = d.sketches[i].MergeWith(o.sketches[i])
		d.idle[i] += o.idle[i]
	}
}

// Clone returns a deep copy of d.
func (d *Day) Clone() *Day {
	c := &Day{idle: d.idle}
	for i, s := range d.sketches {
		c.sketches[i] = s.Copy()
	}
	return c
}
