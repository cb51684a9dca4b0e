//go:build e2e

package aggregate_test

import (
	"context"
	"encoding/json"
	"fmt"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/matcher"
	"sluice/pkg/nodeagent"
	"sluice/pkg/pattern"
)

// TestAlertsFireInPrometheus runs the real Prometheus server (Debian
// package prometheus) against an aggregator fed by the simulator through
// real agents, with the project's own alert rules, their "for" durations
// shortened to seconds (the expressions are unchanged). The metadata storm
// of job 4101 must show as firing SluicePatternCritical and SluiceHighIORate
// alerts in Prometheus's alerts API (the latter with a high_rate:<metric>
// reason), both linking the job's API page and its explanation, and all of
// them must resolve after the job ends.
func TestAlertsFireInPrometheus(t *testing.T) {
	bin, err := exec.LookPath("prometheus")
	require.NoError(t, err, "install the Debian package prometheus (make e2e needs the real server)")
	ps, err := pattern.Builtin()
	require.NoError(t, err)
	lib, err := matcher.Compile(ps)
	require.NoError(t, err)
	r := newRigWith(t, lib)
	r.advance(30) // 2.5 simulated minutes: the storm is flagged

	promURL := startPrometheus(t, bin, r.svc.HTTPAddr())
	firing := func(name string) bool {
		for _, a := range alerts(t, promURL) {
			if a.Labels["alertname"] == name && a.State == "firing" && a.Labels["job_id"] == "4101" {
				require.Contains(t, a.Annotations["advice"], "http://"+r.svc.HTTPAddr()+"/api/v1/jobs/4101 ")
				require.Contains(t, a.Annotations["advice"], "http://"+r.svc.HTTPAddr()+"/api/v1/jobs/4101/explain")
				require.NotContains(t, a.Labels, "summary") // no free text in the alert's identity
				switch name {
				case "SluicePatternCritical": // the pattern's own advice, from sluice_pattern_info
					require.Equal(t, "pattern:metadata_storm", a.Labels["reason"])
					require.Contains(t, a.Annotations["advice"], "Follow your site's policy")
				case "SluiceHighIORate":
					require.Regexp(t, `^high_rate:[a-z_]+$`, a.Labels["reason"])
					require.Equal(t, "warning", a.Labels["severity"])
					metric := strings.TrimPrefix(a.Labels["reason"], "high_rate:")
					require.Contains(t, a.Annotations["summary"], ": "+metric+" above its critical cut point")
				}
				return true
			}
		}
		return false
	}
	require.Eventually(t, func() bool { r.advance(1); return firing("SluicePatternCritical") && firing("SluiceHighIORate") },
		90*time.Second, time.Second, "the storm's alerts did not fire in Prometheus")
	checkMetrics(t, "http://"+r.svc.HTTPAddr()+"/metrics")

	for _, node := range []string{"bw001", "bw002"} {
		require.NoError(t, nodeagent.JobEnd(context.Background(), nodeagent.HookConfig{
			StateDir: filepath.Join(r.dir, "state", node), Node: node, NATSURL: r.url,
		}, "4101", r.clk.now(), 0))
	}
	require.Eventually(t, func() bool {
		r.advance(1)
		for _, a := range alerts(t, promURL) {
			if a.Labels["job_id"] == "4101" {
				return false
			}
		}
		return true
	}, 90*time.Second, time.Second, "the storm's alerts did not resolve after the job ended")
}

// checkMetrics runs promtool's metric lint on a live scrape.
func checkMetrics(t *testing.T, url string) {
	promtool, err := exec.LookPath("promtool")
	require.NoError(t, err, "install the Debian package prometheus")
	resp, err := http.Get(url)
	require.NoError(t, err)
	defer resp.Body.Close()
	cmd := exec.Command(promtool, "check", "metrics")
	cmd.Stdin = resp.Body
	out, err := cmd.CombinedOutput()
	require.NoError(t, err, "promtool check metrics on a live scrape:\n%s", out)
}

type alert struct {
	Labels      map[string]string `json:"labels"`
	Annotations map[string]string `json:"annotations"`
	State       string            `json:"state"`
}

func alerts(t *testing.T, base string) []alert {
	resp, err := http.Get(base + "/api/v1/alerts")
	if err != nil {
		return nil
	}
	defer resp.Body.Close()
	var out struct {
		Data struct {
			Alerts []alert `json:"alerts"`
		} `json:"data"`
	}
	require.NoError(t, json.NewDecoder(resp.Body).Decode(&out))
	return out.Data.Alerts
}

var forDuration = regexp.MustCompile(`(?m)^(\s+for:) \d+[smh]$`)

// startPrometheus writes a configuration scraping target every second
// with the project's rules (for: shortened to 2s) and runs the server on a
// free port until the test ends.
func startPrometheus(t *testing.T, bin, target string) string {
	dir := t.TempDir()
	rules, err := os.ReadFile("../../deploy/prometheus/sluice.rules.yml")
	require.NoError(t, err)
	fast := forDuration.ReplaceAll(rules, []byte("$1 2s"))
	require.NotEqual(t, string(rules), string(fast))
	require.NoError(t, os.WriteFile(filepath.Join(dir, "sluice.rules.yml"), fast, 0o644))
	cfg := fmt.Sprintf(`global:
  scrape_interval: 1s
  evaluation_interval: 1s
rule_files: [sluice.rules.yml]
scrape_configs:
  - job_name: sluice-aggregator
    static_configs:
      - targets: [%q]
`, target)
	require.NoError(t, os.WriteFile(filepath.Join(dir, "prometheus.yml"), []byte(cfg), 0o644))
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	require.NoError(t, err)
	addr := ln.Addr().String()
	ln.Close()
	ctx, cancel := context.WithCancel(context.Background())
	cmd := exec.CommandContext(ctx, bin, "--config.file="+filepath.Join(dir, "prometheus.yml"),
		"--storage.tsdb.path="+filepath.Join(dir, "data"), "--web.listen-address="+addr, "--log.level=warn")
	var logs strings.Builder
	cmd.Stdout, cmd.Stderr = &logs, &logs
	require.NoError(t, cmd.Start())
	t.Cleanup(func() {
		cancel()
		_ = cmd.Wait()
		if t.Failed() {
			t.Logf("prometheus output:\n%s", logs.String())
		}
	})
	base := "http://" + addr
	require.Eventually(t, func() bool {
		resp, err := http.Get(base + "/-/ready")
		if err != nil {
			return false
		}
		resp.Body.Close()
		return resp.StatusCode == http.StatusOK
	}, 30*time.Second, 100*time.Millisecond, "prometheus did not become ready")
	return base
}
