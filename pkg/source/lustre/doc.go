// Package lustre reads the Lustre client's per-mount llite stats files
// (what "lctl get_param llite.*.stats" shows) and turns them into raw
// cumulative counters for the agent.
//
// # Basics
//
// [Parse] reads one stats file, [Stats.Raw] turns it into the counter map
// the agent consumes, and [Source] does both for every mount under an
// injected root. [Write] prints a file in the layout of a chosen Lustre
// version, for the simulator and for tests.
//
// The file is printed by lprocfs_stats_seq_show and lprocfs_stats_header
// in lustre/obdclass/lprocfs_status.c (lustre-release):
//
//	snapshot_time             1718000123.456789012 secs.nsecs
//	start_time                1717990000.000000001 secs.nsecs
//	elapsed_time              10123.456789011 secs.nsecs
//	read_bytes                1200 samples [bytes] 1 4194304 2147483648 5764607523034234880
//	ioctl                     7 samples [reqs]
//	open                      42 samples [usecs] 11 870 5210 3400000
//
// Each counter line is "<name> <count> samples [<unit>]" followed by 0, 3
// (min, max, sum) or 4 (plus sumsq) numbers. The file lives in
// /sys/kernel/debug/lustre/llite/<inst>/ from 2.12 (LU-8066, adb5aca3d6) and
// in /proc/fs/lustre/llite/<inst>/ before (lustre/llite/lproc_llite.c at
// v2_10_0); <inst> is "<fsname>-<16 hex digits>" from 2.12
// (lustre/llite/llite_lib.c).
//
// Version differences the parser accepts (all from lustre-release):
//   - 2.9 and older print "snapshot_time <sec>.<usec> secs.usecs" with %lu,
//     so the microseconds are not zero-padded: ".5" is 5 µs
//     (lprocfs_status.c at v2_5_0 and v2_9_0). 2.10+ print nanoseconds,
//     zero-padded to nine digits.
//   - 2.15 adds the start_time and elapsed_time header lines
//     (lprocfs_stats_header); from 2.15.58/2.16 they can be turned off with
//     /sys/fs/lustre/enable_stats_header (ea2cd3af7b, 2a498f06cc).
//   - Op counters are "[regs]" (sic) and count-only up to 2.13, "[usec]"
//     with latency min/max/sum/sumsq from 2.14 (LU-12631, ea58c4cfb0), and
//     "[usecs]" from 2.15.7 and 2.16 (LU-15642, b515c6ec2a); ioctl and
//     getxattr_hits stay count-only "[reqs]" (lustre/llite/lproc_llite.c).
//   - The name column is 25 characters wide up to 2.17.53 and 35 from
//     2.17.54 (314dcc614b). Lines are split on whitespace, never on columns.
//
// # Caveats
//
//   - Counters whose count is zero are not printed at all
//     (lprocfs_stats_seq_show): a counter that is absent is zero, and Raw
//     simply lacks its key.
//   - 2.15.0 and 2.15.1 take snapshot_time from ktime_get(), time since
//     boot, and never set start_time, which prints as 0 (fixed in 2.15.2 by
//     LU-16231, e42efe35ee). Parse treats a start_time of 0 as absent, and
//     Source stamps readings with its own clock instead of snapshot_time.
//   - Any write to the file clears the counters
//     (lprocfs_stats_seq_write), and a remount or module reload starts
//     them again. Only start_time (2.15.2+) tells a reset apart reliably;
//     otherwise the agent must treat a falling value as a reset.
//   - Counters are per-CPU and summed without a global lock, so one file is
//     not an atomic snapshot; and sumsq overflows easily, which is why Raw
//     leaves it out along with min and max, which are not cumulative.
//   - If stats_track_pid, stats_track_ppid or stats_track_gid is set, only
//     that process or group is counted (ll_stats_ops_tally in
//     lustre/llite/lproc_llite.c).
//   - debugfs is effectively root-only (LU-11850, 5803284ac3), so the agent
//     needs root to read 2.12+ files.
//   - Count, min, max and sum are printed as signed 64-bit (%lld); a line
//     with a negative number is treated as corrupt and skipped.
package lustre
