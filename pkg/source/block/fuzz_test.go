package block_test

import (
	"bytes"
	"encoding/binary"
	"io/fs"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/block"
)

// fuzzSeeds returns every diskstats file in testdata/block.
func fuzzSeeds(f *testing.F) [][]byte {
	f.Helper()
	var seeds [][]byte
	err := filepath.WalkDir(fixture.Path(f, "block"), func(path string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() || d.Name() != "diskstats" {
			return err
		}
		b, err := os.ReadFile(path)
		seeds = append(seeds, b)
		return err
	})
	require.NoError(f, err)
	require.NotEmpty(f, seeds)
	return seeds
}

func FuzzParse(f *testing.F) {
	for _, s := range fuzzSeeds(f) {
		f.Add(s)
	}
	f.Add([]byte("8 0 sda 1 2 3 4 5 6 7 8 9 10 11\r\n\n8 0 sda 18446744073709551615 0 0 0 0 0 0 0 0 0 0"))
	f.Add([]byte("8 0 sda 1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16 17 18\n8 4294967296 x 0 0 0 0 0 0 0 0 0 0 0\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		st, err := block.Parse(bytes.NewReader(data))
		require.NoError(t, err, "a bytes.Reader never fails")

		lines := bytes.Count(data, []byte("\n"))
		if len(data) > 0 && data[len(data)-1] != '\n' {
			lines++
		}
		require.LessOrEqual(t, st.Malformed+len(st.Devices), lines)
		for _, d := range st.Devices {
			require.Contains(t, []int{14, 18, 20}, d.Fields)
			require.NotEmpty(t, d.Name)
			require.False(t, bytes.ContainsAny([]byte(d.Name), " \t\r\n\v\f"), "%q", d.Name)
			if d.Fields < 18 {
				require.Zero(t, d.DiscardsCompleted|d.DiscardsMerged|d.SectorsDiscarded|d.DiscardMs)
			}
			if d.Fields < 20 {
				require.Zero(t, d.FlushesCompleted|d.FlushMs)
			}
		}

		// The Source's in-memory parser agrees with Parse.
		buf := block.ParseBuf(data)
		require.Equal(t, st.Malformed, buf.Malformed)
		require.Equal(t, st.Devices, append([]block.Device{}, buf.Devices...))

		// What was parsed prints back, as the kernel would, to the same.
		back, err := block.Parse(bytes.NewReader([]byte(formatAll(st.Devices...))))
		require.NoError(t, err)
		require.Zero(t, back.Malformed)
		require.Equal(t, st.Devices, back.Devices)
	})
}

// FuzzUnwrap feeds one device a sequence of readings built from the input:
// each step is 9 bytes, a flag (bit 0: the device is re-added) and two
// increments below 2^31 for the true read and weighted milliseconds, which
// the "file" shows modulo 2^32. The reported values must be the true ones
// less the multiples of 2^32 before the first reading or the last reset.
func FuzzUnwrap(f *testing.F) {
	f.Add(uint64(4294967000), uint64(1<<33+5), []byte{0, 0xe8, 3, 0, 0, 0x10, 0, 0, 0})
	f.Add(uint64(3000000000), uint64(0), []byte{1, 12, 0, 0, 0, 1, 0, 0, 0, 0, 0xff, 0xff, 0xff, 0x7f, 0xff, 0xff, 0xff, 0x7f})
	f.Add(uint64(1<<32-1), uint64(1<<32-1), bytes.Repeat([]byte{0, 0xff, 0xff, 0xff, 0x7f, 0xff, 0xff, 0xff, 0x7f}, 9))
	f.Fuzz(func(t *testing.T, startRead, startWeighted uint64, steps []byte) {
		const mod = 1 << 32
		read, weighted := startRead%(1<<48), startWeighted%(1<<48)
		baseRead, baseWeighted := read&^(mod-1), weighted&^(mod-1)
		reads := uint64(1)
		var u block.Unwrapper
		for i := 0; ; i++ {
			d := dev(8, 0, "sda", reads, 0, 8*reads, read%mod, 0, 0, 0, 0, 0, reads, weighted%mod)
			got := u.Update(d)
			require.Equal(t, read-baseRead, got["read_ms"], "step %d", i)
			require.Equal(t, weighted-baseWeighted, got["weighted_ms"], "step %d", i)
			require.Equal(t, reads, got["reads"])
			require.Equal(t, 8*reads*512, got["read_bytes"])
			if len(steps) < 9 {
				return
			}
			inc1 := uint64(binary.LittleEndian.Uint32(steps[1:]) % (1 << 31))
			inc2 := uint64(binary.LittleEndian.Uint32(steps[5:]) % (1 << 31))
			if steps[0]&1 != 0 && reads > 0 {
				// Re-added: the counts fall, the times restart.
				reads, read, weighted = 0, inc1, inc2
				baseRead, baseWeighted = 0, 0
			} else {
				reads++
				read += inc1
				weighted += inc2
			}
			steps = steps[9:]
		}
	})
}
