// Package similarity scores how much a running job's grade signature looks
// like a pattern, as each of the job's windows closes.
//
// # Basics
//
// A job's signature is, per metric, the sequence of grades ([coding.Grade])
// of its closed windows; a job window is a full vector of [metric.Count]
// grades indexed by [metric.ID]. A [Pattern] is a short example: m windows
// over a subset of k metrics (its metric indexes, in the order its window
// vectors use). One immutable Pattern is shared by every job; each job holds
// a small per-pattern state that is fed one window at a time, in O(m·k)
// time and without allocating. Three ways to compare are provided:
//
//   - [Sellers]: ordered, tolerant of stretch. Sellers' semi-global edit
//     distance (1980): the whole pattern is matched against any stretch of
//     the job's windows ending at the newest one. Substituting a pattern
//     window for a job window costs the mean over the pattern's metrics of
//     |a−b|/6, so 0 for equal windows and 1 for opposite ones (0 against 6
//     in every metric); a pattern window with no job window (deletion) or a
//     job window with no pattern window (insertion) costs 1. The cost is in
//     windows. Score = max(0, 1 − cost/m): 1 means the pattern occurs exactly
//     (ending at the newest window), s means the cheapest alignment costs
//     (1−s)·m windows' worth of differences, 0 means nothing alike (no
//     alignment beats treating all m pattern windows as missing).
//   - [Pattern.KS]: order-free. The two-sample Kolmogorov–Smirnov statistic
//     D = sup |F_pattern − F_job| between grade distributions, computed from
//     7-bin histograms in O(7) per metric. A job's per-metric histograms
//     ([Histograms], optionally over only its last n windows) are kept once
//     per job and read by every KS pattern. For several metrics D is the
//     largest per-metric statistic. Score = 1 − D: 1 means every metric's
//     grades have exactly the pattern's distribution, 0 means for some metric
//     the two have no grade range in common (one lies entirely below the
//     other). [KSCritical] gives the asymptotic critical value to test D
//     against.
//   - [Shape]: ordered and rigid. The Euclidean distance, grades taken as
//     numbers, between the pattern and the job's last m windows.
//     Score = 1 − dist/(6·sqrt(m·k)): 1 means the last m windows equal the
//     pattern, 0 means they are opposite in every cell (0 against 6).
//
// [Sellers] and [Shape] report the cost and score at the newest window
// ([Sellers.Last], [Shape.Last]) and the best seen since the last Reset
// ([Sellers.Best], [Shape.Best]) as a [Match], whose Start says since which
// window the occurrence runs. [Levenshtein], [EditDistance] and [SellersRow]
// are the plain, batch forms the streaming types are tested against.
//
// # Caveats
//
// Grades are ordinal, but the Sellers and Shape costs treat them as evenly
// spaced numbers (|a−b|, (a−b)²): grade 1 against 2 costs as much as 5
// against 6, although the quantile gap differs.
//
// Sellers may match a shorter stretch than m windows when deleting pattern
// windows is cheaper than aligning them; its cost never exceeds m (delete
// all), so its score reaches 0 only when nothing beats that. Ties between
// equally cheap occurrences go to the latest start (the shortest stretch);
// Best keeps the latest of equally good ends.
//
// The KS critical values are asymptotic and for continuous distributions.
// Grades take seven values, and with ties the test is conservative (the
// true level is below α); for a pattern of several metrics each metric is a
// separate test, so the family's level is not α either. Use the critical
// value as a threshold on a documented scale, not as an exact p-value.
//
// Job windows must hold valid grades (below [coding.GradeCount]) for every metric
// a pattern uses, as [coding.GradeCuts.Code] produces; shorter windows panic.
// No type is safe for concurrent use: the owner of a job serialises its
// pushes.
package similarity
