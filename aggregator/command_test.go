package main

import (
	"bytes"
	"context"
	"encoding/json"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/aggregate"
	"sluice/pkg/api"
	"sluice/pkg/matcher"
	"sluice/pkg/pattern"
	"sluice/pkg/tracker"
)

// invoke runs the binary's command line as main does and returns its exit
// status, standard output and standard error.
func invoke(args ...string) (status int, stdout, stderr string) {
	var out, errb bytes.Buffer
	status = exitStatus(run(context.Background(), args, &out, &errb), &errb)
	return status, out.String(), errb.String()
}

func TestHelpExitsZero(t *testing.T) {
	for _, args := range [][]string{
		{"-h"}, {"help"}, {"jobs", "-h"}, {"flags", "-h"}, {"flags", "silence", "-h"}, {"explain", "--help"},
		{"patterns", "-h"}, {"patterns", "learn", "-h"}, {"baseline", "help"}, {"run", "-h"}, {"eval", "-h"},
	} {
		status, out, errs := invoke(args...)
		assert.Zero(t, status, "%v", args)
		assert.Contains(t, out, "usage: aggregator", "%v", args)
		assert.Empty(t, errs, "%v", args)
	}
	_, out, _ := invoke("-h")
	for _, cmd := range []string{"run", "jobs", "flags", "explain", "patterns", "baseline", "demo", "eval"} {
		assert.Regexp(t, `(?m)^  `+cmd+`\s`, out, "the usage lists every command")
	}
	_, out, _ = invoke("flags", "silence", "-h")
	assert.Contains(t, out, "3d", "the help of --for names days")
}

func TestWrongCommandLinesSayWhatOnce(t *testing.T) {
	tests := []struct {
		args []string
		want string
	}{
		{[]string{"jobs", "--bogus"}, "aggregator jobs: flag provided but not defined: -bogus\nusage: aggregator jobs [options]\n"},
		{[]string{"explain"}, "aggregator explain: give JOB\nusage: aggregator explain [options] JOB\n"},
		{[]string{"explain", "1", "2"}, "aggregator explain: unexpected arguments: 2\n"},
		{[]string{"flags", "ack"}, "aggregator flags ack: give FLAG\n"},
		{[]string{"flags", "frob"}, "aggregator flags: unknown subcommand \"frob\"\nusage: aggregator flags"},
		{[]string{"frob"}, "aggregator: unknown command \"frob\"\nusage: aggregator <command>"},
		{nil, "aggregator: needs a command\nusage: aggregator <command>"},
		{[]string{"flags", "--state", "asleep"}, "aggregator flags list: --state: unknown flag state \"asleep\"; want active, silenced or cleared\n"},
	}
	for _, tt := range tests {
		status, out, errs := invoke(tt.args...)
		assert.Equal(t, 2, status, "%v", tt.args)
		assert.Empty(t, out, "%v", tt.args)
		assert.True(t, strings.HasPrefix(errs, tt.want), "%v:\n%s", tt.args, errs)
		first := strings.SplitN(tt.want, "\n", 2)[0]
		assert.Equal(t, 1, strings.Count(errs, first), "the error once: %s", errs)
		assert.LessOrEqual(t, strings.Count(errs, "\n"), 18, "a short usage: %s", errs)
		assert.NotContains(t, errs, "aggregator: aggregator")
		assert.NotContains(t, errs, "  -url", "a short usage, not every option")
	}
}

func TestUnreachableAggregatorSaysWhere(t *testing.T) {
	status, _, errs := invoke("jobs", "--url", "http://127.0.0.1:1")
	assert.Equal(t, 1, status)
	assert.Contains(t, errs, "no aggregator answering at http://127.0.0.1:1")
	assert.Equal(t, 1, strings.Count(errs, "aggregator:"), errs)
}

// TestClientCommandsTakeTheURLFromTheEnvironment: with
// SLUICE_AGGREGATOR_URL set, no --url is needed, and --url still wins.
func TestClientCommandsTakeTheURLFromTheEnvironment(t *testing.T) {
	svc := startService(t, func(*aggregate.Options) {})
	t.Setenv("SLUICE_AGGREGATOR_URL", "http://"+svc.HTTPAddr())
	status, out, errs := invoke("jobs")
	require.Zero(t, status, errs)
	assert.Contains(t, out, "(no jobs)")
	status, _, _ = invoke("jobs", "--url", "http://127.0.0.1:1")
	assert.Equal(t, 1, status, "--url wins over the environment")
}

// TestPatternsListWhatTheAggregatorUses: list and show ask the running
// aggregator, which here matches one site pattern and no built-ins.
func TestPatternsListWhatTheAggregatorUses(t *testing.T) {
	p, err := pattern.Parse("storm.yaml", strings.NewReader(`schema: 1
name: site_storm
title: Site storm
severity: critical
description: d
rationale: r
advice: follow your site's policy
rule:
  hold: {k: 2, n: 3}
  all:
    - {metric: creates, level: critical}
`))
	require.NoError(t, err)
	lib, err := matcher.Compile([]*pattern.Pattern{p})
	require.NoError(t, err)
	svc := startService(t, func(o *aggregate.Options) { o.Tracker = tracker.Options{Patterns: lib} })
	url := "http://" + svc.HTTPAddr()
	status, out, errs := invoke("patterns", "list", "--url", url)
	require.Zero(t, status, errs)
	assert.Contains(t, out, "site_storm")
	assert.NotContains(t, out, "metadata_storm", "the built-ins are not in force there")
	status, out, errs = invoke("patterns", "show", "site_storm", "--url", url)
	require.Zero(t, status, errs)
	assert.Contains(t, out, "site_storm: Site storm")
	assert.Contains(t, out, "in at least 2 of the last 3 windows")
	status, out, _ = invoke("patterns", "list", "--json", "--url", url)
	require.Zero(t, status)
	var pl api.PatternList
	require.NoError(t, json.Unmarshal([]byte(out), &pl))
	require.Len(t, pl.Patterns, 1)
	status, _, errs = invoke("patterns", "show", "metadata_storm", "--url", url)
	assert.Equal(t, 1, status)
	assert.Contains(t, errs, `no pattern "metadata_storm" in force`)
}

func TestStampShowsYearAndZone(t *testing.T) {
	at := time.Date(2026, 12, 2, 14, 5, 10, 0, time.UTC)
	s := stamp(at)
	assert.Regexp(t, `^2026-12-02 \d\d:05:10 \S+$`, s)
	assert.Equal(t, "-", stamp(time.Time{}))
}

func TestCleanMakesControlsVisible(t *testing.T) {
	assert.Equal(t, `dorvane\x1b[31m`, clean("dorvane\x1b[31m"))
	assert.Equal(t, `a\x09b`, clean("a\tb"))
	assert.Equal(t, "ünïcode", clean("ünïcode"))
}
