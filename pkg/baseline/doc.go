// Package baseline learns the centre's own distribution of window values and
// turns its quantiles into level cut points and grade cuts.
//
// # Basics
//
// Every closed job-window contributes one value per metric: the job's
// per-node rate in that window (the mean over the job's nodes of each node's
// rate, in bytes/s or ops/s). A value below the metric's idle floor
// (coding.IsIdle) is counted as idle and kept out of the distribution, so every
// quantile is a quantile of the non-idle windows.
//
// The distribution of one metric over one UTC calendar day is a DDSketch
// (Masson, Rim, Lee, "DDSketch: A Fast and Fully-Mergeable Quantile Sketch
// with Relative-Error Guarantees", PVLDB 12(12), 2019): values fall into
// logarithmic bins, so any quantile it returns is within [RelativeAccuracy]
// (1%) of the true value at that rank, and two sketches merge exactly by
// adding bin counts. A [Day] holds the twelve sketches of one day plus the
// idle counts; [DayKey] names the day as a count of days since 1970-01-01
// UTC.
//
// A [Baseline] keeps days by [Origin]: [Live] for what the aggregator learned
// itself ([Baseline.Add]), [Import] for what was imported (a CSV export of
// another baseline, see [Day.Bins] and [Day.AddWithCount]). Putting a day
// replaces that (origin, day) entry, so importing the same file twice is the
// same as importing it once, and never touches the live data. [Baseline.Cuts]
// merges every day of both origins inside the horizon (default 30 days) and
// computes, per metric, the level cut points at the elevated and critical
// quantiles (default p99 and p99.9), the five grade cuts of
// coding.GradeQuantiles, and whether the metric has seen enough non-idle windows
// ([Options.MinWindows], default 1000) for the learned cuts to replace the
// seed cuts (coding.Assemble over [Thresholds.Learned]).
//
// A Day is stored as bytes ([Day.MarshalBinary]): a version byte, the
// DEFLATE-compressed idle counts and sketches (in the ddsketch library's
// compact encoding), and a CRC-32C trailer. Decoding checks everything and returns an error
// wrapping [ErrCorrupt] for any input it cannot trust; it does not panic.
//
// # Caveats
//
// A sketch has at most [MaxBins] bins (ddsketch's collapsing lowest dense
// store). 2048 bins of 2% width cover about 17 decades, far more than the
// spread of non-idle rates (idle floors are 1 op/s and 10 kB/s), so in
// practice nothing collapses. If a day ever spans more, the lowest bins are
// folded together: the lowest quantiles lose their accuracy guarantee first
// while the top quantiles, the ones cut points come from, keep it.
//
// Quantiles are bin values, not observed values. [Day.Quantile] returns a
// bin's representative (within α of the exact quantile either way); a cut
// from [Baseline.Cuts] is the upper edge of the bin holding its quantile
// (never below the exact quantile, at most 2α/(1−α) ≈ 2.02% above it), so
// that "rate > cut" leaves out the whole bin and only windows ranked above
// the quantile (a share of about 1−q) are above a cut at quantile q. Two
// quantiles in the same bin give equal cuts: the elevated and critical cuts
// can coincide.
//
// A Baseline is not safe for concurrent use: its owner serialises calls (the
// aggregator calls it under its service lock). Cuts reuse scratch sketches
// inside the Baseline, so even two concurrent Cuts calls race.
package baseline
