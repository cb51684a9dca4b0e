// Package jobio attributes I/O to the batch jobs on a node. A filesystem
// client's counters (the lustre source) cover the whole node, so they
// cannot tell jobs sharing it apart; this source measures each job through
// the kernel's per-process and per-cgroup accounting, the same way whether
// the job shares the node or is alone on it (the agent gives every job it
// reports its own values).
//
// # Basics
//
// [Source] walks the cgroup v2 tree (Documentation/admin-guide/cgroup-v2.rst)
// to [Options.MaxDepth] levels and matches each directory's path, relative to
// the root, against [Options.JobPattern]; the first capture group is the job
// id. The default pattern matches the usual "job_<id>" layouts, e.g.
// "system.slice/<scheduler>.scope/job_81234/step_0". Per id the top-most
// matching directory is the job's cgroup (breadth first, so the shallowest;
// the walk does not descend into a job). The walk runs on the first read and
// then every [Options.RescanEvery] reads; [Source.Jobs] returns the ids of
// the jobs the last read reported (those the walks found, and a job whose
// cgroup has gone at the read that reports it once more, rule 7), for the
// agent to list as running and reconcile with the scheduler hooks'
// records. A known job's own subtree is kept listed between reads and checked at every
// read (see Cost), so that a new job step's processes are seen at the next
// read, not at the next walk.
//
// The job's processes are the pids in cgroup.procs of the job directory and
// of every directory below it. For each the source reads /proc/<pid>/io
// (do_io_accounting in fs/proc/base.c; Documentation/filesystems/proc.rst),
// and it reads the job directory's io.stat (blkcg_print_one_stat in
// block/blk-cgroup.c). [ParseProcIO], [ParseIOStat] and [ParseProcStat]
// parse the three file kinds from an io.Reader.
//
// Each [source.Reading] is one job: Key "jobio:<id>", Job "<id>", Epoch
// empty, and Counters holding these raw names, always all of them (they are
// the mapping keys of source "jobio" and never change; see [CounterNames]):
//
//	proc.rchar                   /proc/<pid>/io rchar, summed over the job's processes
//	proc.wchar                   wchar
//	proc.syscr                   syscr
//	proc.syscw                   syscw
//	proc.read_bytes              read_bytes
//	proc.write_bytes             write_bytes
//	proc.cancelled_write_bytes   cancelled_write_bytes
//	iostat.rbytes                io.stat rbytes of the job cgroup, summed over devices
//	iostat.wbytes                wbytes
//	iostat.rios                  rios
//	iostat.wios                  wios
//	iostat.dbytes                dbytes
//	iostat.dios                  dios
//
// The values are totals the source maintains itself, starting at zero when
// the job is first seen, and they never go down, so the agent's
// delta.Differ never sees a reset. A job's io.stat already includes its child
// cgroups (that roll-up is from memory in FORMATS.md, not checked in the
// kernel source here), so only the job directory's own file is read.
//
// # Accounting rules
//
// A job's totals must never jump: a kernel counter that includes I/O from
// outside the job, or that is counted twice, would show as a burst of I/O
// that did not happen. The rules, each tested on fixture trees, and
// together on the running kernel by TestRealCgroupEveryByteCountedOnce
// when the tests run as root (real processes, exits, reaps and cgroup
// removals; each job's totals must equal what its processes report):
//
//  1. Per process the source keeps the values of its last read, keyed by
//     pid and start time (/proc/<pid>/stat field 22), so a reused pid is a
//     new process. The job total grows by the sum, over processes read both
//     times, of (current - last).
//  2. A process seen for the first time contributes its whole value if it
//     started at or after the start of the job's previous read (compared in
//     clock ticks with /proc/uptime read then); a new process starts at zero
//     (copy_process zeroes its accounting). Otherwise it existed before (it
//     was moved into the cgroup carrying its history, or the source or job
//     has just been found) and only sets a base. Every process of a job
//     found for the first time sets a base.
//  3. When a parent reaps a child, the kernel adds the child's totals to
//     the parent's (kernel/exit.c, wait_task_zombie), so the parent's growth
//     includes the child's whole life, part of which was already counted.
//     When a child disappears, its last-read values are subtracted from its
//     parent's growth, clamped at zero per counter; what the clamp leaves is
//     kept as a debt that the parent's next growth pays first, because the
//     reap may come after the read that noticed the exit (a zombie). So the
//     child's unseen last part counts once and nothing counts twice. A
//     parent reaped at the same read hands its own last values and its debt
//     on to its parent; the debt goes to the nearest tracked ancestor.
//  4. A process that left cgroup.procs but whose io file still reads is a
//     zombie (cgroup-v2.rst: a zombie does not appear in cgroup.procs) or
//     was moved out: its growth since the last read counts once more, which
//     for a zombie is its unseen last part, and it is then frozen until it
//     is reaped (its io file fails with ESRCH) and rule 3 applies. A frozen
//     process listed again (moved back in) sets a new base.
//  5. A counter of a process that goes down (which should not happen) sets
//     a new base for that counter; it is never a negative delta.
//  6. io.stat: per job cgroup, the growth of the values summed over
//     devices; the first read of the cgroup and a sum that went down (the
//     cgroup was recreated) set a new base.
//  7. A job whose cgroup has gone is reported once more, with whatever its
//     zombies and the reaps inside the job still added, so that the agent
//     sees the last interval; the read after that drops it. The read that
//     reports it once more notices the removal either by its walk (the job
//     is not found) or by the job's own listing, and [Source.Jobs] names
//     the job at that read in both cases, so that the sample of that
//     interval lists the job its reading is for.
//  8. A process that exits between the listing of cgroup.procs and the read
//     of its files (ENOENT, ESRCH) is skipped silently.
//
// The parent of a process is read from /proc/<pid>/stat when the process is
// first seen, and again only when its recorded parent leaves (the kernel
// reparents orphans at exit, kernel/exit.c forget_original_parent), so
// stat files are read only for new processes and orphans.
//
// # Cost
//
// Each /proc/<pid>/io is opened once and re-read with one pread(2) from
// offset 0: procfs regenerates the file on every read from offset 0, and
// the descriptor keeps referring to the process it was opened for, failing
// with ESRCH once it is reaped, which is how pid reuse is noticed without
// re-reading stat. Read buffers, pid lists and maps are reused, so a
// Source must be used by one goroutine at a time (the agent's loop), and a
// read in steady state allocates only its readings.
//
// Each job's subtree is listed at the job's first read and then cached:
// the source keeps each directory open, with its link count, and each
// cgroup.procs open. Per read and directory it costs one fstat(2), which
// compares the link count with the cached one, and one pread(2) of
// cgroup.procs from offset 0, which regenerates the seq_file (a regular
// file rewritten in place, as in the tests, reads anew the same way). On
// cgroupfs (kernfs) a directory's st_nlink is 2 plus its number of
// subdirectories (kernfs_refresh_inode in fs/kernfs/inode.c:
// set_nlink(inode, kn->dir.subdirs + 2), from memory; it holds on the
// sysfs and cgroup2 directories of a live kernel), so a step cgroup made
// or removed anywhere in the subtree changes a count and the subtree is
// listed again at once, at the same read. ext4 and tmpfs directories keep
// the same count, so the tests exercise it. A removed directory is also
// noticed by itself: its kept descriptor shows a count of 0 on a regular
// filesystem, and reads of its kept cgroup.procs fail on kernfs (ENODEV
// once the node is deactivated, from memory). The subtree
// is also listed again at every walk (every RescanEvery reads), through the
// kept descriptors of directories still there, and when a kept
// cgroup.procs fails: that read falls back to open, read and close by path,
// and the next read lists afresh. A listing is not trusted, and the
// subtree is listed on every read as before, when a directory's link count
// does not match the subdirectories found: on a filesystem that does not
// count them (btrfs reports 1 for every directory) nothing is missed, and
// on one that reports a plausible but wrong count (none known) a change is
// caught at the next walk. The job's io.stat and /proc/uptime are kept
// open too and re-read with pread; as they can go and come back on their
// own, each read also checks the kept file's link count, and a count of 0
// (removed, or replaced by a rename, on a regular filesystem) or a failed
// read (ENODEV, ESRCH on kernfs and procfs) opens the path again.
//
// So a read in steady state costs, per process, one pread; per cgroup
// directory of a job, one fstat and one pread; per job, a pread and an
// fstat of io.stat; and a pread and an fstat of /proc/uptime. New
// processes cost an open and a stat read; a walk costs a listing of every
// directory down to the jobs, and a getdents(2) per known job directory
// that has subdirectories. The source keeps open two descriptors per
// cgroup directory of a job (one for a directory MaxDepth levels below the
// job, whose subdirectories are not read), one per process, one per job
// for io.stat and one for /proc/uptime; [Source.Close] closes them all,
// and a directory's or process's are closed when it goes.
//
// # Caveats
//
//   - Reading another user's /proc/<pid>/io needs ptrace-read permission
//     (root or CAP_SYS_PTRACE; do_io_accounting checks ptrace_may_access),
//     so the agent must run as root for jobs of other users.
//   - A child reaped by a process outside the job (for example by the
//     scheduler's step daemon, when it runs outside the job cgroup) loses
//     its I/O after our last read of it, unless it was read as a zombie.
//     Orphans reparented to init are lost the same way; a process and its
//     child that both exit within one interval are assumed to have been
//     reaped along the recorded parent chain.
//   - I/O that a process did between moving into the job and the first read
//     of it is not counted (rule 2), and I/O it did after moving out and
//     before the next read is (rule 4). A process that started outside the
//     job after the last read and was then moved in counts its whole value,
//     since rule 2 cannot tell it from a fork; schedulers move a task in
//     right after forking it, before it does I/O. A child moved out and later reaped
//     by a parent inside the job brings its outside I/O with it: the kernel
//     adds it to the parent.
//   - rchar and wchar count every read and write call, including the page
//     cache, pipes, sockets and ttys, not only filesystem I/O; read_bytes
//     and write_bytes count storage I/O, with writes counted when pages are
//     dirtied, and for Lustre only roughly (readahead is charged by
//     task_io_account_read in lustre/llite/rw.c; O_DIRECT is unclear).
//   - io.stat covers block devices only: no Lustre and no NFS. Its keys are
//     printed only when rbytes, wbytes, rios or wios is nonzero, and its
//     counters vanish with the cgroup. Without the io controller enabled in
//     the job's parent's cgroup.subtree_control there is no io.stat and the
//     iostat counters stay at zero.
//   - A cgroup directory renamed in place (cgroup v2 allows a rename within
//     the same parent) keeps being read through its kept descriptors, and
//     its new name is seen at the next walk.
//   - A job is found up to RescanEvery reads after its cgroup appears, and
//     its I/O before its first read is not counted (its totals start at
//     zero; reporting that I/O later would be a jump). A smaller RescanEvery
//     shortens the gap; a walk lists every directory to MaxDepth.
//   - Start times are compared with /proc/uptime at USER_HZ = 100 (one tick
//     is 10 ms); both are boot-time clocks. Without /proc/uptime every new
//     process only sets a base, and Read says so in its error.
//   - In a threaded subtree cgroup.procs of a threaded cgroup cannot be read
//     (EOPNOTSUPP) and is skipped; the threaded domain's file lists the
//     processes. On cgroup v1 only a v2 (unified) mount works.
package jobio
