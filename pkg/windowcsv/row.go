package windowcsv

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"time"

	"sluice/pkg/metric"
)

// Row is one line of a window-value file: Count closed windows of one
// metric whose per-node rate was Rate, on the UTC day Day.
type Row struct {
	// Day is the UTC calendar day the windows closed, as a time at UTC
	// midnight.
	Day time.Time
	// Metric is the metric the rate is of.
	Metric metric.ID
	// Rate is the per-node rate in the metric's unit per second
	// ([metric.ID.Unit]); finite and not negative.
	Rate float64
	// Count is how many windows had this rate; at least 1.
	Count uint64
}

// ErrInvalidRow is wrapped by the error [Writer.Write] returns for a row it
// cannot write in the layout: an unknown metric, a negative, NaN or
// infinite rate, a zero count, or a day outside the years 0000 to 9999.
var ErrInvalidRow = errors.New("windowcsv: invalid row")

// check returns why r cannot be written, or nil.
func (r Row) check() error {
	switch {
	case !r.Metric.Valid():
		return fmt.Errorf("%w: unknown metric %v", ErrInvalidRow, r.Metric)
	case math.IsNaN(r.Rate) || math.IsInf(r.Rate, 0):
		return fmt.Errorf("%w: %v rate %v: not finite", ErrInvalidRow, r.Metric, r.Rate)
	case r.Rate < 0:
		return fmt.Errorf("%w: %v rate %v: negative", ErrInvalidRow, r.Metric, r.Rate)
	case r.Count == 0:
		return fmt.Errorf("%w: %v count 0", ErrInvalidRow, r.Metric)
	}
	if y := r.Day.UTC().Year(); y < 0 || y > 9999 {
		return fmt.Errorf("%w: day %v: year not in 0000-9999", ErrInvalidRow, r.Day)
	}
	return nil
}

// metricNames is metric.ID.String for every metric, indexed by ID.
var metricNames = func() (n [metric.Count]string) {
	for i := range n {
		n[i] = metric.ID(i).String()
	}
	return n
}()

// parseMetric looks b up among the metric names without allocating: the
// comparison string(b) == s does not copy b. A linear scan of the twelve
// names, most rejected by their length, took 7-9 ns against 10-11 ns for
// a map[string]metric.ID lookup (AMD EPYC VM, Go 1.26).
func parseMetric(b []byte) (metric.ID, bool) {
	for i := range metricNames {
		if string(b) == metricNames[i] {
			return metric.ID(i), true
		}
	}
	return 0, false
}

// Reasons a field is malformed; they end RowError messages.
const (
	reasonEmpty       = "empty"
	reasonDayLayout   = "not YYYY-MM-DD"
	reasonMonth       = "month not 01-12"
	reasonNoSuchDay   = "no such day"
	reasonMetric      = "unknown metric"
	reasonNotNumber   = "not a number"
	reasonNotFinite   = "not finite"
	reasonRange       = "out of range"
	reasonNegative    = "negative"
	reasonNotInteger  = "not a positive integer"
	reasonCountZero   = "zero (a count is at least 1)"
	reasonCountRange  = "over 2^64-1"
	reasonQuote       = "quote character (quoted fields are not part of the layout)"
	reasonLineTooLong = "line over 64 KiB"
)

// parseDay parses a YYYY-MM-DD day into UTC midnight, or returns why it
// cannot. The fixed layout is checked byte by byte; time.Date then
// normalises impossible days (Feb 30 becomes Mar 1 or 2), which is how
// they are caught.
func parseDay(b []byte) (time.Time, string) {
	if len(b) != 10 || b[4] != '-' || b[7] != '-' {
		return time.Time{}, reasonDayLayout
	}
	y, ok1 := digits(b[0:4])
	m, ok2 := digits(b[5:7])
	d, ok3 := digits(b[8:10])
	if !ok1 || !ok2 || !ok3 {
		return time.Time{}, reasonDayLayout
	}
	if m < 1 || m > 12 {
		return time.Time{}, reasonMonth
	}
	t := time.Date(y, time.Month(m), d, 0, 0, 0, 0, time.UTC)
	if d < 1 || t.Day() != d || t.Month() != time.Month(m) {
		return time.Time{}, reasonNoSuchDay
	}
	return t, ""
}

// digits parses a short run of ASCII digits (at most 4 here).
func digits(b []byte) (int, bool) {
	n := 0
	for _, c := range b {
		if c < '0' || c > '9' {
			return 0, false
		}
		n = n*10 + int(c-'0')
	}
	return n, true
}

// parseRate parses a finite non-negative float, or returns why it cannot.
// string(b) does not allocate for short fields: ParseFloat copies its
// argument before keeping it in an error, so the conversion stays on the
// stack.
func parseRate(b []byte) (float64, string) {
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		if errors.Is(err, strconv.ErrRange) {
			return 0, reasonRange
		}
		return 0, reasonNotNumber
	}
	switch {
	case math.IsNaN(v) || math.IsInf(v, 0):
		return 0, reasonNotFinite
	case v < 0:
		return 0, reasonNegative
	case v == 0:
		return 0, "" // "-0" reads as 0
	}
	return v, ""
}

// parseCount parses a decimal count from 1 to 2^64-1, or returns why it
// cannot.
func parseCount(b []byte) (uint64, string) {
	var v uint64
	for _, c := range b {
		d := uint64(c) - '0'
		if d > 9 {
			return 0, reasonNotInteger
		}
		if v > (math.MaxUint64-d)/10 {
			return 0, reasonCountRange
		}
		v = v*10 + d
	}
	if v == 0 {
		return 0, reasonCountZero
	}
	return v, ""
}

// appendDay appends t's UTC calendar day as YYYY-MM-DD; the year must be in
// 0000-9999.
func appendDay(b []byte, t time.Time) []byte {
	y, m, d := t.UTC().Date()
	return append(b,
		byte('0'+y/1000), byte('0'+y/100%10), byte('0'+y/10%10), byte('0'+y%10), '-',
		byte('0'+int(m)/10), byte('0'+int(m)%10), '-',
		byte('0'+d/10), byte('0'+d%10))
}
