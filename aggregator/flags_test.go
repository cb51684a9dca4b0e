package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"net/http"

	"github.com/nats-io/nats.go"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/aggregate"
	"sluice/pkg/api"
	"sluice/pkg/bus"
	"sluice/pkg/metric"
	"sluice/pkg/report"
	"sluice/pkg/tracker"
	"sluice/pkg/wire"
)

// TestStormFlagsExplainAckSilenceLearn drives a metadata storm (job 81234
// of the invented centre, 4 nodes creating 2,000 files/s each) through the
// broker into an aggregator with the built-in patterns, then uses the
// operator commands on it: flags, explain, ack, silence, patterns learn.
func TestStormFlagsExplainAckSilenceLearn(t *testing.T) {
	lib, err := loadLibrary("", true)
	require.NoError(t, err)
	svc := startService(t, func(o *aggregate.Options) {
		o.Tracker = tracker.Options{Window: time.Minute, Live: 20 * time.Second, Grace: time.Second, KeepEnded: time.Minute, Patterns: lib}
	})
	url := "http://" + svc.HTTPAddr()
	nc, err := nats.Connect(svc.NATSURL())
	require.NoError(t, err)
	defer nc.Close()
	t0 := time.Now().Add(-10 * time.Minute).Truncate(time.Minute)
	nodes := []string{"bw007", "bw008", "bw009", "bw010"}
	for _, n := range nodes {
		b := wire.AppendJobEvent(nil, &report.JobEvent{Type: report.JobStart, Job: "81234", Node: n, Nodes: nodes, User: "dorvane", Name: "quill-index", Time: t0})
		keyed(t, nc, "sluice.default.job."+n, b)
	}
	for step := range 24 {
		from := t0.Add(time.Duration(step) * 10 * time.Second)
		for _, n := range nodes {
			var v metric.Values
			v[metric.Creates], v[metric.StatOps], v[metric.WriteBytes] = 20000, 30000, 100_000
			b := wire.AppendSample(nil, &report.Sample{Node: n, Seq: uint64(step + 1), Start: from, End: from.Add(10 * time.Second), Jobs: []string{"81234"}, Values: v})
			keyed(t, nc, "sluice.default.sample."+n, b)
		}
		require.NoError(t, nc.Flush())
		require.Eventually(t, func() bool { return applied(t, url) >= uint64(4*(step+1)) }, 5*time.Second, 5*time.Millisecond)
		svc.Tick()
	}

	cli := func(args ...string) string {
		var out, errb bytes.Buffer
		require.NoError(t, run(context.Background(), append(args, "--url", url), &out, &errb), errb.String())
		return out.String()
	}
	list := cli("flags")
	assert.Regexp(t, `(?m)^81234-\d+\s+active\s+81234\s+pattern:metadata_storm\s+critical\s+\d\.\d\d\s+\d{4}-\d\d-\d\d \d\d:\d\d:\d\d \S+\s+Metadata storm on 4 nodes$`, list)
	assert.Regexp(t, `(?m)^81234-\d+\s+active\s+81234\s+high_rate:creates\s+warning\s+1\.00\s`, list)

	ex := cli("explain", "81234")
	t.Log("\n" + ex)
	assert.Contains(t, ex, "metadata_storm — Metadata storm (critical): score")
	assert.Contains(t, ex, "FLAGGED since")
	assert.Regexp(t, `any: creates level >= critical\s+\+ crit`, ex)
	assert.Contains(t, ex, "advice: ")

	id := flagID(t, url, "pattern:metadata_storm")
	assert.Contains(t, cli("flags", "ack", id, "--by", "keswin", "--why", "calling the user"), "acknowledged by keswin")
	acked := cli("flags")
	t.Log("\n" + acked)
	assert.Regexp(t, `(?m)^`+id+`\s+active \(ack keswin\)\s+81234\s+pattern:metadata_storm`, acked)

	assert.Contains(t, scrape(t, url), `reason="pattern:metadata_storm"`)
	assert.Contains(t, cli("flags", "silence", "--job", "81234", "--pattern", "metadata_storm", "--for", "3d", "--by", "keswin", "--why", "user contacted"), "silence ")
	assert.Regexp(t, `(?m)^`+id+`\s+silenced \(ack keswin\)\s+81234\s+pattern:metadata_storm`, cli("flags"))
	assert.NotContains(t, scrape(t, url), `reason="pattern:metadata_storm"`, "a silenced flag leaves /metrics")
	assert.Contains(t, scrape(t, url), `reason="high_rate:creates"`, "the silence covers only the pattern")
	silences := cli("flags", "silences")
	assert.Regexp(t, `metadata_storm\s+\d{4}-\d\d-\d\d \d\d:\d\d:\d\d \S+\s+keswin\s+user contacted`, silences)

	// Filters are the server's; every listing has --json.
	assert.NotContains(t, cli("flags", "--severity", "warning"), "pattern:metadata_storm")
	assert.Contains(t, cli("flags", "--state", "silenced"), "pattern:metadata_storm")
	assert.NotContains(t, cli("flags", "--state", "silenced"), "high_rate:creates")
	assert.NotContains(t, cli("flags", "--pattern", "high_rate:creates"), "pattern:metadata_storm")
	assert.Contains(t, cli("flags", "--job", "81234", "--pattern", "high_rate:creates"), "high_rate:creates")
	var fl api.FlagList
	require.NoError(t, json.Unmarshal([]byte(cli("flags", "--json", "--job", "81234")), &fl))
	assert.NotEmpty(t, fl.Flags)
	var jl api.JobList
	require.NoError(t, json.Unmarshal([]byte(cli("jobs", "--json")), &jl))
	require.Len(t, jl.Jobs, 1)
	assert.Equal(t, "quill-index", jl.Jobs[0].Name)

	out := filepath.Join(t.TempDir(), "quill_storm.yaml")
	cli("patterns", "learn", "--job", "81234", "--name", "quill_storm", "--out", out)
	data, err := os.ReadFile(out)
	require.NoError(t, err)
	assert.Contains(t, string(data), "name: quill_storm")
	assert.Contains(t, string(data), "creates:")
	var chk bytes.Buffer
	require.NoError(t, run(context.Background(), []string{"patterns", "check", filepath.Dir(out)}, &chk, &chk))
	assert.Contains(t, chk.String(), "1 patterns, all valid")

	// The job ends: explain and learn still answer for it.
	end := t0.Add(4 * time.Minute)
	b := wire.AppendJobEvent(nil, &report.JobEvent{Type: report.JobEnd, Job: "81234", Node: nodes[0], Time: end})
	keyed(t, nc, "sluice.default.job."+nodes[0], b)
	b = wire.AppendSample(nil, &report.Sample{Node: nodes[0], Seq: 100, Start: end, End: end.Add(10 * time.Second)})
	keyed(t, nc, "sluice.default.sample."+nodes[0], b)
	require.NoError(t, nc.Flush())
	require.Eventually(t, func() bool { svc.Tick(); return strings.Contains(cli("jobs", "--all"), "ended") }, 5*time.Second, 10*time.Millisecond)
	ended := cli("explain", "81234")
	assert.Contains(t, ended, "ended")
	assert.Contains(t, ended, "metadata_storm — Metadata storm (critical): score")
	cli("patterns", "learn", "--job", "81234", "--name", "quill_storm", "--out", out)

	// Two minutes later the tracker has forgotten the job (KeepEnded is a
	// minute here); its stored windows still explain it and teach a pattern.
	later := end.Add(3 * time.Minute)
	b = wire.AppendSample(nil, &report.Sample{Node: nodes[1], Seq: 100, Start: later, End: later.Add(10 * time.Second)})
	keyed(t, nc, "sluice.default.sample."+nodes[1], b)
	require.NoError(t, nc.Flush())
	require.Eventually(t, func() bool { svc.Tick(); return !strings.Contains(cli("jobs", "--all"), "81234") }, 5*time.Second, 10*time.Millisecond)
	gone := cli("explain", "81234")
	assert.Contains(t, gone, "job 81234 (-, user -): ended, 4 closed windows")
	assert.Contains(t, gone, "metadata_storm — Metadata storm (critical): score")
	cli("patterns", "learn", "--job", "81234", "--name", "quill_storm", "--out", out)
	data, err = os.ReadFile(out)
	require.NoError(t, err)
	assert.Contains(t, string(data), "creates:")
}

func applied(t *testing.T, url string) uint64 {
	m := scrape(t, url)
	var n uint64
	_, _ = fmt.Sscanf(after(m, `sluice_ingest_messages_total{kind="sample"} `), "%d", &n)
	return n
}

func after(s, prefix string) string {
	i := bytes.Index([]byte(s), []byte(prefix))
	if i < 0 {
		return ""
	}
	return s[i+len(prefix):]
}

func scrape(t *testing.T, url string) string {
	var b bytes.Buffer
	resp, err := httpGet(url + "/metrics")
	require.NoError(t, err)
	defer resp.Body.Close()
	_, err = b.ReadFrom(resp.Body)
	require.NoError(t, err)
	return b.String()
}

func flagID(t *testing.T, url, reason string) string {
	fs, err := api.NewClient(url).Flags(context.Background(), api.FlagFilter{})
	require.NoError(t, err)
	for _, f := range fs {
		if f.Reason.String() == reason {
			return f.ID
		}
	}
	t.Fatalf("no flag %s", reason)
	return ""
}

var httpGet = http.Get

// keyed publishes a sample or job event as an agent does: with its
// de-duplication key, which the aggregator checks against the body.
func keyed(t *testing.T, nc *nats.Conn, subject string, data []byte) {
	t.Helper()
	var id string
	if k, _ := wire.Peek(data); k == wire.KindSample {
		var s report.Sample
		require.NoError(t, wire.DecodeSample(data, &s))
		id = bus.SampleID(s.Node, s.Seq)
	} else {
		var e report.JobEvent
		require.NoError(t, wire.DecodeJobEvent(data, &e))
		id = bus.JobEventID(&e)
	}
	require.NoError(t, nc.PublishMsg(&nats.Msg{Subject: subject, Data: data, Header: nats.Header{bus.MsgIDHeader: []string{id}}}))
}
