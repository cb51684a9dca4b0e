package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/jobstate"
	"sluice/pkg/mapping"
	"sluice/pkg/metric"
	"sluice/pkg/nodeagent"
)

func TestMissingStatsTreeNamesPathAndFlag(t *testing.T) {
	missing := filepath.Join(t.TempDir(), "no-llite-here")
	var stderr bytes.Buffer
	err := run(context.Background(), []string{"run", "--source.lustre.root", missing, "--state.dir", t.TempDir()}, &stderr)
	require.Error(t, err)
	assert.Contains(t, err.Error(), missing)
	assert.Contains(t, err.Error(), "--source.lustre.root")
}

func TestUnknownCommand(t *testing.T) {
	var stderr bytes.Buffer
	err := run(context.Background(), []string{"frobnicate"}, &stderr)
	require.Error(t, err)
	assert.Contains(t, stderr.String(), "usage: agent")
}

func TestJobHooksRecordState(t *testing.T) {
	state := t.TempDir()
	var stderr bytes.Buffer
	// No broker listens on this port: the hooks record the job and leave
	// the announcement to the agent, without failing the prolog.
	common := []string{"--state.dir", state, "--node", "bw007", "--nats.url", "nats://127.0.0.1:1", "--log.level", "error"}
	require.NoError(t, run(context.Background(), append([]string{"job", "start", "--id", "81234", "--user", "dorvane",
		"--name", "quill-index", "--nodes", "bw[007-010]", "--time", "2026-03-02T14:00:00Z"}, common...), &stderr))
	dir, err := jobstate.Open(nodeagent.JobsDir(state))
	require.NoError(t, err)
	rec, err := dir.Get("81234")
	require.NoError(t, err)
	assert.Equal(t, []string{"bw007", "bw008", "bw009", "bw010"}, rec.Nodes)
	assert.False(t, rec.StartSent)

	require.NoError(t, run(context.Background(), append([]string{"job", "end", "--id", "81234", "--exit-code", "3",
		"--time", "2026-03-02T15:00:00Z"}, common...), &stderr))
	rec, err = dir.Get("81234")
	require.NoError(t, err)
	assert.Equal(t, int32(3), rec.ExitCode)
	assert.False(t, rec.End.IsZero())

	assert.Error(t, run(context.Background(), append([]string{"job", "start", "--nodes", "bw[1-"}, common...), &stderr), "no --id")
	assert.Error(t, run(context.Background(), append([]string{"job", "start", "--id", "1", "--nodes", "bw[1-"}, common...), &stderr), "bad host list")
}

func TestExampleMappingLoads(t *testing.T) {
	f, err := os.Open("../deploy/config/mapping.example.yaml")
	require.NoError(t, err)
	defer f.Close()
	table, err := mapping.Load(f, mapping.Default())
	require.NoError(t, err)
	assert.Equal(t, metric.StatOps, table["lustre"]["inode_permission"])
	assert.NotContains(t, table["lustre"], "mmap")
}

func TestConfigFileAndEnvironment(t *testing.T) {
	state := t.TempDir()
	cfg := filepath.Join(t.TempDir(), "agent.yaml")
	require.NoError(t, os.WriteFile(cfg, []byte("interval: 10s\nsource:\n  lustre:\n    root: /nonexistent/from-file\nstate.dir: "+state+"\n"), 0o644))
	var stderr bytes.Buffer
	err := run(context.Background(), []string{"run", "--config", cfg}, &stderr)
	require.Error(t, err)
	assert.Contains(t, err.Error(), "/nonexistent/from-file", "the file's source root is used")

	t.Setenv("SLUICE_AGENT_SOURCE_LUSTRE_ROOT", "/nonexistent/from-env")
	err = run(context.Background(), []string{"run", "--config", cfg}, &stderr)
	assert.Contains(t, err.Error(), "/nonexistent/from-env", "the environment overrides the file")

	err = run(context.Background(), []string{"run", "--config", cfg, "--source.lustre.root", "/nonexistent/from-flag"}, &stderr)
	assert.Contains(t, err.Error(), "/nonexistent/from-flag", "the command line overrides both")

	// The same file serves the hooks: run-only options are not errors there.
	require.NoError(t, run(context.Background(), []string{"job", "start", "--config", cfg, "--id", "7", "--nats.url", "nats://127.0.0.1:1"}, &stderr))

	bad := filepath.Join(t.TempDir(), "bad.yaml")
	require.NoError(t, os.WriteFile(bad, []byte("intervall: 10s\n"), 0o644))
	err = run(context.Background(), []string{"run", "--config", bad}, &stderr)
	assert.ErrorContains(t, err, `unknown option "intervall"`)
}

func TestCheckListsSourcesAndFailsWithoutData(t *testing.T) {
	root := t.TempDir()
	var out, stderr bytes.Buffer
	args := []string{"--sources", "lustre", "--source.lustre.root", root, "--state.dir", t.TempDir()}
	err := check(context.Background(), args, &out, &stderr)
	require.Error(t, err, "an empty llite directory gives nothing to publish")
	assert.Contains(t, err.Error(), "no source found any counters")

	require.NoError(t, os.MkdirAll(filepath.Join(root, "scratch-ffff9a0c12345000"), 0o755))
	data, err := os.ReadFile("../testdata/lustre/v2_16_header/stats")
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(filepath.Join(root, "scratch-ffff9a0c12345000", "stats"), data, 0o644))
	out.Reset()
	require.NoError(t, check(context.Background(), args, &out, &stderr))
	assert.Regexp(t, `lustre\s+1\s+read_bytes write_bytes read_ops write_ops opens closes creates removes stat_ops meta_updates syncs other_ops\s+ok`, out.String())

	err = check(context.Background(), append(args, "--nats.url", "http://x:1"), &out, &stderr)
	assert.ErrorContains(t, err, "scheme")

	// Both sources, the block one over a fixture instead of this machine's
	// /proc (kernel Documentation/admin-guide/iostats.rst layout, 20 fields).
	// Every source, over fixtures instead of this machine's /proc: block
	// devices after the kernel's Documentation/admin-guide/iostats.rst (20
	// fields), NFS after fs/nfs/super.c nfs_show_stats.
	nfsProc := t.TempDir()
	require.NoError(t, os.MkdirAll(filepath.Join(nfsProc, "self"), 0o755))
	ms, err := os.ReadFile("../testdata/nfs/v4_2_single/mountstats")
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(filepath.Join(nfsProc, "self", "mountstats"), ms, 0o644))
	all := append(args, "--sources", "lustre,nfs,block", "--source.block.procfs", "../testdata/block/v5_5_20fields", "--source.nfs.procfs", nfsProc)
	out.Reset()
	require.NoError(t, check(context.Background(), all, &out, &stderr))
	assert.Regexp(t, `block\s+\d+\s+read_bytes write_bytes read_ops write_ops syncs\s+ok`, out.String())
	assert.Regexp(t, `nfs\s+1\s+read_bytes .*\s+ok`, out.String())

	out.Reset()
	require.NoError(t, bench(context.Background(), append(args, "--bench.reads", "20"), &out, &stderr))
	assert.Regexp(t, `lustre\s+1\s+[0-9.]+\s+[0-9.]+\s+[0-9.]+%`, out.String())
	assert.Contains(t, out.String(), "all (collect)")
}

// TestCheckMarksPerJobMetrics runs agent check with the jobio source alone
// over a node with one job (testdata/jobio/shared_node without job 81240):
// its metrics are listed as going to each job's block.
func TestCheckMarksPerJobMetrics(t *testing.T) {
	tree := t.TempDir()
	require.NoError(t, os.CopyFS(tree, os.DirFS("../testdata/jobio/shared_node")))
	require.NoError(t, os.RemoveAll(filepath.Join(tree, "cgroup/system.slice/slurmstepd.scope/job_81240")))
	var out, stderr bytes.Buffer
	args := []string{"--sources", "jobio", "--state.dir", t.TempDir(),
		"--source.jobio.cgroupfs", filepath.Join(tree, "cgroup"), "--source.jobio.procfs", filepath.Join(tree, "proc")}
	require.NoError(t, check(context.Background(), args, &out, &stderr))
	assert.Regexp(t, `jobio\s+1\s+read_bytes write_bytes read_ops write_ops, per job\s+ok`, out.String())
}

func TestExampleAgentConfigParses(t *testing.T) {
	// The example names only real options: a wrong name would fail here.
	var stderr bytes.Buffer
	err := run(context.Background(), []string{"check", "--config", "../deploy/config/agent.example.yaml", "--state.dir", t.TempDir()}, &stderr)
	require.Error(t, err, "this machine has no Lustre client")
	assert.Contains(t, err.Error(), "/sys/kernel/debug/lustre/llite")
	assert.NotContains(t, err.Error(), "unknown option")
}
