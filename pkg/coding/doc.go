// Package coding turns a per-node rate into the codes everything above it
// reasons in: a level (normal, elevated, critical) against two cut points,
// and a grade (0 idle, then 1 to 6) against five quantile cuts. It also
// assembles the coding in force from the seed cut points and what the
// baseline has learned, in one place.
//
// # Levels
//
// [Cuts] holds two cut points per metric. A rate strictly above the
// critical cut is [Critical], above the elevated cut [Elevated], otherwise
// [Normal]. [DefaultCuts] are rule-of-thumb seed values used until the
// centre's learned baseline replaces them.
//
// # Grades
//
// There are seven grades. [GradeIdle] (0) is a window with no activity
// worth the name (below the metric's idle floor, see [IsIdle]); grades 1 to
// 6 split the centre's non-idle windows at five quantiles of the baseline:
//
//	grade  rate r against the baseline's non-idle windows
//	0      idle
//	1      r <= p50
//	2      p50  < r <= p75
//	3      p75  < r <= p90
//	4      p90  < r <= p99     (the elevated quantile)
//	5      p99  < r <= p99.9   (elevated)
//	6      r > p99.9           (critical)
//
// The two top cuts are the level quantiles in force, so grades 5 and 6 mean
// exactly "elevated" and "critical" and a signature can be read as levels.
// The bulk of the distribution gets coarse grades (half, quarter, tenth)
// because jobs that differ inside it are alike for every purpose staff care
// about; resolution is spent in the tail, where problems live. Grades are
// the letters signatures are written in and what the matcher compares.
//
// # The coding in force
//
// A [Coding] is the level cuts and grade cuts of every metric. [Seed] gives
// the coding before anything is learned; [Assemble] lays the baseline's
// learned cuts over the seed, metric by metric, and says which [Basis]
// each metric's cuts rest on. The aggregator, the evaluation and the tests
// all take their coding from these two functions.
//
// # Caveats
//
// The seed cut points are common practice, not measurements of any system:
// a compute node sustaining under about 1 metadata op/s or about 10 kB/s is
// not I/O-relevant, and a node can sustain a few GB/s of streaming I/O.
// Sites should override them (or let the baseline learn them).
//
// Grades are site-relative and unit-free: grade 6 means "rarer than one
// window in a thousand at this centre", not any fixed rate. A pattern
// written in grades therefore moves between centres, but two centres'
// grades for the same rate differ.
package coding
