package pattern_test

import (
	"path"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

func TestBuiltin(t *testing.T) {
	lib, err := pattern.Builtin()
	require.NoError(t, err)
	var names []string
	seen := map[string]bool{}
	for _, p := range lib {
		t.Run(p.Name, func(t *testing.T) {
			assert.False(t, seen[p.Name], "name %s used twice", p.Name)
			seen[p.Name] = true
			assert.Equal(t, "builtin/"+p.Name+".yaml", p.Source, "a built-in's file is named after it")
			assert.Contains(t, p.Advice, "policy", "built-in advice defers to site policy")
			assert.Contains(t, p.Advice, "onsider", "built-in advice is worded as a suggestion")
			assert.NotEmpty(t, p.Rationale)
			require.NotNil(t, p.Rule, "built-ins are rules")
			assert.Nil(t, p.Example)
			assert.Equal(t, float64(p.Rule.Hold.K)/float64(p.Rule.Hold.N), p.Threshold)
			d := pattern.Describe(p)
			assert.True(t, strings.HasPrefix(d, p.Name+": "+p.Title+"\n"), d)
			assert.Contains(t, d, "severity:  "+p.Severity.String())
		})
		names = append(names, p.Name)
	}
	assert.Equal(t, []string{
		"fsync_storm", "heavy_streaming", "imbalanced_io", "metadata_storm",
		"open_close_churn", "small_write_flood", "stat_polling", "stat_storm",
	}, names, "sorted by file name")
}

func TestBuiltinSettings(t *testing.T) {
	lib, err := pattern.Builtin()
	require.NoError(t, err)
	by := map[string]*pattern.Pattern{}
	for _, p := range lib {
		by[p.Name] = p
	}
	assert.Equal(t, pattern.Hold{K: 2, N: 3}, by["metadata_storm"].Rule.Hold)
	assert.Len(t, by["metadata_storm"].Rule.Any, 2, "creates or removes")
	assert.Equal(t, pattern.Hold{K: 2, N: 2}, by["stat_polling"].Rule.Hold)
	assert.Equal(t, model.SeverityCritical, by["stat_storm"].Severity)
	assert.Equal(t, 4, by["imbalanced_io"].Rule.MinNodes)
	assert.Equal(t, model.SeverityInfo, by["heavy_streaming"].Severity)
	assert.Contains(t, by["heavy_streaming"].Advice, "No action is usually needed")
	assert.Equal(t, model.SeverityCritical, by["metadata_storm"].Severity)
}

func TestBuiltinIsFresh(t *testing.T) {
	a, err := pattern.Builtin()
	require.NoError(t, err)
	a[0].Name = "changed"
	b, err := pattern.Builtin()
	require.NoError(t, err)
	assert.NotEqual(t, "changed", b[0].Name, "each call parses afresh")
}

func TestMerge(t *testing.T) {
	mk := func(name, src string) *pattern.Pattern { return &pattern.Pattern{Name: name, Source: src} }
	builtin := []*pattern.Pattern{mk("a", "builtin"), mk("b", "builtin"), mk("c", "builtin")}
	site := []*pattern.Pattern{mk("d", "site"), mk("b", "site"), mk("e", "site")}
	got := pattern.Merge(builtin, site)
	var out []string
	for _, p := range got {
		out = append(out, p.Name+"/"+p.Source)
	}
	assert.Equal(t, []string{"a/builtin", "b/site", "c/builtin", "d/site", "e/site"}, out)

	assert.Equal(t, builtin, pattern.Merge(builtin, nil))
	assert.Equal(t, site, pattern.Merge(nil, site))

	twice := pattern.Merge(builtin, []*pattern.Pattern{mk("b", "first"), mk("x", "site"), mk("b", "second")})
	out = out[:0]
	for _, p := range twice {
		out = append(out, p.Name+"/"+p.Source)
	}
	assert.Equal(t, []string{"a/builtin", "b/second", "c/builtin", "x/site"}, out, "the later of two site patterns wins")
}

func TestDescribeExample(t *testing.T) {
	p := loadFixture(t, "checkpoint_burst.yaml")
	d := pattern.Describe(p)
	for _, want := range []string{
		"checkpoint_burst: Checkpoint burst (learned from job 81234)\n",
		"  example:   sellers over 6 windows\n",
		"    write_bytes: 116611\n",
		"  matches:   score >= 0.75; flag after 1 matching window(s), clear after 2\n",
		"  advice:    No action is usually needed; follow your site's policy if the filesystem is saturated during the burst.\n",
	} {
		assert.Contains(t, d, want)
	}
}

func TestDescribeRule(t *testing.T) {
	lib, err := pattern.Builtin()
	require.NoError(t, err)
	var d string
	for _, p := range lib {
		if p.Name == "imbalanced_io" {
			d = pattern.Describe(p)
		}
	}
	for _, want := range []string{
		"  rule:      in at least 2 of the last 3 windows, jobs of 4 or more nodes\n",
		"    all of:  busiest_node_share > 0.8\n",
		"    any of:  read_bytes grade >= 4\n",
		"  matches:   score >= 2/3; flag after 1 matching window(s), clear after 3\n",
	} {
		assert.Contains(t, d, want)
	}
}

// loadFixture parses testdata/patterns/good/<name>.
func loadFixture(t *testing.T, name string) *pattern.Pattern {
	t.Helper()
	ps, err := pattern.LoadDir(path.Join(testdata, "good"))
	require.NoError(t, err)
	for _, p := range ps {
		if strings.HasSuffix(p.Source, name) {
			return p
		}
	}
	t.Fatalf("no fixture %s", name)
	return nil
}
