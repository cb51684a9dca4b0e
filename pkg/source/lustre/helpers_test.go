package lustre_test

import (
	"sluice/pkg/source/lustre"
)

// v216Counters are the counters of testdata/lustre/v2_16_header, which
// follows llite_opcode_table in lustre/llite/lproc_llite.c at v2_16_0.
func v216Counters() []lustre.Counter {
	return []lustre.Counter{
		{Name: "read_bytes", Samples: 1200, Unit: "bytes", Fields: 4, Min: 1, Max: 4194304, Sum: 2472242752, SumSq: 6886455976423650},
		{Name: "write_bytes", Samples: 300, Unit: "bytes", Fields: 4, Min: 4096, Max: 1048576, Sum: 161303766, SumSq: 116624607806644},
		{Name: "read", Samples: 1200, Unit: "usecs", Fields: 4, Min: 2, Max: 95000, Sum: 57168645, SumSq: 3628439904481},
		{Name: "write", Samples: 300, Unit: "usecs", Fields: 4, Min: 9, Max: 41000, Sum: 6136747, SumSq: 166810675147},
		{Name: "ioctl", Samples: 7, Unit: "reqs"},
		{Name: "open", Samples: 42, Unit: "usecs", Fields: 4, Min: 11, Max: 870, Sum: 19915, SumSq: 12586175},
		{Name: "close", Samples: 42, Unit: "usecs", Fields: 4, Min: 4, Max: 310, Sum: 6685, SumSq: 1371615},
		{Name: "mmap", Samples: 3, Unit: "usecs", Fields: 4, Min: 20, Max: 160, Sum: 323, SumSq: 46449},
		{Name: "page_fault", Samples: 96, Unit: "usecs", Fields: 4, Min: 1, Max: 75, Sum: 3416, SumSq: 165678},
		{Name: "seek", Samples: 18, Unit: "usecs", Fields: 4, Min: 1, Max: 6, Sum: 63, SumSq: 277},
		{Name: "fsync", Samples: 5, Unit: "usecs", Fields: 4, Min: 180, Max: 22000, Sum: 40118, SumSq: 673710692},
		{Name: "readdir", Samples: 11, Unit: "usecs", Fields: 4, Min: 30, Max: 2400, Sum: 11624, SumSq: 19164940},
		{Name: "setattr", Samples: 6, Unit: "usecs", Fields: 4, Min: 40, Max: 900, Sum: 2840, SumSq: 1951302},
		{Name: "truncate", Samples: 2, Unit: "usecs", Fields: 4, Min: 150, Max: 410, Sum: 560, SumSq: 190600},
		{Name: "flock", Samples: 14, Unit: "usecs", Fields: 4, Min: 3, Max: 55, Sum: 455, SumSq: 19543},
		{Name: "getattr", Samples: 310, Unit: "usecs", Fields: 4, Min: 1, Max: 480, Sum: 73806, SumSq: 23271560},
		{Name: "fallocate", Samples: 1, Unit: "usecs", Fields: 4, Min: 2600, Max: 2600, Sum: 2600, SumSq: 6760000},
		{Name: "create", Samples: 9, Unit: "usecs", Fields: 4, Min: 210, Max: 3100, Sum: 17584, SumSq: 45220602},
		{Name: "link", Samples: 1, Unit: "usecs", Fields: 4, Min: 330, Max: 330, Sum: 330, SumSq: 108900},
		{Name: "unlink", Samples: 8, Unit: "usecs", Fields: 4, Min: 190, Max: 1500, Sum: 8412, SumSq: 10713014},
		{Name: "symlink", Samples: 2, Unit: "usecs", Fields: 4, Min: 260, Max: 420, Sum: 680, SumSq: 244000},
		{Name: "mkdir", Samples: 3, Unit: "usecs", Fields: 4, Min: 300, Max: 950, Sum: 1861, SumSq: 1365821},
		{Name: "rmdir", Samples: 2, Unit: "usecs", Fields: 4, Min: 280, Max: 600, Sum: 880, SumSq: 438400},
		{Name: "mknod", Samples: 1, Unit: "usecs", Fields: 4, Min: 410, Max: 410, Sum: 410, SumSq: 168100},
		{Name: "rename", Samples: 4, Unit: "usecs", Fields: 4, Min: 350, Max: 1800, Sum: 4808, SumSq: 6938790},
		{Name: "statfs", Samples: 25, Unit: "usecs", Fields: 4, Min: 15, Max: 640, Sum: 8338, SumSq: 3550078},
		{Name: "setxattr", Samples: 3, Unit: "usecs", Fields: 4, Min: 60, Max: 700, Sum: 1405, SumSq: 909625},
		{Name: "getxattr", Samples: 57, Unit: "usecs", Fields: 4, Min: 2, Max: 390, Sum: 9911, SumSq: 2543391},
		{Name: "getxattr_hits", Samples: 19, Unit: "reqs"},
		{Name: "listxattr", Samples: 4, Unit: "usecs", Fields: 4, Min: 5, Max: 90, Sum: 188, SumSq: 15730},
		{Name: "removexattr", Samples: 1, Unit: "usecs", Fields: 4, Min: 120, Max: 120, Sum: 120, SumSq: 14400},
		{Name: "inode_permission", Samples: 860, Unit: "usecs", Fields: 4, Min: 0, Max: 25, Sum: 10694, SumSq: 181502},
		{Name: "opencount", Samples: 42, Unit: "reqs", Fields: 4, Min: 1, Max: 6, Sum: 139, SumSq: 599},
		{Name: "openclosetime", Samples: 40, Unit: "usecs", Fields: 4, Min: 900, Max: 7200000, Sum: 128843240, SumSq: 610450764432980},
	}
}
