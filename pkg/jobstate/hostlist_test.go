package jobstate_test

import (
	"bufio"
	"errors"
	"fmt"
	"os"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/jobstate"
)

func TestExpandHosts(t *testing.T) {
	// The compact syntax is common practice (batch scheduler host lists),
	// not a formal standard. The expected lists are what Slurm's
	// "scontrol show hostnames" prints for the same input (from memory):
	// numbers keep the width written, several brackets multiply with the
	// rightmost varying fastest.
	tests := []struct {
		name    string
		input   string
		want    []string
		wantErr string
	}{
		{name: "doc example", input: "cn[001-003,010],login1", want: []string{"cn001", "cn002", "cn003", "cn010", "login1"}},
		{name: "empty list", input: "", want: nil},
		{name: "only commas and space", input: " , ,", want: nil},
		{name: "one plain name", input: "cn17", want: []string{"cn17"}},
		{name: "plain names with spaces around commas", input: "a, b ,c", want: []string{"a", "b", "c"}},
		{name: "empty items are skipped", input: "a,,b,", want: []string{"a", "b"}},
		{name: "duplicates are kept", input: "a,a", want: []string{"a", "a"}},
		{name: "unpadded range crosses a digit boundary", input: "cn[8-11]", want: []string{"cn8", "cn9", "cn10", "cn11"}},
		{name: "padded range keeps the width", input: "cn[08-11]", want: []string{"cn08", "cn09", "cn10", "cn11"}},
		{name: "padded range overflowing the width", input: "cn[098-101]", want: []string{"cn098", "cn099", "cn100", "cn101"}},
		{name: "single number", input: "cn[5]", want: []string{"cn5"}},
		{name: "zero", input: "cn[0]", want: []string{"cn0"}},
		{name: "suffix after the bracket", input: "cn[1-2]-ib", want: []string{"cn1-ib", "cn2-ib"}},
		{name: "only a bracket", input: "[1-3]", want: []string{"1", "2", "3"}},
		{name: "two brackets multiply", input: "r[1-2]n[01-02]", want: []string{"r1n01", "r1n02", "r2n01", "r2n02"}},
		{name: "bracket lists and ranges mixed", input: "cn[1,3-4,9]", want: []string{"cn1", "cn3", "cn4", "cn9"}},
		{name: "order is as written", input: "cn[3,1],a", want: []string{"cn3", "cn1", "a"}},
		{name: "largest 32-bit number", input: "n[4294967295]", want: []string{"n4294967295"}},

		{name: "unclosed bracket", input: "cn[1-3", wantErr: "unclosed bracket"},
		{name: "stray closing bracket", input: "cn1-3]", wantErr: "stray"},
		{name: "stray closing bracket after a bracket", input: "cn[1]]x", wantErr: "stray"},
		{name: "stray bracket before a bracket", input: "a]b[1]", wantErr: "stray"},
		{name: "reversed range", input: "cn[3-1]", wantErr: "bad range"},
		{name: "letters in a range", input: "cn[a-b]", wantErr: "bad range"},
		{name: "empty bracket", input: "cn[]", wantErr: "bad range"},
		{name: "empty range in a list", input: "cn[1,,2]", wantErr: "bad range"},
		{name: "two dashes", input: "cn[1-2-3]", wantErr: "bad range"},
		{name: "negative number", input: "cn[-1]", wantErr: "bad range"},
		{name: "open-ended range", input: "cn[1-]", wantErr: "bad range"},
		{name: "nested bracket", input: "cn[[1]]", wantErr: "stray"},
		{name: "space inside a bracket", input: "cn[1, 2]", wantErr: "bad range"},
		{name: "space inside a name", input: "cn 1", wantErr: "stray character"},
		{name: "tab inside a name", input: "cn\t1", wantErr: "stray character"},
		{name: "space after a bracket", input: "cn[1] x", wantErr: "stray character"},
		{name: "above 32 bits", input: "cn[4294967296]", wantErr: "bad range"},
		{name: "one range too large", input: "cn[0-100000]", wantErr: "more than 100000"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := jobstate.ExpandHosts(tt.input)
			if tt.wantErr != "" {
				require.Error(t, err)
				assert.ErrorIs(t, err, jobstate.ErrHostList)
				assert.Contains(t, err.Error(), tt.wantErr)
				assert.Contains(t, err.Error(), fmt.Sprintf("%q", tt.input), "the error quotes the list")
				assert.Nil(t, got)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, got)
		})
	}
}

func TestExpandHostsMaxHosts(t *testing.T) {
	require.Equal(t, 100000, jobstate.MaxHosts)
	tests := []struct {
		name    string
		input   string
		want    [2]string // first and last name; the count must be MaxHosts
		wantErr bool
	}{
		{name: "one range of exactly MaxHosts", input: "cn[0-99999]", want: [2]string{"cn0", "cn99999"}},
		{name: "a product of exactly MaxHosts", input: "a[0-9]b[000-999]c[0-9]", want: [2]string{"a0b000c0", "a9b999c9"}},
		{name: "a product above MaxHosts", input: "a[0-10]b[0-9999]", wantErr: true},
		{name: "ranges in one bracket above MaxHosts", input: "a[0-99999,100000]", wantErr: true},
		{name: "items together above MaxHosts", input: "a[0-59999],b[0-39999],c[1]", wantErr: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := jobstate.ExpandHosts(tt.input)
			if tt.wantErr {
				require.Error(t, err)
				assert.ErrorIs(t, err, jobstate.ErrHostList)
				assert.Contains(t, err.Error(), "more than 100000")
				return
			}
			require.NoError(t, err)
			require.Len(t, got, jobstate.MaxHosts)
			assert.Equal(t, tt.want, [2]string{got[0], got[len(got)-1]})
		})
	}
}

func TestExpandHostsPlainNamesCountTowardMaxHosts(t *testing.T) {
	got, err := jobstate.ExpandHosts("cn[0-99999],login1")
	require.Error(t, err, "got %d names", len(got))
	assert.ErrorIs(t, err, jobstate.ErrHostList)
}

func TestExpandHostsWhitespaceBeforeBracket(t *testing.T) {
	for _, input := range []string{"c n[1]", "c\tn[1]", "a[1]b c[2]"} {
		got, err := jobstate.ExpandHosts(input)
		assert.Error(t, err, "%q expanded to %q", input, got)
	}
}

// hostListSeeds reads testdata/jobstate/hostlists.txt.
func hostListSeeds(f *testing.F) []string {
	f.Helper()
	file, err := os.Open(fixture.Path(f, "jobstate", "hostlists.txt"))
	require.NoError(f, err)
	defer file.Close()
	var seeds []string
	sc := bufio.NewScanner(file)
	for sc.Scan() {
		if line := sc.Text(); line != "" && !strings.HasPrefix(line, "#") {
			seeds = append(seeds, line)
		}
	}
	require.NoError(f, sc.Err())
	require.NotEmpty(f, seeds)
	return seeds
}

func FuzzExpandHosts(f *testing.F) {
	for _, s := range hostListSeeds(f) {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, list string) {
		names, err := jobstate.ExpandHosts(list)
		if err != nil {
			require.True(t, errors.Is(err, jobstate.ErrHostList), "%v", err)
			require.Nil(t, names)
			return
		}
		require.LessOrEqual(t, len(names), jobstate.MaxHosts)
		for _, n := range names {
			require.NotEmpty(t, n)
			require.False(t, strings.ContainsAny(n, ",[]"), "%q", n)
		}
		again, err := jobstate.ExpandHosts(strings.Join(names, ","))
		require.NoError(t, err, "re-expanding %q", names)
		require.Equal(t, names, again)
	})
}
