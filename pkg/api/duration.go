package api

import (
	"fmt"
	"strconv"
	"strings"
	"time"
)

// ParseDuration reads a duration as people write one for a silence: Go's
// units (90m, 2h30m) and also days and weeks (3d, 1d12h, 2w), a day being
// 24 hours.
func ParseDuration(s string) (time.Duration, error) {
	in := strings.TrimSpace(s)
	var total time.Duration
	for in != "" {
		i := strings.IndexFunc(in, func(r rune) bool { return (r < '0' || r > '9') && r != '.' })
		if i <= 0 || (in[i] != 'd' && in[i] != 'w') {
			break // the rest is Go's units, or an error Go's parser names
		}
		n, err := strconv.ParseFloat(in[:i], 64)
		if err != nil {
			return 0, fmt.Errorf("duration %q: %w", s, err)
		}
		unit := 24 * time.Hour
		if in[i] == 'w' {
			unit *= 7
		}
		total += time.Duration(n * float64(unit))
		in = in[i+1:]
	}
	if in != "" {
		d, err := time.ParseDuration(in)
		if err != nil {
			return 0, fmt.Errorf("duration %q: want a number and a unit: 30m, 2h, 3d, 1w, 1d12h", s)
		}
		total += d
	}
	if s == "" {
		return 0, fmt.Errorf("empty duration: want a number and a unit: 30m, 2h, 3d, 1w, 1d12h")
	}
	return total, nil
}

// FormatDuration writes d the way ParseDuration reads it, with days when
// d is a day or more: "3d", "1d12h0m0s" is written "1d12h".
func FormatDuration(d time.Duration) string {
	if d < 24*time.Hour {
		s := d.String()
		if strings.HasSuffix(s, "m0s") {
			s = s[:len(s)-2]
		}
		if strings.HasSuffix(s, "h0m") {
			s = s[:len(s)-2]
		}
		return s
	}
	days := d / (24 * time.Hour)
	rest := d % (24 * time.Hour)
	if rest == 0 {
		return fmt.Sprintf("%dd", days)
	}
	return fmt.Sprintf("%dd%s", days, FormatDuration(rest))
}
