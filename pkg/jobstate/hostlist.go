package jobstate

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
	"unicode"
)

// MaxHosts bounds how many names one host list may expand to.
const MaxHosts = 100000

// ErrHostList is wrapped by every host list parse error.
var ErrHostList = errors.New("bad host list")

// ExpandHosts expands a compact host list as batch schedulers print them:
// comma-separated names, where a bracket holds comma-separated numbers or
// ranges, zero-padded to the width written: "cn[001-003,010],login1" gives
// cn001 cn002 cn003 cn010 login1. Several brackets in one name multiply.
func ExpandHosts(list string) ([]string, error) {
	var out []string
	for _, item := range splitTop(list) {
		if item == "" {
			continue
		}
		names, err := expandOne(item, MaxHosts-len(out))
		if err != nil {
			return nil, fmt.Errorf("%w %q: %w", ErrHostList, list, err)
		}
		out = append(out, names...)
	}
	return out, nil
}

// splitTop splits on commas outside brackets.
func splitTop(s string) []string {
	var parts []string
	depth, start := 0, 0
	for i, r := range s {
		switch r {
		case '[':
			depth++
		case ']':
			depth--
		case ',':
			if depth == 0 {
				parts = append(parts, strings.TrimSpace(s[start:i]))
				start = i + 1
			}
		}
	}
	return append(parts, strings.TrimSpace(s[start:]))
}

func expandOne(item string, room int) ([]string, error) {
	open := strings.IndexByte(item, '[')
	if open < 0 {
		if strings.ContainsFunc(item, badHostRune) {
			return nil, fmt.Errorf("stray character in %q", item)
		}
		if room < 1 {
			return nil, fmt.Errorf("expands to more than %d names", MaxHosts)
		}
		return []string{item}, nil
	}
	end := strings.IndexByte(item[open:], ']')
	if end < 0 {
		return nil, fmt.Errorf("unclosed bracket in %q", item)
	}
	end += open
	prefix, body, rest := item[:open], item[open+1:end], item[end+1:]
	if strings.ContainsFunc(prefix, badHostRune) {
		return nil, fmt.Errorf("stray character before '[' in %q", item)
	}
	tails, err := expandOne(rest, room)
	if err != nil {
		return nil, err
	}
	if rest == "" {
		tails = []string{""}
	}
	var out []string
	for _, r := range strings.Split(body, ",") {
		nums, err := expandRange(r)
		if err != nil {
			return nil, err
		}
		for _, n := range nums {
			for _, t := range tails {
				if len(out) >= room {
					return nil, fmt.Errorf("expands to more than %d names", MaxHosts)
				}
				out = append(out, prefix+n+t)
			}
		}
	}
	return out, nil
}

// badHostRune reports characters no host name in a list may hold.
func badHostRune(r rune) bool {
	return r == ']' || r == '[' || unicode.IsSpace(r) || !unicode.IsPrint(r)
}

func expandRange(r string) ([]string, error) {
	lo, hi, isRange := strings.Cut(r, "-")
	if !isRange {
		hi = lo
	}
	a, err1 := strconv.ParseUint(lo, 10, 32)
	b, err2 := strconv.ParseUint(hi, 10, 32)
	if err1 != nil || err2 != nil || a > b {
		return nil, fmt.Errorf("bad range %q", r)
	}
	if b-a >= MaxHosts {
		return nil, fmt.Errorf("range %q expands to more than %d names", r, MaxHosts)
	}
	width := len(lo)
	out := make([]string, 0, b-a+1)
	for n := a; n <= b; n++ {
		s := strconv.FormatUint(n, 10)
		if len(s) < width {
			s = strings.Repeat("0", width-len(s)) + s
		}
		out = append(out, s)
	}
	return out, nil
}
