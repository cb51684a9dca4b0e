package coding

import (
	"fmt"

	"sluice/pkg/metric"
)

// Grades is one window's grade per metric, indexed by metric.ID.
type Grades [metric.Count]Grade

// MarshalText writes the grades as a digit string in metric order, e.g.
// "000000600400", so that JSON records stay short and readable.
func (g Grades) MarshalText() ([]byte, error) { return []byte(FormatGrades(g[:])), nil }

// UnmarshalText reads the form MarshalText writes.
func (g *Grades) UnmarshalText(b []byte) error {
	gs, err := ParseGrades(string(b))
	if err != nil {
		return err
	}
	if len(gs) != len(g) {
		return fmt.Errorf("grades %q: %d digits, want %d", b, len(gs), len(g))
	}
	copy(g[:], gs)
	return nil
}

// Coding is what windows and live windows are coded against: the level cut
// points and the grade cuts of each metric. The aggregator replaces it
// whenever the baseline is recomputed; windows already closed keep the
// coding they were closed with.
type Coding struct {
	Levels Cuts
	Grades [metric.Count]GradeCuts
}

// Seed is the coding before the baseline has learned anything: the seed
// cut points, and grade cuts from SeedGradeCuts.
func Seed(cuts Cuts) Coding {
	c := Coding{Levels: cuts}
	for i, cut := range cuts {
		c.Grades[i] = SeedGradeCuts(Floor(metric.ID(i)), cut.Elevated, cut.Critical)
	}
	return c
}

// Code returns the levels and grades of rates.
func (c *Coding) Code(rates metric.Rates) (Levels, Grades) {
	var lv Levels
	var gr Grades
	for i, r := range rates {
		id := metric.ID(i)
		lv[i] = c.Levels.Classify(id, r)
		gr[i] = c.Grades[i].Code(r, IsIdle(id, r))
	}
	return lv, gr
}

// Learned is what the baseline learned of one metric.
type Learned struct {
	// Level holds the cut points at the elevated and critical quantiles.
	Level Cut
	// Grade holds the cuts at GradeQuantiles(elevated, critical);
	// Grade[3] and Grade[4] equal Level's two cuts.
	Grade GradeCuts
	// Enough says the cuts rest on enough windows, and are sane enough, to
	// replace the seed ones.
	Enough bool
}

// Basis says what a metric's cut points in force rest on.
type Basis uint8

// The bases of cut points.
const (
	// BasisSeed is the configured seed cuts (DefaultCuts or the site's
	// overrides).
	BasisSeed Basis = iota
	// BasisLearned is the baseline's quantiles.
	BasisLearned
)

// String returns "seed" or "learned", as used in labels and the API.
func (b Basis) String() string {
	switch b {
	case BasisSeed:
		return "seed"
	case BasisLearned:
		return "learned"
	}
	return fmt.Sprintf("basis(%d)", uint8(b))
}

// MarshalText encodes the basis by name.
func (b Basis) MarshalText() ([]byte, error) { return []byte(b.String()), nil }

// UnmarshalText decodes a basis name.
func (b *Basis) UnmarshalText(t []byte) error {
	for _, c := range []Basis{BasisSeed, BasisLearned} {
		if c.String() == string(t) {
			*b = c
			return nil
		}
	}
	return fmt.Errorf("unknown basis %q; want seed or learned", t)
}

// Bases holds one Basis per metric.
type Bases [metric.Count]Basis

// Assemble is the coding in force: the seed coding, with every metric whose
// learned cuts are Enough taking the learned level and grade cuts, and the
// basis of each metric's cuts. The result's level cuts pass Cuts.Validate
// whenever seed does.
func Assemble(seed Cuts, learned *[metric.Count]Learned) (Coding, Bases) {
	c := Seed(seed)
	var b Bases
	for i, l := range learned {
		if l.Enough {
			c.Levels[i], c.Grades[i] = l.Level, l.Grade
			b[i] = BasisLearned
		}
	}
	return c, b
}
