package matcher_test

import (
	"testing"

	"github.com/stretchr/testify/assert"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
)

// letterGrades maps each letter of s to a grade by first appearance in
// alphabet (at most seven letters), so Levenshtein on grades can be checked
// against worked examples written in letters.
func letterGrades(alphabet, s string) []coding.Grade {
	out := make([]coding.Grade, 0, len(s))
	for _, r := range s {
		for i, a := range alphabet {
			if a == r {
				out = append(out, coding.Grade(i))
			}
		}
	}
	return out
}

// Worked examples, from memory: kitten/sitting = 3 and flaw/lawn = 2 are the
// classic examples of the Wikipedia article "Levenshtein distance";
// intention/execution is worked in Jurafsky and Martin, Speech and Language
// Processing (3rd ed. draft), ch. 2 "Minimum Edit Distance": 5 with unit
// costs, 8 with substitution cost 2 (their Levenshtein variant).
func TestEditDistanceWorkedExamples(t *testing.T) {
	unit := matcher.Costs{Insert: 1, Delete: 1, Substitute: 1}
	jm := matcher.Costs{Insert: 1, Delete: 1, Substitute: 2}
	tests := []struct {
		name string
		a, b string
		c    matcher.Costs
		want int
	}{
		{"kitten sitting", "kitten", "sitting", unit, 3},
		{"flaw lawn", "flaw", "lawn", unit, 2},
		{"intention execution unit", "intention", "execution", unit, 5},
		{"intention execution sub 2", "intention", "execution", jm, 8},
		{"empty to word", "", "abc", unit, 3},
		{"word to empty", "abc", "", unit, 3},
		{"both empty", "", "", unit, 0},
		{"equal", "survey", "survey", unit, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			assert.Equal(t, tt.want, matcher.EditDistance([]rune(tt.a), []rune(tt.b), tt.c))
		})
	}
}

// The same examples through the grade form (seven letters at most).
func TestLevenshteinOnGrades(t *testing.T) {
	const kitten = "kitensg" // every letter of kitten and sitting
	assert.Equal(t, 3, matcher.Levenshtein(letterGrades(kitten, "kitten"), letterGrades(kitten, "sitting")))
	const flaw = "flawn"
	assert.Equal(t, 2, matcher.Levenshtein(letterGrades(flaw, "flaw"), letterGrades(flaw, "lawn")))
	g, err := coding.ParseGrades("0012566")
	assert.NoError(t, err)
	assert.Equal(t, 0, matcher.Levenshtein(g, g))
	assert.Equal(t, len(g), matcher.Levenshtein(g, nil))
}

// Navarro, "A guided tour to approximate string matching", ACM Computing
// Surveys 33(1), 2001, section 5.1, works the search of "survey" in
// "surgery" with k = 2 by the Sellers matrix (row 0 all zeros). From
// memory, its figure marks the text positions where the last row is at
// most 2; the full matrix below was computed by hand for this test.
func TestSellersRowNavarroSurvey(t *testing.T) {
	unit := matcher.Costs{Insert: 1, Delete: 1, Substitute: 1}
	// Rows of the matrix, pattern prefix "", s, su, sur, surv, surve, survey
	// against text "", s, su, ..., surgery.
	rows := [][]int{
		{0, 0, 0, 0, 0, 0, 0, 0},
		{1, 0, 1, 1, 1, 1, 1, 1},
		{2, 1, 0, 1, 2, 2, 2, 2},
		{3, 2, 1, 0, 1, 2, 2, 3},
		{4, 3, 2, 1, 1, 2, 3, 3},
		{5, 4, 3, 2, 2, 1, 2, 3},
		{6, 5, 4, 3, 3, 2, 2, 2},
	}
	pattern := []rune("survey")
	for i, want := range rows {
		assert.Equal(t, want, matcher.SellersRow(pattern[:i], []rune("surgery"), unit), "row %d", i)
	}
}
