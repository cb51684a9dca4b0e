// Package fields splits the lines of /proc- and debugfs-style counter files
// into whitespace-separated tokens without allocating.
//
// # Basics
//
// [Split] stores the tokens of a line in a slice the caller provides,
// usually backed by a fixed array on the stack, and returns how many it
// stored:
//
//	var tok [maxTokens + 1][]byte
//	n := fields.Split(line, tok[:])
//	if n == len(tok) {
//		// more than maxTokens tokens: not a line of this format
//	}
//
// The tokens alias line. [IsSpace] is the separator test Split uses: space,
// \t, \n, \v, \f and \r, the set of C's isspace in the "C" locale. The
// sources' writers (lustre.Write) refuse these bytes inside names, so what
// they write splits back the same.
//
// # Caveats
//
// Split stops at len(tok) tokens and ignores the rest of the line, so a
// caller that must reject lines with too many tokens passes one slot more
// than it needs and checks for a full slice, as above. Tokens stay valid
// only as long as line does. Any byte but those six is a token byte, 0x85
// and 0xA0 included (the kernel's own isspace, lib/ctype.c, takes 0xA0 as a
// space, but nothing it prints in these files uses it): the files are bytes,
// not UTF-8 or Latin-1 text.
package fields
