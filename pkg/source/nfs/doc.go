// Package nfs reads the Linux NFS client's per-mount counters from
// /proc/self/mountstats and turns them into raw cumulative counters for the
// agent.
//
// # Basics
//
// [Parse] reads one mountstats file into [Stats], one [Mount] per NFS
// mount; [Mount.Raw] gives the counter map the agent consumes; [Source]
// reads <procRoot>/self/mountstats and returns one reading per NFS
// superblock.
//
// Every mount gets a header line from show_vfsstat in fs/proc_namespace.c;
// NFS mounts (fstype nfs or nfs4) add " statvers=1.1" and a tab-indented
// body from nfs_show_stats in fs/nfs/super.c, then the RPC section from
// rpc_clnt_show_stats in net/sunrpc/stats.c, and a blank line:
//
//	device fs01:/export/proj mounted on /proj with fstype nfs4 statvers=1.1
//		opts:	rw,vers=4.2,rsize=1048576,wsize=1048576,...,sec=sys
//		age:	86400
//		caps:	caps=0x3ffbffff,wtmult=512,dtsize=1048576,bsize=0,namlen=255
//		sec:	flavor=1,pseudoflavor=1
//		events:	100 200 3 4 50 60 70 80 0 9 0 8 5 2 7 1 0 50 0 0 3 0 0 0 0 0 0
//		bytes:	1048576 2097152 0 0 1048576 2097152 256 512
//		RPC iostats version: 1.1  p/v: 100003/4 (nfs)
//		xprt:	tcp 875 0 1 0 12 6000 6000 0 24000 0 64 120 360
//		per-op statistics
//		        NULL: 1 1 0 44 24 0 0 0 0
//		        READ: 256 256 0 46080 1081344 10 900 950 0
//
// The "events:" and "bytes:" fields are in the order of the enums in
// include/linux/nfs_iostat.h; a per-op line is printed by
// _print_rpc_iostats (net/sunrpc/stats.c): operations, transmissions, major
// timeouts, bytes sent, bytes received, queue, RTT and execute milliseconds,
// and on newer kernels errors. The body may also hold impl_id:, nfsv4: and
// fsc: lines, and one xprt: line per transport (several with nconnect).
//
// The raw counter names are the keys of the mapping table and must not
// change:
//
//	raw name                  source field (include/linux/nfs_iostat.h)
//	bytes.normal_read         bytes 1  NFSIOS_NORMALREADBYTES     read(2) via the page cache
//	bytes.normal_write        bytes 2  NFSIOS_NORMALWRITTENBYTES  write(2) via the page cache
//	bytes.direct_read         bytes 3  NFSIOS_DIRECTREADBYTES     O_DIRECT reads
//	bytes.direct_write        bytes 4  NFSIOS_DIRECTWRITTENBYTES  O_DIRECT writes
//	bytes.server_read         bytes 5  NFSIOS_SERVERREADBYTES     READ payload from the server
//	bytes.server_write        bytes 6  NFSIOS_SERVERWRITTENBYTES  WRITE payload to the server
//	bytes.read_pages          bytes 7  NFSIOS_READPAGES           pages read
//	bytes.write_pages         bytes 8  NFSIOS_WRITEPAGES          pages written
//	events.inode_revalidate   events 1   NFSIOS_INODEREVALIDATE
//	events.dentry_revalidate  events 2   NFSIOS_DENTRYREVALIDATE
//	events.data_invalidate    events 3   NFSIOS_DATAINVALIDATE
//	events.attr_invalidate    events 4   NFSIOS_ATTRINVALIDATE
//	events.open               events 5   NFSIOS_VFSOPEN
//	events.lookup             events 6   NFSIOS_VFSLOOKUP
//	events.access             events 7   NFSIOS_VFSACCESS
//	events.updatepage         events 8   NFSIOS_VFSUPDATEPAGE
//	events.readpage           events 9   NFSIOS_VFSREADPAGE
//	events.readpages          events 10  NFSIOS_VFSREADPAGES
//	events.writepage          events 11  NFSIOS_VFSWRITEPAGE
//	events.writepages         events 12  NFSIOS_VFSWRITEPAGES
//	events.getdents           events 13  NFSIOS_VFSGETDENTS
//	events.setattr            events 14  NFSIOS_VFSSETATTR
//	events.flush              events 15  NFSIOS_VFSFLUSH
//	events.fsync              events 16  NFSIOS_VFSFSYNC
//	events.lock               events 17  NFSIOS_VFSLOCK
//	events.release            events 18  NFSIOS_VFSRELEASE
//	events.congestion_wait    events 19  NFSIOS_CONGESTIONWAIT
//	events.setattr_truncate   events 20  NFSIOS_SETATTRTRUNC
//	events.extend_write       events 21  NFSIOS_EXTENDWRITE
//	events.silly_rename       events 22  NFSIOS_SILLYRENAME
//	events.short_read         events 23  NFSIOS_SHORTREAD
//	events.short_write        events 24  NFSIOS_SHORTWRITE
//	events.jukebox_delay      events 25  NFSIOS_DELAY
//	events.pnfs_read          events 26  NFSIOS_PNFS_READ
//	events.pnfs_write         events 27  NFSIOS_PNFS_WRITE
//	op.<NAME>                 per-op field 1 (operations) of every per-op line,
//	                          NAME as printed: op.READ, op.GETATTR, op.COMMIT, ...
//
// Nothing else is reported: transmissions, timeouts, RPC bytes and times,
// and the xprt: lines stay in [Stats] only.
//
// # Caveats
//
//   - Counters belong to the superblock (NFS_SB in nfs_show_stats), and
//     mounts of one export with the same options share one superblock
//     unless nosharecache is set, so they print identical counters. The
//     Source reports such mounts once. Two mounts are taken for one
//     superblock when they have the same device, neither has nosharecache,
//     their ages are at most 2 s apart, and their opts: lines or all their
//     counters are identical. It can fail both ways. Mounts of different
//     paths of one export (srv:/a and srv:/a/b) can share a superblock yet
//     differ in device, and are counted twice. Two idle superblocks of one
//     device made in the same second with different options look the same
//     and are merged until their counters part; the second then appears as
//     a new key, which loses at most one interval of its I/O.
//   - The counters are never zeroed while mounted ("never zeroed after
//     mount", include/linux/nfs_iostat.h); a remount starts a superblock
//     with age 0. The Source fixes each key's Epoch at the start time it
//     first computes (now - age, in Unix seconds, so ±1 s of jitter
//     between the clock and age does not move it) and changes it only when
//     age goes down. A remount whose new age has already passed the old one
//     by the next read is not seen that way; the agent then relies on
//     counters going down. If the key passes to a different, older
//     superblock, the reading is left out once so the agent starts afresh
//     instead of counting that superblock's whole history as one interval.
//   - The counters are unsigned long or u64 sums of per-CPU values, taken
//     for each mount as it is printed, so a file is not one atomic
//     snapshot.
//   - /proc/self/mountstats shows the mount namespace of the agent; NFS
//     mounts made only inside a container's namespace are not seen.
//   - Field counts are checked, not guessed: an events: line without
//     exactly 27 numbers (kernels before the pNFS counters printed fewer)
//     is skipped, and the mount is reported without events.* counters; a
//     bytes: line without exactly 8 numbers, or a missing age: line or
//     per-op section, makes the mount Partial and the Source leaves it out.
//     A per-op line must have 8 or 9 numbers. statvers 1.0 and 1.1 both
//     parse, as would a later version with the same layout.
//   - The impl_id: value (NFSv4.1+, the server's implementation name) is
//     printed unescaped and may contain newlines; lines after it that do
//     not start a known field are taken as its continuation and skipped.
//   - A header that does not parse is counted as malformed and the lines
//     under it are skipped, as are the lines under every non-NFS mount.
//   - The Source keeps the file open and preads it from offset 0, which
//     makes the seq_file regenerate it. If a read fails it reopens the file
//     once. Every DefaultCheckEvery reads it compares the path's identity
//     with the open file (one stat) and reopens if the file was replaced,
//     which only happens with plain-file roots in tests and the simulator.
//   - A file with no NFS mounts gives source.ErrNoData; one whose NFS
//     mounts are all Partial gives an ordinary error.
//
// github.com/prometheus/procfs parses the same file (mountstats.go), and
// the tests check that both agree on well-formed input, but it fails the
// whole file on one odd line or one non-NFS mount with stats, and does not
// undo octal escapes, so this package has its own tolerant parser.
package nfs
