package options_test

import (
	"flag"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/options"
)

func TestParseFile(t *testing.T) {
	tests := []struct {
		name    string
		input   string
		want    map[string]string
		wantErr string
	}{
		{name: "nested and dotted names flatten alike", input: "interval: 10s\nsource:\n  lustre:\n    root: /proc/fs/lustre/llite\nnats.url: nats://b:4222\n",
			want: map[string]string{"interval": "10s", "source.lustre.root": "/proc/fs/lustre/llite", "nats.url": "nats://b:4222"}},
		{name: "empty file", input: "", want: map[string]string{}},
		{name: "numbers and booleans stay text for the flag to parse", input: "queue.limit: 100\nverbose: true\n", want: map[string]string{"queue.limit": "100", "verbose": "true"}},
		{name: "a list is refused", input: "nodes: [a, b]\n", wantErr: "nodes must be a single value"},
		{name: "a null is refused", input: "interval:\n", wantErr: "interval has no value"},
		{name: "the same name twice", input: "nats.url: a\nnats:\n  url: b\n", wantErr: "nats.url given twice"},
		{name: "not a map", input: "just text\n", wantErr: "expected a map"},
		{name: "broken yaml", input: "a: [\n", wantErr: "options file"},
		{name: "an empty part in a dotted name", input: ".: 00\n", wantErr: `"." is not an option name`},
		{name: "a trailing dot", input: "nats.: x\n", wantErr: `"nats." is not an option name`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := options.ParseFile(strings.NewReader(tt.input))
			if tt.wantErr != "" {
				require.Error(t, err)
				assert.Contains(t, err.Error(), tt.wantErr)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, got)
		})
	}
}

func flags() (*flag.FlagSet, *time.Duration, *string, *int) {
	fs := flag.NewFlagSet("t", flag.ContinueOnError)
	iv := fs.Duration("interval", 5*time.Second, "")
	root := fs.String("source.lustre.root", "/sys/kernel/debug/lustre/llite", "")
	limit := fs.Int("queue.limit", 720, "")
	return fs, iv, root, limit
}

func TestPrecedence(t *testing.T) {
	fs, iv, root, limit := flags()
	require.NoError(t, fs.Parse([]string{"--interval", "2s"}))
	env := map[string]string{"SLUICE_AGENT_SOURCE_LUSTRE_ROOT": "/env/llite", "SLUICE_AGENT_INTERVAL": "9s"}
	lookup := func(k string) (string, bool) { v, ok := env[k]; return v, ok }
	file := map[string]string{"source.lustre.root": "/file/llite", "queue.limit": "99", "interval": "7s"}
	require.NoError(t, options.Apply(fs, "SLUICE_AGENT_", lookup, file))
	assert.Equal(t, 2*time.Second, *iv, "the command line wins")
	assert.Equal(t, "/env/llite", *root, "then the environment")
	assert.Equal(t, 99, *limit, "then the file")
}

func TestApplyErrors(t *testing.T) {
	fs, _, _, _ := flags()
	require.NoError(t, fs.Parse(nil))
	err := options.Apply(fs, "X_", func(string) (string, bool) { return "", false }, map[string]string{"source.lustr.root": "/x"})
	assert.ErrorContains(t, err, `unknown option "source.lustr.root"`)

	fs, _, _, _ = flags()
	require.NoError(t, fs.Parse(nil))
	err = options.Apply(fs, "X_", func(k string) (string, bool) { return "soon", k == "X_INTERVAL" }, nil)
	assert.ErrorContains(t, err, "X_INTERVAL")
}

func TestEnvName(t *testing.T) {
	assert.Equal(t, "SLUICE_AGENT_NATS_URL", options.EnvName("SLUICE_AGENT_", "nats.url"))
	assert.Equal(t, "SLUICE_AGENT_FLAG_RAISE_AFTER", options.EnvName("SLUICE_AGENT_", "flag.raise-after"))
}

func FuzzParseFile(f *testing.F) {
	for _, s := range []string{"interval: 10s\n", "a:\n  b:\n    c: 1\n", "a: [1]\n", "", "&x a: *x\n"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		got, err := options.ParseFile(strings.NewReader(in))
		if err != nil {
			return
		}
		for k := range got {
			if k == "" || strings.HasPrefix(k, ".") {
				t.Fatalf("bad option name %q", k)
			}
		}
	})
}
