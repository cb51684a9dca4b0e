package jobio

// The raw counter names of every reading, in this order: the seven
// /proc/<pid>/io fields summed over the job's processes, then the six
// io.stat keys summed over the devices of the job cgroup. They are the
// mapping keys of source "jobio" and never change.
var counterNames = [nCounters]string{
	"proc.rchar", "proc.wchar", "proc.syscr", "proc.syscw",
	"proc.read_bytes", "proc.write_bytes", "proc.cancelled_write_bytes",
	"iostat.rbytes", "iostat.wbytes", "iostat.rios", "iostat.wios",
	"iostat.dbytes", "iostat.dios",
}

// nCounters is the number of counters in a reading: the seven
// /proc/<pid>/io fields and the six io.stat keys.
const nCounters = nProcIO + nIOStat

// CounterNames returns the raw counter names every reading carries, in a
// fixed order: "proc.rchar", "proc.wchar", "proc.syscr", "proc.syscw",
// "proc.read_bytes", "proc.write_bytes", "proc.cancelled_write_bytes",
// "iostat.rbytes", "iostat.wbytes", "iostat.rios", "iostat.wios",
// "iostat.dbytes", "iostat.dios".
func CounterNames() []string {
	return append([]string(nil), counterNames[:]...)
}
