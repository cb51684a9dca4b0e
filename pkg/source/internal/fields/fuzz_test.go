package fields_test

import (
	"bytes"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/internal/fields"
)

// asciiSpace is the separator set written out independently of IsSpace.
func asciiSpace(r rune) bool { return r < 0x80 && strings.ContainsRune(" \t\n\v\f\r", r) }

// FuzzSplit checks Split's invariants: it leaves line alone, no token holds
// a space byte, the tokens are those of bytes.FieldsFunc with the same
// separators (its UTF-8 decoding cannot hide an ASCII byte), and when tok
// was not filled they are the whole line with the spaces taken out.
func FuzzSplit(f *testing.F) {
	f.Add([]byte("   8       0 sda 4470 2330 447041 8079 6402 6776 495348 5651 0 2718 14836"), uint8(21))
	f.Add([]byte("read_bytes 17 samples [bytes] 4096 1048576 9437184 5570035712\n"), uint8(9))
	f.Add([]byte("\tREAD: 1 2 3 4 5 6 7 8 9\r\n"), uint8(3))
	f.Add([]byte(" \t\n\v\f\r\x85\xa0\x00 \xe2\x80\x83x"), uint8(4))
	f.Add([]byte(""), uint8(0))
	f.Fuzz(func(t *testing.T, line []byte, size uint8) {
		orig := bytes.Clone(line)
		tok := make([][]byte, size%40)
		n := fields.Split(line, tok)
		require.Equal(t, orig, line, "line is not changed")

		ref := bytes.FieldsFunc(line, asciiSpace)
		require.Equal(t, min(len(ref), len(tok)), n, "token count")
		var joined []byte
		for i, tk := range tok[:n] {
			require.NotEmpty(t, tk, "token %d", i)
			require.False(t, bytes.ContainsFunc(tk, asciiSpace), "token %d %q holds a space byte", i, tk)
			require.Equal(t, string(ref[i]), string(tk), "token %d", i)
			joined = append(joined, tk...)
		}
		var spaceless []byte // byte by byte: bytes.Map would rewrite invalid UTF-8
		for _, b := range line {
			if !asciiSpace(rune(b)) {
				spaceless = append(spaceless, b)
			}
		}
		if n < len(tok) {
			require.Equal(t, string(spaceless), string(joined), "not truncated: the tokens are the line without its spaces")
		}
	})
}

// FuzzFirst checks that First gives Split's first token, and that the rest
// splits into Split's other tokens.
func FuzzFirst(f *testing.F) {
	f.Add([]byte("\t        READ: 1 2 3 4 5 6 7 8 9"))
	f.Add([]byte(" \t\r\n"))
	f.Add([]byte("x"))
	f.Fuzz(func(t *testing.T, line []byte) {
		var all [64][]byte
		n := fields.Split(line, all[:])
		tok, rest := fields.First(line)
		if n == 0 {
			require.Nil(t, tok)
			require.Nil(t, rest)
			return
		}
		require.Equal(t, string(all[0]), string(tok))
		require.True(t, len(rest) == 0 || fields.IsSpace(rest[0]), "rest starts with a separator")
		var others [63][]byte // one fewer, so that both stop at the same token
		m := fields.Split(rest, others[:])
		require.Equal(t, strs(all[1:n], n-1), strs(others[:m], m))
	})
}

// FuzzUints checks that whatever Uints accepts, Split and ParseUint read to
// the same numbers, and that it accepts what the kernel prints.
func FuzzUints(f *testing.F) {
	f.Add([]byte(" 3044 3044 0 575316 563140 7 6088 6215 0"), uint8(9))
	f.Add([]byte(" 1 4194304 2472242752 6886455976423650\n"), uint8(4))
	f.Add([]byte(" 18446744073709551615 1"), uint8(2))
	f.Add([]byte("  1"), uint8(3))
	f.Add([]byte(" 1 "), uint8(3))
	f.Add([]byte(""), uint8(0))
	f.Fuzz(func(t *testing.T, b []byte, size uint8) {
		dst := make([]uint64, size%32)
		n, ok := fields.Uints(b, dst)
		if !ok {
			return
		}
		var tok [33][]byte
		m := fields.Split(b, tok[:])
		require.Equal(t, m, n, "token count")
		for i := range n {
			v, ok := fields.ParseUint(tok[i])
			require.True(t, ok, "token %d %q", i, tok[i])
			require.Equal(t, v, dst[i], "token %d", i)
		}
		// What Uints accepts is " <digits>" repeated and an optional
		// newline, nothing else.
		body := strings.TrimSuffix(string(b), "\n")
		require.NotContains(t, body, "  ")
		for i, c := range []byte(body) {
			require.True(t, c == ' ' || c >= '0' && c <= '9', "byte %d %q", i, c)
		}
		require.True(t, body == "" || body[0] == ' ')
	})
}
