// Package block reads the kernel's per-block-device I/O statistics,
// /proc/diskstats, and turns them into raw cumulative counters for the
// agent.
//
// # Basics
//
// [Parse] reads one file into [Stats], one [Device] per line, and [Source]
// reads <procRoot>/diskstats and reports one reading per included device.
// The fields are described in Documentation/admin-guide/iostats.rst and
// printed by diskstats_show in block/genhd.c (checked against Linux 6.12):
//
//	8       0 sda 4470 2330 447041 8079 6402 6776 495348 5651 0 2718 14836 1087 7 717540 948 96 158
//
// Each line is major, minor, name and then 11 statistics (14 tokens, before
// Linux 4.18), 15 (18 tokens, 4.18+ adds discards) or 17 (20 tokens, 5.5+
// adds flushes). Lines are split on whitespace; a line with another token
// count, or a token that is not an unsigned decimal number where one is
// due, is skipped and counted as malformed.
//
// A reading's key is "block:<name>" and its Epoch is empty. Its counters
// use these raw names; a field the line does not have is left out rather
// than reported as zero:
//
//	field  raw name           unit          kernel type     since
//	 1     reads              reads         unsigned long
//	 2     reads_merged       reads         unsigned long
//	 3     sectors_read       512-byte      unsigned long
//	 4     read_ms            ms            unsigned int *
//	 5     writes             writes        unsigned long
//	 6     writes_merged      writes        unsigned long
//	 7     sectors_written    512-byte      unsigned long
//	 8     write_ms           ms            unsigned int *
//	 9     (in flight)        -             unsigned int    not reported: a gauge
//	10     io_ticks_ms        ms            unsigned int *
//	11     weighted_ms        ms            unsigned int *
//	12     discards           discards      unsigned long   4.18
//	13     discards_merged    discards      unsigned long   4.18
//	14     sectors_discarded  512-byte      unsigned long   4.18
//	15     discard_ms         ms            unsigned int *  4.18
//	16     flushes            flushes       unsigned long   5.5
//	17     flush_ms           ms            unsigned int *  5.5
//	 -     read_bytes         bytes         sectors_read × 512
//	 -     write_bytes        bytes         sectors_written × 512
//
// The fields marked * wrap at 2^32 ms (about 49.7 days of accumulated
// time; far less for weighted_ms on a busy disk, which adds the time of
// every queued request). The Source unwraps them per device, so the values
// it reports are 64-bit and only fall on a real reset. The rule, per
// device, comparing each read with the previous one:
//   - A count field (unsigned long) lower than before is a reset: the
//     device was removed and added again. Every field of the device then
//     restarts from its raw value.
//   - Otherwise a millisecond field that went from at least 2^31 to below
//     2^31 has wrapped once, and 2^32 is added to it from then on.
//   - A millisecond field that fell in any other way is held at its last
//     value and grows from there: one odd field must not make the whole
//     device look reset, which would report its entire history as one
//     interval.
//   - A device absent from one read is forgotten; if it comes back it starts
//     afresh, like a re-added device. So does a line whose token count
//     changed.
//
// The count fields are passed on as read. A sector is 512 bytes in these
// files whatever the device's sector size (Documentation/block/stat.rst:
// "the standard UNIX 512-byte sectors, not any device- or
// filesystem-specific block size"), so read_bytes and write_bytes are the
// sector counts times 512.
//
// By default only whole disks are reported ([DefaultInclude]); partitions
// are left out because their I/O is also counted on their disk, and stacked
// and virtual devices ([DefaultExclude]: loop, dm-, md, ram, zram, sr, fd)
// because theirs is counted again on the disks below, or is not disk I/O.
//
// # Caveats
//
//   - The counters are per-CPU and summed without a lock when the file is
//     read (iostats.rst), so one file is not an atomic snapshot.
//   - The unwrap rule cannot see a millisecond field that wraps twice, or
//     grows by 2^31 ms or more, between two reads; with reads seconds apart
//     neither happens. A device re-added and already back at or above all
//     its old values by the next read passes for no reset.
//   - On 32-bit kernels the count fields are 32-bit too and wrap; the Source
//     sees each such wrap as a reset.
//   - Field 10 (io_ticks_ms) counts differently since Linux 5.0: jiffies in
//     which a request started or completed (iostats.rst). Since 4.19 the
//     times are measured in nanoseconds and truncated to ms on output
//     (iostats.rst), and in current kernels weighted_ms is no longer a
//     queue-time integral but the sum of the read, write, discard and flush
//     times (diskstats_show at 6.12).
//   - Flushes are not tracked for partitions: their flush fields are zero.
//   - Kernels from 2.6 to 2.6.24 printed only four statistics for
//     partitions (seven tokens); such lines are counted as malformed.
//   - Partitions with no sectors are not printed (diskstats_show), and
//     devices come and go with hot-plug, so the set of lines varies.
//   - Lustre and NFS traffic does not appear here; local disks under a
//     Lustre OSS or a local filesystem do. With software RAID the member
//     disks count every mirrored write once per mirror: the default
//     reports physical disk I/O.
//   - Each Source keeps the file open between reads; it must be used by
//     one goroutine at a time, and [Source.Close] releases the file.
package block
