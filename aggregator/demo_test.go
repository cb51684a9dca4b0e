package main

import (
	"bytes"
	"context"
	"os/exec"
	"path/filepath"
	"regexp"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// TestDemoFlagsTheMetadataStorm runs the demo as "make demo" does, shortened:
// real agent processes, the embedded broker, a temporary state file. It
// must flag the metadata storm job on creates.
func TestDemoFlagsTheMetadataStorm(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the 52 s demo")
	}
	bin := filepath.Join(t.TempDir(), "agent")
	out, err := exec.Command("go", "build", "-o", bin, "sluice/agent").CombinedOutput()
	require.NoError(t, err, "build the agent: %s", out)

	var stdout, stderr bytes.Buffer
	err = run(context.Background(), []string{"demo", "--agent.bin", bin, "--duration", "52s", "--web.listen", "127.0.0.1:0"}, &stdout, &stderr)
	require.NoError(t, err, "stderr: %s", stderr.String())
	text := stdout.String()
	assert.Regexp(t, regexp.MustCompile(`FLAG\s+job 81234 \(quill-index, user dorvane, 4 nodes\): creates [0-9.]+k/s per node > critical cut 1k/s, since \d\d:\d\d:\d\d`), text)
	assert.Regexp(t, `sluice_job_flag_active\{job_id="81234",name="quill-index",pattern="",reason="high_rate:creates",severity="warning",user="dorvane"\} 1`, text)
	assert.Regexp(t, `sluice_job_flag_active\{job_id="81234",name="quill-index",pattern="metadata_storm",reason="pattern:metadata_storm",severity="critical",`, text)
	assert.NotContains(t, text, "FLAG   job 81230", "the healthy streaming job is not flagged")
	assert.NotContains(t, text, "FLAG   job 81231", "the quiet job is not flagged")
}
