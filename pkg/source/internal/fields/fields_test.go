package fields_test

import (
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/source/internal/fields"
)

// strs turns the first n tokens into strings, for comparison.
func strs(tok [][]byte, n int) []string {
	out := make([]string, n)
	for i := range n {
		out[i] = string(tok[i])
	}
	return out
}

func TestSplit(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name string
		line string
		size int // len(tok)
		want []string
	}{
		{name: "empty", line: "", size: 4, want: []string{}},
		{name: "only spaces", line: " \t\r\n\v\f ", size: 4, want: []string{}},
		{name: "one token", line: "abc", size: 4, want: []string{"abc"}},
		{name: "kernel layout", line: "   8       0 sda 4470\n", size: 5, want: []string{"8", "0", "sda", "4470"}},
		{name: "every separator", line: "a b\tc\nd\ve\ff\rg", size: 8, want: []string{"a", "b", "c", "d", "e", "f", "g"}},
		{name: "runs count once", line: "\t a \t\t b  ", size: 4, want: []string{"a", "b"}},
		{name: "exactly fills tok", line: "a b c", size: 3, want: []string{"a", "b", "c"}},
		{name: "more than tok: stops, returns len(tok)", line: "a b c d e", size: 3, want: []string{"a", "b", "c"}},
		{name: "trailing spaces after a full tok", line: "a b c   ", size: 3, want: []string{"a", "b", "c"}},
		{name: "no slot", line: "a b", size: 0, want: []string{}},
		{name: "no slot, blank line", line: "  ", size: 0, want: []string{}},
		{name: "non-ASCII bytes are token bytes", line: "x\x85y \xa0 \x00z", size: 4, want: []string{"x\x85y", "\xa0", "\x00z"}},
		{name: "lustre counter line", line: "read_bytes                17 samples [bytes] 4096 1048576 9437184 5570035712", size: 9,
			want: []string{"read_bytes", "17", "samples", "[bytes]", "4096", "1048576", "9437184", "5570035712"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			line := []byte(tt.line)
			tok := make([][]byte, tt.size)
			n := fields.Split(line, tok)
			require.Equal(t, tt.want, strs(tok, n))
			for i := n; i < len(tok); i++ {
				assert.Nil(t, tok[i], "slot %d past the tokens is left alone", i)
			}
		})
	}
}

func TestSplitAliasesLine(t *testing.T) {
	t.Parallel()
	line := []byte("ab cd")
	var tok [2][]byte
	require.Equal(t, 2, fields.Split(line, tok[:]))
	line[3] = 'X'
	require.Equal(t, "Xd", string(tok[1]), "tokens are subslices of line")
}

func TestSplitAllocatesNothing(t *testing.T) {
	line := []byte("  8 0 sda 1 2 3 4 5 6 7 8 9 10 11\n")
	allocs := testing.AllocsPerRun(100, func() {
		var tok [21][]byte
		if fields.Split(line, tok[:]) != 14 {
			t.Fatal("wrong count")
		}
	})
	require.Zero(t, allocs)
}

func TestIsSpace(t *testing.T) {
	t.Parallel()
	// The set of C's isspace in the "C" locale (C11 7.4.1.10): space,
	// \t, \n, \v, \f, \r.
	want := " \t\n\v\f\r"
	for b := range 256 {
		assert.Equal(t, strings.IndexByte(want, byte(b)) >= 0, fields.IsSpace(byte(b)), "byte %#x", b)
	}
}

// line20 is a 5.5+ /proc/diskstats line, the longest line a source splits
// on every read.
var line20 = []byte("   8       0 sda 4470 2330 447041 8079 6402 6776 495348 5651 0 2718 14836 1087 7 717540 948 96 158\n")

func BenchmarkSplit(b *testing.B) {
	var tok [21][]byte
	b.SetBytes(int64(len(line20)))
	b.ReportAllocs()
	for b.Loop() {
		if fields.Split(line20, tok[:]) != 20 {
			b.Fatal("wrong count")
		}
	}
}

func TestParseUintAgreesWithStrconv(t *testing.T) {
	// Reference: the standard library's strconv.ParseUint(s, 10, 64), with
	// signs and underscores (which it accepts in some forms) ruled out.
	for _, in := range []string{"0", "7", "18446744073709551615", "18446744073709551616", "00012", "", "-1", "+1", "1_000", "12a", "9999999999999999999", "99999999999999999999", " 1"} {
		got, ok := fields.ParseUint([]byte(in))
		want, err := strconv.ParseUint(in, 10, 64)
		plain := err == nil && !strings.ContainsAny(in, "+-_ ")
		assert.Equal(t, plain, ok, "%q", in)
		if plain {
			assert.Equal(t, want, got, "%q", in)
		}
	}
}

func FuzzParseUint(f *testing.F) {
	for _, s := range []string{"0", "18446744073709551615", "18446744073709551616", "x"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		got, ok := fields.ParseUint([]byte(in))
		want, err := strconv.ParseUint(in, 10, 64) // reference: the standard library
		plain := err == nil && !strings.ContainsAny(in, "+-_")
		if ok != plain || (ok && got != want) {
			t.Fatalf("ParseUint(%q) = %d, %v; strconv says %d, %v", in, got, ok, want, err)
		}
	})
}

func TestUints(t *testing.T) {
	t.Parallel()
	tests := []struct {
		in   string
		size int
		want []uint64 // nil: not accepted
	}{
		{in: " 3044 3044 0 575316 563140 7 6088 6215 0", size: 9, want: []uint64{3044, 3044, 0, 575316, 563140, 7, 6088, 6215, 0}},
		{in: " 1 4194304\n", size: 4, want: []uint64{1, 4194304}},
		{in: "", size: 1, want: []uint64{}},
		{in: " 1 2 3", size: 2},                // more than dst holds
		{in: "  1", size: 2},                   // two spaces
		{in: " 1 ", size: 2},                   // trailing space
		{in: "\t1", size: 2},                   // a tab
		{in: " 1\r\n", size: 2},                // CRLF
		{in: " -1", size: 2},                   // a sign
		{in: " 1x", size: 2},                   // not a number
		{in: " 18446744073709551615", size: 1}, // 20 digits: the general path decides
		{in: " 9999999999999999999", size: 1, want: []uint64{9999999999999999999}},
	}
	for _, tt := range tests {
		dst := make([]uint64, tt.size)
		n, ok := fields.Uints([]byte(tt.in), dst)
		require.Equal(t, tt.want != nil, ok, "%q", tt.in)
		if ok {
			require.Equal(t, tt.want, dst[:n], "%q", tt.in)
		}
	}
}
