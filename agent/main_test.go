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
