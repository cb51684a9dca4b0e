package matcher

import "sluice/pkg/coding"

// Costs are the integer prices of the three edit operations turning a into
// b (or a pattern into a stretch of text): Insert adds a symbol of b,
// Delete drops a symbol of a, Substitute replaces a symbol of a by a
// different one of b (equal symbols cost nothing). Costs{1, 1, 1} gives
// Levenshtein's distance. Costs must not be negative.
type Costs struct {
	Insert, Delete, Substitute int
}

// unitCosts are Levenshtein's.
func unitCosts() Costs { return Costs{Insert: 1, Delete: 1, Substitute: 1} }

// Levenshtein returns the edit distance between a and b with unit costs:
// the least number of single-grade insertions, deletions and substitutions
// that turn a into b. It allocates O(len(b)) and takes O(len(a)·len(b)).
func Levenshtein(a, b []coding.Grade) int {
	return EditDistance(a, b, unitCosts())
}

// EditDistance returns the least total cost of edits turning a into b
// (Wagner and Fischer 1974), with prices c. It keeps one row of the
// dynamic-programming matrix.
func EditDistance[T comparable](a, b []T, c Costs) int {
	row := make([]int, len(b)+1)
	for j := range row {
		row[j] = j * c.Insert
	}
	for i := range a {
		row = editRow(row, a[i], b, c, (i+1)*c.Delete)
	}
	return row[len(b)]
}

// SellersRow returns the last row of Sellers' semi-global matrix for
// pattern in text: entry j is the least cost of turning pattern into any
// stretch of text ending just before text[j] (text[s:j] for some s ≤ j).
// Row 0 of the matrix is all zeros, so a match may start anywhere. The
// result has len(text)+1 entries; entry 0 is len(pattern)·c.Delete.
func SellersRow[T comparable](pattern, text []T, c Costs) []int {
	row := make([]int, len(text)+1)
	for i := range pattern {
		row = editRow(row, pattern[i], text, c, (i+1)*c.Delete)
	}
	return row
}

// editRow turns row i of the matrix (in place) into row i+1 for symbol x
// of the first string against b; first is the new row's entry 0.
func editRow[T comparable](row []int, x T, b []T, c Costs, first int) []int {
	diag := row[0]
	row[0] = first
	for j := range b {
		sub := diag
		if b[j] != x {
			sub += c.Substitute
		}
		diag = row[j+1]
		row[j+1] = min(sub, diag+c.Delete, row[j]+c.Insert)
	}
	return row
}
