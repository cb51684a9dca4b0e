package nfs_test

import (
	"bytes"
	"errors"
	"io"
	"maps"
	"strings"
	"testing"
	"testing/iotest"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/nfs"
)

// Mount options of the generated fixtures (what nfs_show_mount_options in
// fs/nfs/super.c prints for these mounts).
const (
	optsV3  = "rw,vers=3,rsize=1048576,wsize=1048576,namlen=255,acregmin=3,acregmax=60,acdirmin=30,acdirmax=60,hard,proto=tcp,timeo=600,retrans=2,sec=sys,mountaddr=10.1.0.2,mountvers=3,mountport=20048,mountproto=udp,local_lock=none,addr=10.1.0.2"
	optsV41 = "rw,vers=4.1,rsize=1048576,wsize=1048576,namlen=255,acregmin=3,acregmax=60,acdirmin=30,acdirmax=60,hard,proto=tcp,timeo=600,retrans=2,sec=sys,clientaddr=10.1.0.17,local_lock=none"
	optsV42 = "rw,vers=4.2,rsize=1048576,wsize=1048576,namlen=255,acregmin=3,acregmax=60,acdirmin=30,acdirmax=60,hard,proto=tcp,timeo=600,retrans=2,sec=sys,clientaddr=10.1.0.17,local_lock=none"
	// optsExample is the FORMATS.md example's.
	optsExample = "rw,vers=4.2,rsize=1048576,wsize=1048576,namlen=255,hard,proto=tcp,timeo=600,retrans=2,sec=sys"
)

// wantMount is the expected parse of one mount. mount.Ops holds the per-op
// lines that are checked value by value; ops lists every name expected.
type wantMount struct {
	mount nfs.Mount
	ops   []string
}

// wantStats is the expected parse of one file.
type wantStats struct {
	mounts    []wantMount
	malformed int
}

// sharedProj is the /proj mount of testdata/nfs/shared_superblock; the
// second mount of that file differs only in its mount point.
func sharedProj(mountPoint string) wantMount {
	return wantMount{
		mount: nfs.Mount{
			Device: "fs01:/export/proj", MountPoint: mountPoint, FSType: "nfs4", StatVersion: "1.1",
			Opts: optsV42, Age: 86400, Transports: 1, HasEvents: true,
			Bytes:  [8]uint64{42438068, 21607583, 4194304, 0, 46640564, 21607583, 10361, 5276},
			Events: [27]uint64{620, 4242, 11, 65, 545, 479, 992, 217, 0, 61, 0, 131, 42, 16, 330, 27, 18, 574, 0, 3, 38, 1, 0, 0, 0, 0, 0},
			Ops: opsOf(map[string]nfs.OpStats{
				"READ":  {Ops: 346, Trans: 346, BytesSent: 52592, BytesRecv: 90771716, QueueMs: 18, RTTMs: 346, ExecMs: 392},
				"WRITE": {Ops: 333, Trans: 335, BytesSent: 43712244, BytesRecv: 56610, QueueMs: 11, RTTMs: 333, ExecMs: 377},
			}),
		},
		ops: v4Ops,
	}
}

// homeV3 is the /home NFSv3 mount of the remount_* fixtures at the given
// age, with their bytes and one op.
func homeV3(age uint64, bytes [8]uint64, events [27]uint64, getattr nfs.OpStats) wantMount {
	return wantMount{
		mount: nfs.Mount{
			Device: "fs02:/export/home", MountPoint: "/home", FSType: "nfs", StatVersion: "1.1",
			Opts: optsV3, Age: age, Transports: 1, HasEvents: true, Bytes: bytes, Events: events,
			Ops: opsOf(map[string]nfs.OpStats{"GETATTR": getattr}),
		},
		ops: v3Ops,
	}
}

// scratchV42 is the /scratch NFSv4.2 mount of the remount_* fixtures.
func scratchV42(age uint64, bytes [8]uint64, events [27]uint64, read nfs.OpStats) wantMount {
	return wantMount{
		mount: nfs.Mount{
			Device: "fs01:/export/scratch", MountPoint: "/scratch", FSType: "nfs4", StatVersion: "1.1",
			Opts: optsV42, Age: age, Transports: 1, HasEvents: true, Bytes: bytes, Events: events,
			Ops: opsOf(map[string]nfs.OpStats{"READ": read}),
		},
		ops: v4Ops,
	}
}

func TestParseFixtures(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   string // fixture case under testdata/nfs
		want    wantStats
		wantErr bool
	}{
		{
			// FORMATS.md section 2 example; nfs_show_stats (fs/nfs/super.c).
			name:  "v4.2 single mount",
			input: "v4_2_single",
			want: wantStats{mounts: []wantMount{{
				mount: nfs.Mount{
					Device: "fs01:/export/proj", MountPoint: "/proj", FSType: "nfs4", StatVersion: "1.1",
					Opts: optsExample, Age: 86400, Transports: 1, HasEvents: true,
					Bytes:  [8]uint64{1048576, 2097152, 0, 0, 1048576, 2097152, 256, 512},
					Events: [27]uint64{100, 200, 3, 4, 50, 60, 70, 80, 0, 9, 0, 8, 5, 2, 7, 1, 0, 50, 0, 0, 3, 0, 0, 0, 0, 0, 0},
					Ops: opsOf(map[string]nfs.OpStats{
						"NULL": {Ops: 1, Trans: 1, BytesSent: 44, BytesRecv: 24},
						"READ": {Ops: 256, Trans: 256, BytesSent: 46080, BytesRecv: 1081344, QueueMs: 10, RTTMs: 900, ExecMs: 950},
					}),
				},
				ops: []string{"NULL", "READ"},
			}}},
		},
		{
			// nfs3_procedures (fs/nfs/nfs3xdr.c), 9-field per-op lines.
			name:  "v3 mount after non-NFS mounts",
			input: "v3",
			want: wantStats{mounts: []wantMount{{
				mount: nfs.Mount{
					Device: "fs02:/export/home", MountPoint: "/home", FSType: "nfs", StatVersion: "1.1",
					Opts: optsV3, Age: 3024000, Transports: 1, HasEvents: true,
					Bytes:  [8]uint64{42442087, 21245036, 4194304, 0, 46644583, 21245036, 10362, 5187},
					Events: [27]uint64{621, 5427, 18, 48, 489, 709, 1385, 360, 0, 97, 0, 88, 44, 12, 540, 28, 18, 419, 0, 2, 52, 1, 0, 0, 0, 0, 0},
					Ops: opsOf(map[string]nfs.OpStats{
						"READ":   {Ops: 542, Trans: 544, BytesSent: 131164, BytesRecv: 142189906, QueueMs: 45, RTTMs: 1084, ExecMs: 1179},
						"LOOKUP": {Ops: 518, Trans: 520, BytesSent: 87542, BytesRecv: 120694, QueueMs: 24, RTTMs: 1554, ExecMs: 1579, Errors: 2},
					}),
				},
				ops: v3Ops,
			}}},
		},
		{
			// Mounts sharing a superblock print the same counters (NFS_SB).
			name:  "two mounts of one superblock",
			input: "shared_superblock",
			want:  wantStats{mounts: []wantMount{sharedProj("/proj"), sharedProj("/home/alice/proj")}},
		},
		{
			// show_vfsstat (fs/proc_namespace.c) for ext4, proc, cifs (header
			// ending in a space), "no device", with stray lines under ext4.
			name:  "NFS among other filesystems",
			input: "mixed",
			want: wantStats{mounts: []wantMount{
				{
					mount: nfs.Mount{
						Device: "fs01:/export/proj", MountPoint: "/proj", FSType: "nfs4", StatVersion: "1.1",
						Opts: optsV41, Age: 86400, Transports: 1, HasEvents: true,
						Bytes:  [8]uint64{42478747, 21723423, 4194304, 0, 46681243, 21723423, 10371, 5304},
						Events: [27]uint64{818, 4046, 15, 73, 314, 638, 1694, 263, 0, 101, 0, 86, 30, 13, 490, 35, 13, 494, 0, 2, 48, 1, 0, 0, 0, 0, 0},
						Ops: opsOf(map[string]nfs.OpStats{
							"GETATTR": {Ops: 1462, Trans: 1463, BytesSent: 286552, BytesRecv: 286552, QueueMs: 2, RTTMs: 2924, ExecMs: 2949},
						}),
					},
					ops: v4Ops,
				},
				{
					mount: nfs.Mount{
						Device: "fs02:/export/home", MountPoint: "/home", FSType: "nfs", StatVersion: "1.1",
						Opts: optsV3, Age: 3024000, Transports: 1, HasEvents: true,
						Bytes:  [8]uint64{42112006, 21988711, 4194304, 0, 46314502, 21988711, 10282, 5369},
						Events: [27]uint64{906, 5350, 11, 71, 433, 418, 900, 237, 0, 102, 0, 155, 40, 23, 491, 30, 10, 439, 0, 3, 55, 1, 0, 0, 0, 0, 0},
						Ops: opsOf(map[string]nfs.OpStats{
							"WRITE": {Ops: 274, Trans: 274, BytesSent: 35956198, BytesRecv: 41374, QueueMs: 26, RTTMs: 822, ExecMs: 871},
						}),
					},
					ops: v3Ops,
				},
			}},
		},
		{
			// NFS_IOSTAT_VERS "1.0", 10-field tcp xprt:, 8-field per-op lines.
			name:  "statvers 1.0",
			input: "statvers_1_0",
			want: wantStats{mounts: []wantMount{{
				mount: nfs.Mount{
					Device: "oldsrv:/vol/data", MountPoint: "/data", FSType: "nfs", StatVersion: "1.0",
					Opts: optsV3, Age: 7776000, Transports: 1, HasEvents: true,
					Bytes:  [8]uint64{42622166, 21287873, 4194304, 0, 46824662, 21287873, 10406, 5198},
					Events: [27]uint64{665, 3617, 16, 43, 337, 674, 996, 293, 0, 97, 0, 87, 41, 15, 319, 22, 16, 514, 0, 2, 37, 1, 0, 0, 0, 0, 0},
					Ops: opsOf(map[string]nfs.OpStats{
						"NULL": {Ops: 1, Trans: 1, BytesSent: 169, BytesRecv: 201, RTTMs: 1, ExecMs: 1},
						"READ": {Ops: 585, Trans: 585, BytesSent: 109395, BytesRecv: 153475335, QueueMs: 9, RTTMs: 1755, ExecMs: 1779},
					}),
				},
				ops: v3Ops,
			}}},
		},
		{
			// seq_escape/seq_path_root " \t\n\\" in show_vfsstat.
			name:  "octal escapes in device and mount point",
			input: "escaped",
			want: wantStats{mounts: []wantMount{{
				mount: nfs.Mount{
					Device: "fs01:/export/team a", MountPoint: "/mnt/team a\ttab\\b", FSType: "nfs4", StatVersion: "1.1",
					Opts: optsV42, Age: 43200, Transports: 1, HasEvents: true,
					Bytes:  [8]uint64{42418476, 21748329, 4194304, 0, 46620972, 21748329, 10357, 5310},
					Events: [27]uint64{616, 4517, 16, 48, 398, 760, 944, 221, 0, 68, 0, 111, 41, 15, 505, 20, 17, 549, 0, 3, 42, 1, 0, 0, 0, 0, 0},
					Ops: opsOf(map[string]nfs.OpStats{
						"NULL": {Ops: 1, Trans: 1, BytesSent: 197, BytesRecv: 196, RTTMs: 1, ExecMs: 1},
					}),
				},
				ops: v4Ops,
			}}},
		},
		{
			// One xprt: line per transport (rpc_clnt_iterate_for_each_xprt);
			// an impl_id: value with a newline in it.
			name:  "nconnect=4 and a two-line impl_id",
			input: "nconnect",
			want: wantStats{mounts: []wantMount{{
				mount: nfs.Mount{
					Device: "fs03:/export/scratch", MountPoint: "/scratch", FSType: "nfs4", StatVersion: "1.1",
					Opts: strings.Replace(optsV41, "proto=tcp,", "proto=tcp,nconnect=4,", 1), Age: 12345,
					Transports: 4, HasEvents: true,
					Bytes:  [8]uint64{42914036, 21754411, 4194304, 0, 47116532, 21754411, 10478, 5312},
					Events: [27]uint64{737, 5511, 15, 57, 370, 495, 1787, 373, 0, 60, 0, 123, 41, 19, 341, 30, 18, 320, 0, 3, 35, 1, 0, 0, 0, 0, 0},
					Ops: opsOf(map[string]nfs.OpStats{
						"LOOKUP": {Ops: 758, Trans: 760, BytesSent: 127344, BytesRecv: 109152, QueueMs: 5, RTTMs: 758, ExecMs: 832, Errors: 2},
					}),
				},
				ops: v4Ops,
			}}},
		},
		{
			// See testdata/nfs/malformed/README for the 13 bad lines.
			name:  "malformed lines, a Partial mount and a truncated one",
			input: "malformed",
			want: wantStats{
				malformed: 13,
				mounts: []wantMount{
					{
						mount: nfs.Mount{
							Device: "fs01:/export/proj", MountPoint: "/proj", FSType: "nfs4", StatVersion: "1.1",
							Opts: optsExample, Age: 86400, Transports: 1, Malformed: 9,
							Bytes: [8]uint64{1048576, 2097152, 0, 0, 1048576, 2097152, 256, 512},
							Ops: opsOf(map[string]nfs.OpStats{
								"NULL":   {Ops: 1, Trans: 1, BytesSent: 44, BytesRecv: 24},
								"READ":   {Ops: 256, Trans: 256, BytesSent: 46080, BytesRecv: 1081344, QueueMs: 10, RTTMs: 900, ExecMs: 950},
								"LOOKUP": {Ops: 30, Trans: 30, BytesSent: 5400, BytesRecv: 7200, RTTMs: 33, ExecMs: 35, Errors: 2},
							}),
						},
						ops: []string{"LOOKUP", "NULL", "READ"},
					},
					{
						mount: nfs.Mount{
							Device: "fs02:/export/home", MountPoint: "/home", FSType: "nfs", StatVersion: "1.1",
							Opts: strings.Replace(optsV3, "acregmin=3,acregmax=60,acdirmin=30,acdirmax=60,", "", 1),
							Age:  3024000, Transports: 1, HasEvents: true, Partial: true, Malformed: 1,
							Events: [27]uint64{10, 20, 0, 0, 5, 6, 7, 0, 0, 1, 0, 1, 0, 0, 1, 0, 0, 5},
							Ops:    opsOf(map[string]nfs.OpStats{"GETATTR": {Ops: 9, Trans: 9, BytesSent: 1, BytesRecv: 1}}),
						},
						ops: []string{"GETATTR"},
					},
					{
						mount: nfs.Mount{
							Device: "fs03:/export/scratch", MountPoint: "/scratch2", FSType: "nfs4", StatVersion: "1.1",
							Opts: "rw,vers=4.1,rsize=1048576,wsize=1048576,namlen=255,hard,proto=tcp,timeo=600,retrans=2,sec=sys",
							Age:  12345, HasEvents: true, Partial: true, Malformed: 1,
							Events: [27]uint64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20,
								21, 22, 23, 24, 25, 26, 27},
						},
						ops: []string{},
					},
				},
			},
		},
		{
			name:  "remount sequence, before",
			input: "remount_1_before",
			want: wantStats{mounts: []wantMount{
				homeV3(500000,
					[8]uint64{42011375, 21870965, 4194304, 0, 46213871, 21870965, 10257, 5340},
					[27]uint64{792, 3133, 16, 70, 595, 407, 1111, 318, 0, 112, 0, 142, 33, 22, 382, 21, 18, 550, 0, 3, 32, 1, 0, 0, 0, 0, 0},
					nfs.OpStats{Ops: 1732, Trans: 1733, BytesSent: 441660, BytesRecv: 296172, QueueMs: 167, RTTMs: 1732, ExecMs: 1916}),
				scratchV42(1000,
					[8]uint64{126777828, 63891098, 12582912, 0, 139368932, 63891098, 30952, 15599},
					[27]uint64{1731, 11292, 37, 148, 1160, 1500, 2894, 647, 0, 231, 0, 305, 90, 46, 995, 63, 37, 1055, 0, 6, 92, 3, 0, 0, 0, 0, 0},
					nfs.OpStats{Ops: 994, Trans: 996, BytesSent: 208740, BytesRecv: 260717254, QueueMs: 12, RTTMs: 1988, ExecMs: 2077}),
			}},
		},
		{
			name:  "remount sequence, 5 s later",
			input: "remount_2_later",
			want: wantStats{mounts: []wantMount{
				homeV3(500005,
					[8]uint64{83954415, 42842485, 8388608, 0, 92351215, 42842485, 20497, 10460},
					[27]uint64{1292, 6133, 26, 110, 895, 807, 2011, 518, 0, 172, 0, 222, 58, 34, 682, 41, 28, 850, 0, 5, 62, 2, 0, 0, 0, 0, 0},
					nfs.OpStats{Ops: 2632, Trans: 2633, BytesSent: 671160, BytesRecv: 450072, QueueMs: 82, RTTMs: 2632, ExecMs: 3215}),
				scratchV42(1005,
					[8]uint64{168720868, 84862618, 16777216, 0, 185506276, 84862618, 41192, 20719},
					[27]uint64{2231, 14292, 47, 188, 1460, 1900, 3794, 847, 0, 291, 0, 385, 115, 58, 1295, 83, 47, 1355, 0, 8, 122, 4, 0, 0, 0, 0, 0},
					nfs.OpStats{Ops: 1294, Trans: 1296, BytesSent: 271740, BytesRecv: 339404554, QueueMs: 24, RTTMs: 2588, ExecMs: 2767}),
			}},
		},
		{
			name:  "remount sequence, after the remount of /scratch",
			input: "remount_3_after",
			want: wantStats{mounts: []wantMount{
				homeV3(500015,
					[8]uint64{125897455, 63814005, 12582912, 0, 138488559, 63814005, 30737, 15580},
					[27]uint64{1792, 9133, 36, 150, 1195, 1207, 2911, 718, 0, 232, 0, 302, 83, 46, 982, 61, 38, 1150, 0, 7, 92, 3, 0, 0, 0, 0, 0},
					nfs.OpStats{Ops: 3532, Trans: 3533, BytesSent: 900660, BytesRecv: 603972, QueueMs: 334, RTTMs: 3532, ExecMs: 3901}),
				scratchV42(3,
					[8]uint64{995246, 564123, 0, 0, 1003438, 564123, 243, 138},
					[27]uint64{242, 1101, 8, 22, 73, 195, 11, 95, 0, 30, 0, 35, 20, 7, 116, 17, 0, 74, 0, 1, 11, 0, 0, 0, 0, 0, 0},
					nfs.OpStats{Ops: 137, Trans: 139, BytesSent: 29729, BytesRecv: 35939621, QueueMs: 2, RTTMs: 274, ExecMs: 276}),
			}},
		},
	}

	covered := map[string]bool{}
	for _, tt := range tests {
		covered[tt.input] = true
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := nfs.Parse(bytes.NewReader(fixture.Read(t, "nfs", tt.input, "mountstats")))
			if tt.wantErr {
				require.Error(t, err)
				return
			}
			require.NoError(t, err)
			require.Equal(t, tt.want.malformed, got.Malformed, "Stats.Malformed")
			require.Len(t, got.Mounts, len(tt.want.mounts))
			for i, w := range tt.want.mounts {
				g := got.Mounts[i]
				require.Equal(t, w.ops, opNames(g), "mount %d per-op names", i)
				// Compare only the per-op lines the table spells out.
				want := opMap(w.mount.Ops)
				checked := opMap(g.Ops)
				maps.DeleteFunc(checked, func(name string, _ nfs.OpStats) bool {
					_, ok := want[name]
					return !ok
				})
				require.Equal(t, want, checked, "mount %d per-op lines", i)
				w.mount.Ops, g.Ops = nil, nil
				require.Equal(t, w.mount, g, "mount %d (-want +got)", i)
			}
		})
	}
	for _, c := range allCases(t) {
		require.True(t, covered[c], "fixture %s has no parse test", c)
	}
}

func TestParseInline(t *testing.T) {
	t.Parallel()
	const header = "device srv:/x mounted on /x with fstype nfs statvers=1.1\n"
	const body = "\topts:\trw,vers=3\n\tage:\t7\n" +
		"\tevents:\t1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16 17 18 19 20 21 22 23 24 25 26 27 \n" +
		"\tbytes:\t1 2 3 4 5 6 7 8 \n" +
		"\tRPC iostats version: 1.1  p/v: 100003/3 (nfs)\n" +
		"\tper-op statistics\n"
	base := func() nfs.Mount {
		return nfs.Mount{
			Device: "srv:/x", MountPoint: "/x", FSType: "nfs", StatVersion: "1.1", Opts: "rw,vers=3",
			Age: 7, HasEvents: true, Bytes: [8]uint64{1, 2, 3, 4, 5, 6, 7, 8},
			Events: [27]uint64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20, 21, 22, 23, 24, 25, 26, 27},
		}
	}
	with := func(f func(*nfs.Mount)) []nfs.Mount {
		m := base()
		f(&m)
		return []nfs.Mount{m}
	}
	tests := []struct {
		name    string
		input   string
		want    nfs.Stats
		wantErr bool
	}{
		{
			name:  "empty file",
			input: "",
			want:  nfs.Stats{},
		},
		{
			name:  "only non-NFS mounts",
			input: "device sysfs mounted on /sys with fstype sysfs\ndevice //s/x mounted on /w with fstype cifs \n",
			want:  nfs.Stats{},
		},
		{
			name:  "spaces instead of tabs, no trailing spaces, no final newline",
			input: strings.ReplaceAll(strings.ReplaceAll(header+body, "\t", "    "), " \n", "\n") + "  READ: 1 2 3 4 5 6 7 8 9",
			want: nfs.Stats{Mounts: with(func(m *nfs.Mount) {
				m.Ops = []nfs.Op{{Name: "READ", OpStats: nfs.OpStats{1, 2, 3, 4, 5, 6, 7, 8, 9}}}
			})},
		},
		{
			name:  "CRLF line ends",
			input: strings.ReplaceAll(header+body+"\tREAD: 1 2 3 4 5 6 7 8\n", "\n", "\r\n"),
			want: nfs.Stats{Mounts: with(func(m *nfs.Mount) {
				m.Ops = []nfs.Op{{Name: "READ", OpStats: nfs.OpStats{1, 2, 3, 4, 5, 6, 7, 8, 0}}}
			})},
		},
		{
			// %12s leaves no padding for long names; old kernels printed no tab.
			name:  "per-op names longer than 12 columns",
			input: header + body + "SETCLIENTID_CONFIRM: 1 1 0 0 0 0 0 0 0\n\tBIND_CONN_TO_SESSION: 2 2 0 0 0 0 0 0 0\n",
			want: nfs.Stats{Mounts: with(func(m *nfs.Mount) {
				m.Ops = []nfs.Op{
					{Name: "SETCLIENTID_CONFIRM", OpStats: nfs.OpStats{Ops: 1, Trans: 1}},
					{Name: "BIND_CONN_TO_SESSION", OpStats: nfs.OpStats{Ops: 2, Trans: 2}},
				}
			})},
		},
		{
			name:  "unknown statvers and unknown fields are kept and ignored",
			input: strings.Replace(header, "1.1", "1.2", 1) + strings.Replace(body, "\tRPC", "\tfuture:\t1 2 3\n\tRPC", 1),
			want:  nfs.Stats{Mounts: with(func(m *nfs.Mount) { m.StatVersion = "1.2" })},
		},
		{
			name:  "an unknown field inside the per-op section is malformed",
			input: header + body + "\tfuture 1 2 3\n",
			want:  nfs.Stats{Malformed: 1, Mounts: with(func(m *nfs.Mount) { m.Malformed = 1 })},
		},
		{
			name:  "header without statvers",
			input: "device srv:/x mounted on /x with fstype nfs\n" + body,
			want:  nfs.Stats{Mounts: with(func(m *nfs.Mount) { m.StatVersion = "" })},
		},
		{
			name:  "escape edge cases: \\777 is not octal, trailing backslash kept",
			input: strings.Replace(header, "/x mounted on /x ", `/a\777 mounted on /b\\134\ `, 1) + body,
			want: nfs.Stats{Mounts: with(func(m *nfs.Mount) {
				m.Device, m.MountPoint = `srv:/a\777`, `/b\\\`
			})},
		},
		{
			name:  "missing age makes the mount Partial",
			input: header + strings.Replace(body, "\tage:\t7\n", "", 1),
			want:  nfs.Stats{Mounts: with(func(m *nfs.Mount) { m.Age, m.Partial = 0, true })},
		},
		{
			name:  "events with 28 numbers are skipped",
			input: header + strings.Replace(body, "27 \n", "27 28\n", 1),
			want: nfs.Stats{Malformed: 1, Mounts: with(func(m *nfs.Mount) {
				m.Events, m.HasEvents, m.Malformed = [27]uint64{}, false, 1
			})},
		},
		{
			name:  "a second header ends the first mount; the first lacks per-op",
			input: header + strings.Replace(body, "\tper-op statistics\n", "", 1) + header + body,
			want:  nfs.Stats{Mounts: append(with(func(m *nfs.Mount) { m.Partial = true }), base())},
		},
		{
			name:    "read error keeps what was read",
			input:   header + body,
			want:    nfs.Stats{Mounts: []nfs.Mount{base()}},
			wantErr: true,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			var r io.Reader = strings.NewReader(tt.input)
			if tt.wantErr {
				r = io.MultiReader(r, iotest.ErrReader(errBoom))
			}
			got, err := nfs.Parse(r)
			if tt.wantErr {
				require.Error(t, err)
				require.ErrorIs(t, err, errBoom)
			} else {
				require.NoError(t, err)
			}
			require.Equal(t, tt.want, got)
		})
	}
}

var errBoom = errors.New("boom")

func TestRawNames(t *testing.T) {
	t.Parallel()
	st, err := nfs.Parse(bytes.NewReader(fixture.Read(t, "nfs", "v4_2_single", "mountstats")))
	require.NoError(t, err)
	require.Len(t, st.Mounts, 1)
	// These names are the mapping table's keys: changing one is a breaking
	// change (see doc.go).
	want := map[string]uint64{
		"bytes.normal_read": 1048576, "bytes.normal_write": 2097152,
		"bytes.direct_read": 0, "bytes.direct_write": 0,
		"bytes.server_read": 1048576, "bytes.server_write": 2097152,
		"bytes.read_pages": 256, "bytes.write_pages": 512,
		"events.inode_revalidate": 100, "events.dentry_revalidate": 200,
		"events.data_invalidate": 3, "events.attr_invalidate": 4,
		"events.open": 50, "events.lookup": 60, "events.access": 70,
		"events.updatepage": 80, "events.readpage": 0, "events.readpages": 9,
		"events.writepage": 0, "events.writepages": 8, "events.getdents": 5,
		"events.setattr": 2, "events.flush": 7, "events.fsync": 1, "events.lock": 0,
		"events.release": 50, "events.congestion_wait": 0, "events.setattr_truncate": 0,
		"events.extend_write": 3, "events.silly_rename": 0, "events.short_read": 0,
		"events.short_write": 0, "events.jukebox_delay": 0, "events.pnfs_read": 0,
		"events.pnfs_write": 0,
		"op.NULL":           1, "op.READ": 256,
	}
	require.Equal(t, want, st.Mounts[0].Raw())

	m := st.Mounts[0]
	require.Equal(t, uint64(1), m.Events[nfs.EventFsync])
	require.Equal(t, uint64(512), m.Bytes[nfs.BytesWritePages])
	m.HasEvents = false
	for k := range m.Raw() {
		require.False(t, strings.HasPrefix(k, "events."), "no events without a usable events line: %s", k)
	}
}
