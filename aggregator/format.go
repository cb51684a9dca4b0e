package main

import (
	"fmt"
	"strings"
	"time"
	"unicode"
)

// stamp writes a time for people: date with year, time, and the zone, in
// the local zone ("2026-12-02 14:05:10 CET"); "-" for none.
func stamp(t time.Time) string {
	if t.IsZero() {
		return "-"
	}
	return t.Local().Format("2006-01-02 15:04:05 MST")
}

// human prints a rate with an SI prefix: 1.5k/s, 600MB/s.
func human(v float64, bytes bool) string {
	unit := "/s"
	if bytes {
		unit = "B/s"
	}
	for _, p := range []struct {
		f float64
		s string
	}{{1e9, "G"}, {1e6, "M"}, {1e3, "k"}} {
		if v >= p.f {
			return fmt.Sprintf("%.3g%s%s", v/p.f, p.s, unit)
		}
	}
	return fmt.Sprintf("%.3g%s", v, unit)
}

// dash is s for a table cell, "-" when empty, with anything a terminal
// would act on (escape sequences, control characters) made visible
// instead: user and job names come from the scheduler as they were typed.
func dash(s string) string {
	if s == "" {
		return "-"
	}
	return clean(s)
}

// clean replaces control characters with their escaped form (\x1b), and
// tabs and newlines too, which would break a table.
func clean(s string) string {
	if strings.IndexFunc(s, unicode.IsControl) < 0 {
		return s
	}
	var b strings.Builder
	for _, r := range s {
		if unicode.IsControl(r) {
			fmt.Fprintf(&b, "\\x%02x", r)
			continue
		}
		b.WriteRune(r)
	}
	return b.String()
}
