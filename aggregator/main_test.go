package main

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

func TestExampleCutsLoad(t *testing.T) {
	cuts, err := loadCuts("../deploy/config/cuts.example.yaml", coding.DefaultCuts())
	require.NoError(t, err)
	assert.Equal(t, coding.Cut{Elevated: 100, Critical: 1000}, cuts[metric.Creates])
}

func TestJobsTable(t *testing.T) {
	now := time.Date(2026, 3, 2, 14, 10, 0, 0, time.UTC)
	storm := model.Summary{JobMeta: model.JobMeta{ID: "81234", User: "dorvane", Name: "quill-index", Nodes: []string{"bw007", "bw008"}, Start: now.Add(-5 * time.Minute)}, State: model.JobRunning}
	storm.Live[metric.Creates] = 2500
	storm.Live[metric.StatOps] = 15300
	storm.Live[metric.ReadBytes] = 5e6
	storm.Live[metric.Syncs] = 0.2 // below the idle floor: not listed
	storm.LiveLevels[metric.Creates] = coding.Critical
	storm.LiveLevels[metric.StatOps] = coding.Critical
	since := time.Date(2026, 3, 2, 14, 6, 30, 0, time.Local)
	storm.ActiveFlags = []model.Flag{{Reason: model.HighRateOf(metric.Creates), Since: since}}
	idle := model.Summary{JobMeta: model.JobMeta{ID: "81231", Start: now.Add(-time.Hour)}, State: model.JobRunning, NodesSeen: 2}

	var buf bytes.Buffer
	printJobs(&buf, []model.Summary{storm, idle}, false, now)
	lines := strings.Split(strings.TrimRight(buf.String(), "\n"), "\n")
	require.Len(t, lines, 3)
	assert.Regexp(t, `^JOB\s+USER\s+NAME\s+NODES\s+STATE\s+RUNTIME\s+HOTTEST \(live, per node\)\s+FLAGS$`, lines[0])
	assert.Regexp(t, `^81234\s+dorvane\s+quill-index\s+2\s+running\s+5m0s\s+stat_ops 15\.3k/s CRIT, creates 2\.5k/s CRIT, read_bytes 5MB/s\s+high_rate:creates since 2026-03-02 14:06:30 \S+$`, lines[1])
	assert.Regexp(t, `^81231\s+-\s+-\s+2\s+running\s+1h0m0s\s+idle\s+-$`, lines[2])
}

func TestHuman(t *testing.T) {
	for _, tt := range []struct {
		v     float64
		bytes bool
		want  string
	}{{0, false, "0/s"}, {999, false, "999/s"}, {1500, false, "1.5k/s"}, {3e9, true, "3GB/s"}, {10240, true, "10.2kB/s"}} {
		assert.Equal(t, tt.want, human(tt.v, tt.bytes))
	}
}
