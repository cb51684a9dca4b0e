package lustre

// sizeCounters are the llite counters measured in bytes or pages, whose sum
// the agent wants (llite_opcode_table in lustre/llite/lproc_llite.c at
// master; brw_read and brw_write are from 2.12).
var sizeCounters = []string{
	"read_bytes", "write_bytes", "hybrid_read_bytes", "hybrid_write_bytes",
	"cached_read_bytes", "pcc_hit_bytes", "pcc_attach_bytes",
	"brw_read", "brw_write",
}

// otherCounters are the remaining llite counter names known from
// lustre/llite/lproc_llite.c (master, and 2.12 for dirty_pages_* and
// alloc_inode).
var otherCounters = []string{
	"read", "write", "open", "close", "mmap", "page_fault", "page_mkwrite",
	"seek", "fsync", "readdir", "openclosetime", "setattr", "truncate",
	"flock", "getattr", "fallocate", "create", "link", "unlink", "symlink",
	"mkdir", "rmdir", "mknod", "rename", "statfs", "setxattr", "getxattr",
	"listxattr", "removexattr", "inode_permission", "splice", "ioctl",
	"getxattr_hits", "opencount", "pcc_attach", "pcc_detach",
	"pcc_auto_attach", "dirty_pages_hits", "dirty_pages_misses",
	"alloc_inode",
}

// Lookup tables, filled once at package initialisation and only read after
// that, so that parsing a known name costs a map lookup instead of an
// allocation.
var (
	knownNames = func() map[string]string {
		m := make(map[string]string, len(sizeCounters)+len(otherCounters))
		for _, n := range sizeCounters {
			m[n] = n
		}
		for _, n := range otherCounters {
			m[n] = n
		}
		return m
	}()
	knownSumKeys = func() map[string]string {
		m := make(map[string]string, len(sizeCounters))
		for _, n := range sizeCounters {
			m[n] = n + ".sum"
		}
		return m
	}()
)

// internName returns b as a string, without allocating for known names.
func internName(b []byte) string {
	if s, ok := knownNames[string(b)]; ok {
		return s
	}
	return string(b)
}

// sumKey returns the Raw key for name's sum, without allocating for known
// size counters.
func sumKey(name string) string {
	if s, ok := knownSumKeys[name]; ok {
		return s
	}
	return name + ".sum"
}

// internUnit returns b as a string, without allocating for the units Lustre
// prints (lustre/include/lprocfs_status.h).
func internUnit(b []byte) string {
	switch string(b) {
	case "bytes":
		return "bytes"
	case "pages":
		return "pages"
	case "usecs":
		return "usecs"
	case "usec":
		return "usec"
	case "reqs":
		return "reqs"
	case "regs":
		return "regs"
	}
	return string(b)
}

// isSizeUnit reports whether unit measures data volume, so that a counter's
// sum is a cumulative amount of data rather than of time.
func isSizeUnit(unit string) bool {
	return unit == "bytes" || unit == "pages"
}

// isTimeUnit reports whether unit is a latency unit.
func isTimeUnit(unit string) bool {
	return unit == "usecs" || unit == "usec"
}
