// Package matcher owns every evaluation of a job against the pattern
// library: rule conditions and derived quantities, the open window's
// bounds, Sellers, Kolmogorov-Smirnov and Euclidean comparisons of grade
// signatures, the verdicts the flag machine is given, and the
// explanations of those verdicts.
//
// # Basics
//
// [Compile] turns patterns (package pattern: the schema) into a [Library]
// shared by every job; each job gets a [JobMatch] from [Library.NewMatch].
// [JobMatch.Window] takes one closed window as a [View] and returns every
// pattern's [Verdict], in time proportional to the patterns' lengths, not
// to the job's age:
//
//   - a rule pattern pushes whether its conditions held ([RuleHolds]) into
//     a k-of-n window ([RuleState]); its score is the share of the last n
//     windows that held;
//   - a sellers example adds one column to Sellers' semi-global edit
//     distance matrix; its score is 1 − cost/length of the best match
//     ending at this window;
//   - a ks example compares the grade histograms of the job's last windows
//     with the pattern's; its score is 1 − D;
//   - a euclidean example compares the last windows with the pattern at
//     the one offset where they line up; its score is 1 − distance/max.
//
// [JobMatch.Open] evaluates rule patterns once more with the window still open
// as a provisional next window, without changing any state. The open
// window is given as two bounds ([Open]): "at least" conditions must hold
// on its counts so far spread over the whole window, "at most" ones on its
// rate so far, so an early match rests on a guess in neither direction.
// Example patterns are scored on closed windows only; grades of part of a
// window are not comparable with those of whole ones.
//
// [JobMatch.Explain] reads back how the latest verdict of a pattern came
// about: a rule's windows (and the open window's bounds) with each
// condition's test and value, or an example's grades beside the job's.
// The job keeps the last few closed windows for this (as many as the
// longest pattern looks at).
//
// # Comparing signatures
//
// A job's signature is, per metric, the sequence of grades ([coding.Grade])
// of its closed windows; a job window is a full vector of [metric.Count]
// grades indexed by [metric.ID]. A [Template] is a short example: m windows
// over a subset of k metrics (its metric indexes, in the order its window
// vectors use). One immutable Template is shared by every job; each job holds
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
//   - [Template.KS]: order-free. The two-sample Kolmogorov–Smirnov statistic
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
// A Job is not safe for concurrent use. Its state is not persisted: the
// aggregator rebuilds it after a restart by replaying the job's stored
// windows ([JobMatch.Window] on each, in order), which gives the same state.
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
package matcher
