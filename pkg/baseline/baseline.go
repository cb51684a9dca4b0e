package baseline

import (
	"cmp"
	"errors"
	"fmt"
	"maps"
	"slices"
	"time"

	"github.com/DataDog/sketches-go/ddsketch"

	"sluice/pkg/metric"
)

// Origin says where a day's windows came from.
type Origin string

// The origins in use.
const (
	// Live is what the aggregator learned from the windows it closed.
	Live Origin = "live"
	// Import is what was imported from a file; an import replaces its day.
	Import Origin = "import"
)

// Key names one stored day: its origin and its date.
type Key struct {
	Origin Origin
	Day    DayKey
}

// Defaults for the zero fields of Options.
const (
	DefaultDays             = 30
	DefaultElevatedQuantile = 0.99
	DefaultCriticalQuantile = 0.999
	DefaultMinWindows       = 1000
)

// Options configure a Baseline. The zero value of every field means its
// default.
type Options struct {
	// Days is the horizon: the number of UTC calendar days, today included,
	// whose windows the cuts are learned from. Older days are ignored by
	// Cuts and dropped by Prune; days after today (a clock ahead of the
	// caller's) count. Zero means DefaultDays (30).
	Days int
	// ElevatedQuantile and CriticalQuantile are the quantiles of the
	// non-idle windows that become a metric's elevated and critical cut
	// points and its two top grade cuts. They must satisfy
	// 0.9 <= elevated <= critical <= 1 (the grade cuts below them are p50,
	// p75 and p90). Zero means DefaultElevatedQuantile (0.99) and
	// DefaultCriticalQuantile (0.999).
	ElevatedQuantile float64
	CriticalQuantile float64
	// MinWindows is the number of non-idle windows inside the horizon a
	// metric needs before its learned cuts replace the seed cuts. Zero means
	// DefaultMinWindows (1000).
	MinWindows uint64
}

// withDefaults returns o with its zero fields set to the defaults, checked.
func (o Options) withDefaults() (Options, error) {
	if o.Days == 0 {
		o.Days = DefaultDays
	}
	if o.ElevatedQuantile == 0 {
		o.ElevatedQuantile = DefaultElevatedQuantile
	}
	if o.CriticalQuantile == 0 {
		o.CriticalQuantile = DefaultCriticalQuantile
	}
	if o.MinWindows == 0 {
		o.MinWindows = DefaultMinWindows
	}
	if o.Days < 0 {
		return o, fmt.Errorf("baseline horizon of %d days: must be positive", o.Days)
	}
	if !(0.9 <= o.ElevatedQuantile && o.ElevatedQuantile <= o.CriticalQuantile && o.CriticalQuantile <= 1) {
		return o, fmt.Errorf("baseline quantiles elevated %g critical %g: want 0.9 <= elevated <= critical <= 1", o.ElevatedQuantile, o.CriticalQuantile)
	}
	return o, nil
}

// Baseline holds the days of every origin and computes cuts over the
// horizon. It is not safe for concurrent use.
type Baseline struct {
	opts     Options
	days     map[Key]*Day
	rejected uint64

	// The live day last added to, so Add skips the map lookup.
	liveKey DayKey
	live    *Day

	// Scratch reused by Cuts.
	merged  [metric.Count]*ddsketch.DDSketch
	entries []Key
}

// New returns an empty Baseline; nil opts means every default.
func New(opts *Options) (*Baseline, error) {
	var o Options
	if opts != nil {
		o = *opts
	}
	o, err := o.withDefaults()
	if err != nil {
		return nil, err
	}
	b := &Baseline{opts: o, days: make(map[Key]*Day)}
	m := newMapping()
	for i := range b.merged {
		b.merged[i] = newSketch(m)
	}
	return b, nil
}

// Options returns the options in force, defaults filled in.
func (b *Baseline) Options() Options { return b.opts }

// Add records one window's value for metric id on day in the Live origin,
// as [Day.Add] does. A refused value is counted (see Rejected) and the error
// returned.
func (b *Baseline) Add(day DayKey, id metric.ID, rate float64) error {
	d := b.live
	if d == nil || b.liveKey != day {
		d = b.days[Key{Live, day}]
		if d == nil {
			d = NewDay()
			b.days[Key{Live, day}] = d
		}
		b.liveKey, b.live = day, d
	}
	if err := d.Add(id, rate); err != nil {
		b.rejected++
		return fmt.Errorf("baseline day %s: %w", day, err)
	}
	return nil
}

// Rejected returns the number of values Add has refused since New.
func (b *Baseline) Rejected() uint64 { return b.rejected }

// Put stores d as the day k, replacing whatever k held; a nil d deletes
// it. The Baseline keeps d: the caller must not change it afterwards. Put is
// how stored days are loaded at start-up.
func (b *Baseline) Put(k Key, d *Day) error {
	if k.Origin == "" {
		return errors.New("baseline: put a day without an origin")
	}
	if k.Origin == Live {
		b.live = nil
	}
	if d == nil {
		delete(b.days, k)
		return nil
	}
	b.days[k] = d
	return nil
}

// ReplaceImported stores d as the Import origin's day, replacing an earlier
// import of the same day and leaving the live windows alone, so importing
// a file again gives the same baseline as importing it once.
func (b *Baseline) ReplaceImported(day DayKey, d *Day) {
	_ = b.Put(Key{Import, day}, d) // cannot fail: the origin is set
}

// Get returns the day stored under k, or nil. The Day stays the Baseline's
// (Add changes a live day): encode it, do not keep it.
func (b *Baseline) Get(k Key) *Day { return b.days[k] }

// Keys returns every stored key, ordered by day and then origin.
func (b *Baseline) Keys() []Key {
	return slices.SortedFunc(maps.Keys(b.days), compareKeys)
}

func compareKeys(a, b Key) int {
	if c := cmp.Compare(a.Day, b.Day); c != 0 {
		return c
	}
	return cmp.Compare(a.Origin, b.Origin)
}

// Newest returns the latest day stored in any origin; ok is false when
// there is none.
func (b *Baseline) Newest() (day DayKey, ok bool) {
	for k := range b.days {
		if !ok || k.Day > day {
			day, ok = k.Day, true
		}
	}
	return day, ok
}

// first returns the oldest day inside the horizon at now.
func (b *Baseline) first(now time.Time) DayKey {
	return DayOf(now) - DayKey(b.opts.Days) + 1
}

// Prune drops every day older than the horizon at now and returns the keys
// it dropped, ordered, so the caller can delete them from storage too.
func (b *Baseline) Prune(now time.Time) []Key {
	first := b.first(now)
	var dropped []Key
	for k := range b.days {
		if k.Day < first {
			dropped = append(dropped, k)
		}
	}
	for _, k := range dropped {
		delete(b.days, k)
	}
	if b.liveKey < first {
		b.live = nil
	}
	slices.SortFunc(dropped, compareKeys)
	return dropped
}
