package nodeagent_test

import (
	"bytes"
	"context"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/jobstate"
	"sluice/pkg/nodeagent"
	"sluice/pkg/source"
	"sluice/pkg/source/block"
	"sluice/pkg/source/jobio"
	"sluice/pkg/source/lustre"
	"sluice/pkg/source/nfs"
)

// node is a whole node's counter files, copied from testdata/node: 4
// Lustre mounts, 2 NFS mounts, 8 block devices and 2 jobs of 20 processes
// each, plus the list of every file a sample reads, for the bare-cost
// comparison, and what changes rewrites between intervals.
type node struct {
	lustre, proc, cgroup, state string
	files                       []string

	lustrePaths []string     // the 4 mounts' stats files
	lustreBase  lustre.Stats // what they hold at first
	mountstats  []byte       // the NFS file as first written
}

// buildNode copies testdata/node (see its README) and records the two
// jobs as the hooks would have.
func buildNode(b *testing.B) node {
	n := node{lustre: b.TempDir(), proc: b.TempDir(), cgroup: b.TempDir(), state: b.TempDir()}
	for dir, from := range map[string]string{n.lustre: "lustre", n.proc: "proc", n.cgroup: "cgroup"} {
		require.NoError(b, os.CopyFS(dir, os.DirFS(fixture.Path(b, "node", from))))
		require.NoError(b, filepath.WalkDir(dir, func(path string, d fs.DirEntry, err error) error {
			if err == nil && d.Type().IsRegular() && d.Name() != "stat" { // stat: read once per process, not per sample
				n.files = append(n.files, path)
			}
			return err
		}))
	}
	var err error
	n.lustrePaths, err = filepath.Glob(filepath.Join(n.lustre, "*", "stats"))
	require.NoError(b, err)
	require.Len(b, n.lustrePaths, 4)
	stats, err := os.ReadFile(n.lustrePaths[0])
	require.NoError(b, err)
	n.lustreBase, err = lustre.Parse(bytes.NewReader(stats))
	require.NoError(b, err)
	n.mountstats, err = os.ReadFile(filepath.Join(n.proc, "self", "mountstats"))
	require.NoError(b, err)
	dir, err := jobstate.Open(nodeagent.JobsDir(n.state))
	require.NoError(b, err)
	for _, job := range []string{"81234", "81240"} {
		require.NoError(b, dir.Put(jobstate.Record{ID: job, Start: t0, StartSent: true}))
	}
	old := time.Now().Add(-time.Minute)
	require.NoError(b, os.Chtimes(nodeagent.JobsDir(n.state), old, old))
	return n
}

// BenchmarkNodeAllSources is one interval of the agent on a full node
// (every source, deltas, mapping, per-job split), beside the bare cost of
// reading the same files with pread on descriptors opened beforehand.
// Each iteration does one of each and reports their ratio (x-bare), so
// that both meet the machine in the same state: on a shared VM whose speed
// drifts, the ratio of two separate runs moves by a fifth.
//
// Between iterations, outside the timing, the Lustre and NFS files are
// rewritten as an interval changes them, since those sources skip the
// lines that have not changed (see lustre's memo):
//
//   - busy: every mount is in use. On each Lustre mount 12 of the 34
//     counters move (the data, open/close, attribute and page counters a
//     running job drives), and on each NFS mount the events and bytes lines
//     and 10 procedures (READ, WRITE, GETATTR, ACCESS, LOOKUP, OPEN,
//     CLOSE, COMMIT, SEQUENCE, SETATTR).
//   - every-line: every counter line and every per-op line moves, the
//     worst case for the skipping.
//   - unchanged: only the time stamps move, as on a node whose jobs do no
//     I/O.
//
// The block device and process files stay as they are: their sources keep
// nothing by content, so a changed file costs what an unchanged one does.
// The usual ns/op counts the rewriting too; the figures are agent-us/op,
// bare-us/op and x-bare.
func BenchmarkNodeAllSources(b *testing.B) {
	n := buildNode(b)
	for _, c := range []struct {
		name string
		busy func(string) bool // which Lustre counters and NFS lines move
	}{
		{"busy", busyCounter},
		{"every-line", func(string) bool { return true }},
		{"unchanged", func(string) bool { return false }},
	} {
		b.Run(c.name, func(b *testing.B) {
			ch := n.changes(b, c.busy)
			collect, read := n.agent(b), n.bare(b)
			var agent, bare time.Duration
			for b.Loop() {
				ch.next(b)
				start := time.Now()
				collect()
				mid := time.Now()
				read()
				agent, bare = agent+mid.Sub(start), bare+time.Since(mid)
			}
			b.ReportMetric(float64(agent.Nanoseconds())/1e3/float64(b.N), "agent-us/op")
			b.ReportMetric(float64(bare.Nanoseconds())/1e3/float64(b.N), "bare-us/op")
			b.ReportMetric(float64(agent)/float64(bare), "x-bare")
			b.ReportMetric(testing.AllocsPerRun(100, func() { ch.next(b); collect() }), "agent-allocs/op")
		})
	}
}

// busyCounter reports whether a running job moves a Lustre counter or an
// NFS line in one interval (see BenchmarkNodeAllSources).
func busyCounter(name string) bool {
	switch name {
	case "read_bytes", "write_bytes", "read", "write", "open", "close", "getattr",
		"inode_permission", "page_fault", "seek", "opencount", "openclosetime",
		"events:", "bytes:", "READ:", "WRITE:", "GETATTR:", "ACCESS:", "LOOKUP:",
		"OPEN:", "CLOSE:", "COMMIT:", "SEQUENCE:", "SETATTR:":
		return true
	}
	return false
}

// changes is a run of intervals' Lustre and NFS files, made beforehand so
// that writing them between iterations allocates nothing (garbage made
// there would be collected during the timing). After the last the run
// starts again, which the agent takes as a counter reset once every
// len(lustre) intervals.
type changes struct {
	files  []*os.File // the 4 Lustre files, then mountstats
	lustre [][]byte
	nfs    [][]byte
	i      int
}

// changes opens the node's Lustre and NFS files and makes 500 intervals of
// their contents: time stamps 5 s on each, and the counters busy picks up
// by the interval's number times a step.
func (n *node) changes(b *testing.B, busy func(string) bool) *changes {
	ch := &changes{}
	for _, p := range append(slices.Clone(n.lustrePaths), filepath.Join(n.proc, "self", "mountstats")) {
		f, err := os.OpenFile(p, os.O_WRONLY, 0)
		require.NoError(b, err)
		b.Cleanup(func() { f.Close() })
		ch.files = append(ch.files, f)
	}
	for i := range 500 {
		st := n.lustreBase
		st.SnapshotTime = st.SnapshotTime.Add(time.Duration(i) * 5 * time.Second)
		st.Counters = slices.Clone(st.Counters)
		for j := range st.Counters {
			c := &st.Counters[j]
			if busy(c.Name) {
				c.Samples += uint64(i)
				if c.Fields >= 3 {
					c.Sum += uint64(i) * c.Max
				}
			}
		}
		var buf bytes.Buffer
		require.NoError(b, lustre.Write(&buf, st, lustre.FormatV2_16))
		ch.lustre = append(ch.lustre, buf.Bytes())
		ch.nfs = append(ch.nfs, bumpMountstats(n.mountstats, i, busy))
	}
	return ch
}

// next writes the next interval's files in place.
func (ch *changes) next(b *testing.B) {
	i := ch.i % len(ch.lustre)
	ch.i++
	for j, f := range ch.files {
		data := ch.lustre[i]
		if j == len(ch.files)-1 {
			data = ch.nfs[i]
		}
		if _, err := f.WriteAt(data, 0); err != nil {
			b.Fatal(err)
		}
		if err := f.Truncate(int64(len(data))); err != nil {
			b.Fatal(err)
		}
	}
}

// bumpMountstats adds i to every number of the counter lines of data
// (per-op, events and bytes lines: a name ending in ':' and only numbers
// after it) whose name busy picks. The age line is left alone, so that the
// source sees no remount.
func bumpMountstats(data []byte, i int, busy func(string) bool) []byte {
	var out []byte
	for line := range bytes.Lines(data) {
		f := strings.Fields(string(line))
		if len(f) < 2 || !strings.HasSuffix(f[0], ":") || f[0] == "age:" || !busy(f[0]) {
			out = append(out, line...)
			continue
		}
		bumped := append(out, line[:bytes.Index(line, []byte(f[0]))+len(f[0])]...)
		ok := true
		for _, v := range f[1:] {
			x, err := strconv.ParseUint(v, 10, 64)
			if ok = err == nil; !ok {
				break
			}
			bumped = strconv.AppendUint(append(bumped, ' '), x+uint64(i), 10)
		}
		if !ok {
			out = append(out, line...) // over what bumped wrote
			continue
		}
		out = append(bumped, '\n')
	}
	return out
}

// agent returns one agent interval over the node's files, checked.
func (n *node) agent(b *testing.B) func() {
	disks, err := block.NewSource(n.proc, block.Options{}, nil)
	require.NoError(b, err)
	jobs, err := jobio.NewSource(jobio.Options{CgroupRoot: n.cgroup, ProcRoot: n.proc}, nil)
	require.NoError(b, err)
	a, err := nodeagent.New(nodeagent.Config{
		Node: "bw001", StateDir: n.state,
		Sources: []source.Source{lustre.NewSource(n.lustre, nil), nfs.NewSource(n.proc, nil), disks, jobs},
	})
	require.NoError(b, err)
	ctx := context.Background()
	_, _, err = a.Collect(ctx)
	require.NoError(b, err)
	return func() {
		s, _, err := a.Collect(ctx)
		if err != nil || len(s.PerJob) != 2 {
			b.Fatal(err, len(s.PerJob))
		}
	}
}

// bare returns one pread of each of the node's files, whole, on
// descriptors opened here.
func (n *node) bare(b *testing.B) func() {
	var fs []*os.File
	for _, p := range n.files {
		f, err := os.Open(p)
		require.NoError(b, err)
		b.Cleanup(func() { f.Close() })
		fs = append(fs, f)
	}
	buf := make([]byte, 64<<10)
	return func() {
		for _, f := range fs {
			if _, err := f.ReadAt(buf, 0); err != nil && err != io.EOF {
				b.Fatal(err)
			}
		}
	}
}
