// Package procfile keeps a /proc-style file open and reads the whole of it
// again from offset 0 on every call, into one reused buffer.
//
// # Basics
//
// A [File] is built by [New] from a path and [Options]. [File.Load] opens
// the path on first use and then reads the whole file with ReadAt (pread)
// from offset 0, so that one Load of a kept file costs the reads alone, not
// an open, a read and a close. A seq_file (most of /proc) regenerates its
// content on a read at offset 0 (seq_read_iter in fs/seq_file.c), returns
// about a page per read call and carries on from where the last call
// stopped, which is what ReadAt's loop of preads does. The buffer grows by
// doubling until the file fits, up to Options.MaxSize, and is kept between
// calls: the bytes Load returns are valid until the next Load.
//
// Every Options.CheckEvery loads, Load first stats the path and compares it
// with the open file (os.SameFile): when the path names another file (one
// written elsewhere and renamed over it, as pkg/sim and tests do) or
// nothing, the kept descriptor is closed and the path opened again. A read
// error closes the file too, and Load opens the path once more and reads
// again, unless Options.NoRetry is set: a descriptor that went bad is
// replaced within the same Load.
//
// A missing file gives an error that wraps fs.ErrNotExist, which each
// source turns into its own error wrapping source.ErrNoData. Other errors
// say "opening <path>" or "reading <path>"; a file over MaxSize wraps
// [ErrTooLarge]. [File.Close] releases the descriptor, and a later Load
// opens the path again.
//
// # Caveats
//
// A File is not safe for concurrent use; each source owns one and calls it
// from one goroutine. With CheckEvery above 1, a file replaced by rename is
// read through the old descriptor for up to CheckEvery-1 more loads, and one
// removed is read just as long; a file rewritten in place (same inode) is
// seen at once, since every Load reads from offset 0. The check costs a
// stat and its two allocations. Files whose reads at offset 0 do not start
// afresh (a pipe, a socket) cannot be read this way. After a too-large
// file, the buffer stays at MaxSize until the File is dropped.
package procfile
