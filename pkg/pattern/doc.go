// Package pattern reads, checks, writes and evaluates the library of known
// problem behaviours ("patterns") that Sluice recognises in running jobs:
// a metadata storm, a small-write flood, an fsync storm, one node doing a
// wide job's I/O, and so on. Each pattern says what the behaviour is, why
// it matters, what on-call staff could do, and how to recognise it: by a
// rule over each window's levels, grades and derived quantities, or by an
// example signature that package similarity compares with the job's.
//
// # Basics
//
// [Parse] reads one pattern file, [LoadDir] a site's directory of them,
// [Builtin] the library compiled into the binary (the files in
// pkg/pattern/builtin), and [Merge] lays a site's patterns over the
// built-ins: a site pattern with a built-in's name replaces it in place,
// the others are appended. [Pattern.Marshal] writes the same format (the
// `patterns learn` command writes a learned example with it) and
// [Describe] a short text for `patterns show`.
//
// A rule is evaluated window by window: build a [WindowView] of the
// window, ask [Rule.Holds], and push the answer into the job's
// [RuleState], which keeps the last N answers as a bitmask and returns the
// score. Example patterns are scored by package similarity; this package
// only carries their grades ([Example.Windows]).
//
// # File format, schema 1
//
// One pattern per file, a YAML mapping, file name ending in ".yaml".
// Unknown fields, repeated fields, anchors and aliases, and a second YAML
// document are errors. Text fields are trimmed; they must not be empty and
// must not contain control characters other than newline and tab.
//
//	field        required  meaning
//	schema       yes       1; any other value is refused, naming 1
//	name         yes       ^[a-z][a-z0-9_]{1,62}$, unique in a directory
//	title        yes       one line, at most 80 characters
//	description  yes       what the behaviour looks like (at most 4096 bytes)
//	rationale    yes       why it hurts a shared filesystem, or why it is recognised
//	severity     yes       info, warning or critical
//	advice       yes       what on-call staff could do
//	raise_after  no        consecutive matching windows before a flag is raised, 1..64, default 2
//	clear_after  no        consecutive windows without a match before it clears, 1..64, default 3
//	threshold    no        examples only: score at or above which a window matches, in (0, 1], default 0.8
//	rule         one of    a rule (below)
//	example      one of    an example (below)
//
// A rule:
//
//	rule:
//	  hold: {k: 2, n: 3}      # required: in at least k of the last n windows, 1 <= k <= n <= 64
//	  min_nodes: 4            # optional, default 1: jobs with fewer nodes never satisfy the rule
//	  all:                    # conditions that must all hold
//	    - {metric: read_bytes, level_at_most: normal}
//	    - {derived: mean_write_size, below: 65536}
//	  any:                    # conditions of which at least one must hold
//	    - {metric: creates, level: critical}
//	    - {metric: stat_ops, grade_at_least: 5}
//
// At least one of all and any is given, neither empty, each at most 32
// conditions. A window satisfies the rule when the job has at least
// min_nodes nodes, every condition of all holds and, if any is given, at
// least one of any holds. Each condition names exactly one subject and
// exactly one comparison:
//
//	{metric: M, level: L}           level of M >= L (L elevated or critical)
//	{metric: M, level_at_most: L}   level of M <= L (L normal or elevated)
//	{metric: M, grade_at_least: G}  grade of M >= G (G 1..6)
//	{metric: M, grade_at_most: G}   grade of M <= G (G 0..5)
//	{derived: Q, below: X}          Q < X, strictly (X > 0)
//	{derived: Q, above: X}          Q > X, strictly
//
// M is one of the twelve metrics (package metric), levels and grades are
// those of package coding (0 idle, 1 <= p50, 2 <=
// p75, 3 <= p90, 4 <= p99, 5 elevated, 6 critical). A comparison that
// always holds (level: normal, grade_at_least: 0, ...) or never holds
// (below: 0, a share above 1) is refused. The derived quantities, from the
// window's per-node rates (the same mean over nodes for every metric, so a
// ratio of rates is the ratio of the job's totals):
//
//	quantity            formula                                              unit
//	mean_read_size      read_bytes / read_ops                                bytes
//	mean_write_size     write_bytes / write_ops                              bytes
//	mean_transfer_size  (read_bytes + write_bytes) / (read_ops + write_ops)  bytes
//	meta_to_data_ratio  (opens + closes + creates + removes + stat_ops
//	                     + meta_updates) / max(1, read_ops + write_ops)      ratio
//	busiest_node_share  busiest node's share of the job's data bytes          0..1
//	node_spread         coefficient of variation of per-node data bytes      ratio
//	data_bytes          read_bytes + write_bytes                             bytes/s per node
//	sync_per_write      syncs / max(1, write_ops)                            ratio
//
// A mean size is undefined when its divisor is 0; busiest_node_share and
// node_spread are undefined for jobs of fewer than 2 nodes, so a rule
// using them must set min_nodes to 2 or more. A comparison with an
// undefined quantity does not hold, whichever its direction.
//
// Score and threshold of a rule: the score after a window is the fraction
// of the last n windows that satisfied the rule (windows before the job's
// first count as not satisfied), and the rule matches when at least k of
// them did. Its threshold is therefore always k/n, and score >= k/n is
// exactly "k of n" (a test checks the floating-point comparison for every
// k and n); a threshold field in a rule pattern is an error.
//
// An example:
//
//	example:
//	  method: sellers         # required: sellers, ks or euclidean (see package similarity)
//	  metrics: [creates, stat_ops]
//	  grades:                 # one grade string per listed metric, and no other
//	    creates: "566666"
//	    stat_ops: "456666"
//	  last: 36                # ks only, optional: compare with the job's last 36 windows, 1..1008
//
// metrics lists distinct metrics; grades gives each of them, and only
// them, a quoted string of grade digits as coding.ParseGrades reads it (spaces
// are ignored), all of the same length, 1 to 64 windows, oldest first.
// Without last, ks compares with all of the job's windows.
//
// Every error names the file, the line and the field, for example
//
//	metadata_storm.yaml:14: rule.any[0].metric: unknown metric "creats"
//
// and wraps [ErrInvalid]; [Parse] reports every error of a file, [LoadDir]
// every error of every file, and a name given in two files is an error
// naming both.
//
// # Caveats
//
// Levels and grades are site-relative (see packages level and grade), so
// the same file flags different absolute rates at different centres, as
// intended; the derived sizes and ratios are absolute, and their cuts (64
// KiB, 1 MiB, 0.5 syncs per write, 0.8 of the I/O on one node) are common
// practice, not measurements.
//
// The score of a rule says how many of the last n windows satisfied it,
// not how strongly: a window just past a cut counts as much as one far
// beyond it. raise_after and clear_after are carried for the flag
// machinery, which applies them; RuleState does not.
//
// A site cannot switch a built-in off, only replace it by a pattern of the
// same name. LoadDir ignores files not ending in ".yaml" (a ".yml" file is
// silently skipped) and subdirectories.
//
// A RuleState is not safe for concurrent use; Patterns are not changed by
// this package after Parse and may be shared read-only.
package pattern
