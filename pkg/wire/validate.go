package wire

import (
	"fmt"
	"time"
	"unicode/utf8"
)

// validator collects the first field a value's encoder would clamp. Its
// errors wrap ErrMalformed because that is what the field would be if it
// were sent unclamped.
type validator struct {
	kind Kind
	err  error
}

func (v *validator) fail(field, detail string) {
	if v.err == nil {
		v.err = fmt.Errorf("wire: %s: %s: %s: %w", v.kind, field, detail, ErrMalformed)
	}
}

func (v *validator) str(field, s string) {
	if len(s) > MaxStringLen {
		v.fail(field, fmt.Sprintf("string of %d bytes exceeds %d", len(s), MaxStringLen))
	} else if !utf8.ValidString(s) {
		v.fail(field, "invalid UTF-8")
	}
}

func (v *validator) count(field string, n int) {
	if n > MaxCount {
		v.fail(field, fmt.Sprintf("count %d exceeds %d", n, MaxCount))
	}
}

func (v *validator) strs(field string, ss []string) {
	v.count(field, len(ss))
	for _, s := range ss {
		v.str(field, s)
	}
}

func (v *validator) time(field string, t time.Time) {
	if !timeInRange(t) {
		v.fail(field, fmt.Sprintf("%s outside the int64 nanosecond range", t.Format(time.RFC3339Nano)))
	}
}
