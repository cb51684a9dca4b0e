package store

import (
	"encoding/json"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// recordKinds decode one kind of record each and, when that succeeds,
// write what they read, read that and write it again: both writes must
// be the same bytes (bytes, not values: a NaN read is not equal to
// itself).
var recordKinds = []func(t *testing.T, v []byte){
	stable(func(v []byte) (model.JobRecord, error) { return decodeJob("81234", v) }, func(j model.JobRecord) []byte { return encodeJob(&j) }),
	stable(func(v []byte) (model.Window, error) { return decodeWindow("81234", 3, v) }, func(w model.Window) []byte { return encodeWindow(&w) }),
	stable(func(v []byte) (model.Flag, error) { return decodeFlagRecord(nil, v) }, func(f model.Flag) []byte { return encodeFlagRecord(&f) }),
	stable(func(v []byte) (map[string]model.SeqRecord, error) { return decodeShard(nil, v) }, encodeShard),
	stable(func(v []byte) (model.Silence, error) { return decodeSilence(nil, v) }, func(s model.Silence) []byte { return encodeSilence(&s) }),
	stable(func(v []byte) (model.Ack, error) { return decodeAck(nil, v) }, func(a model.Ack) []byte { return encodeAck(&a) }),
}

func stable[T any](decode func([]byte) (T, error), encode func(T) []byte) func(*testing.T, []byte) {
	return func(t *testing.T, v []byte) {
		x, err := decode(v)
		if err != nil {
			return
		}
		first := encode(x)
		y, err := decode(first)
		require.NoError(t, err, "reading what was written")
		require.Equal(t, first, encode(y))
	}
}

// FuzzRecords feeds every record decoder bytes, the first byte choosing
// the decoder: none may panic or allocate without bound, and what one
// reads must survive being written and read again.
func FuzzRecords(f *testing.F) {
	t0 := time.Date(2026, 3, 2, 14, 0, 0, 0, time.UTC)
	flag := model.Flag{ID: "81234-1", Job: "81234", Reason: model.PatternOf("metadata_storm"), Pattern: "metadata_storm", Title: "Metadata storm",
		Drivers: []model.Driver{{Metric: metric.Creates, Rate: 2500, Level: coding.Critical, Grade: 6}}, Raised: t0}
	job := model.JobRecord{Meta: model.JobMeta{Nodes: []string{"bw007"}, Start: t0}, Closed: 3,
		Streaks: map[model.Reason]model.StreakRecord{flag.Reason: {Above: 2, Flag: &flag}}}
	seeds := [][]byte{
		encodeJob(&job),
		encodeWindow(&model.Window{Start: t0, End: t0.Add(time.Minute), Nodes: 4}),
		encodeFlagRecord(&flag),
		encodeShard(map[string]model.SeqRecord{"bw007": {High: 90, Span: 4096, Applied: []model.SeqRange{{First: 80, Last: 90}, {First: 1, Last: 78}}}}),
		encodeSilence(&model.Silence{ID: "s1", Job: "81234", Until: t0}),
		encodeAck(&model.Ack{Flag: "81234-1", By: "ops-lena", At: t0}),
	}
	for kind, seed := range seeds {
		f.Add(append([]byte{byte(kind)}, seed...))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) == 0 {
			return
		}
		recordKinds[int(data[0])%len(recordKinds)](t, data[1:])
	})
}

// FuzzSchemaOneRecords feeds the schema-1 converters JSON, the first byte
// choosing the converter: none may panic, and what one writes must be
// read back by the current decoders.
func FuzzSchemaOneRecords(f *testing.F) {
	converters := []func(t *testing.T, v []byte) error{
		func(t *testing.T, v []byte) error {
			k, out, err := convertJob([]byte("81234"), v, &Migration{})
			if err == nil {
				_, err = decodeJob(string(k), out)
				require.NoError(t, err)
			}
			return err
		},
		decodedBy(convertWindow, func(v []byte) error { _, err := decodeWindow("81234", 1, v); return err }),
		decodedBy(convertFlag, func(v []byte) error { _, err := decodeFlagRecord(nil, v); return err }),
		decodedBy(convertSilence, func(v []byte) error { _, err := decodeSilence(nil, v); return err }),
		decodedBy(convertAck, func(v []byte) error { _, err := decodeAck(nil, v); return err }),
		func(t *testing.T, v []byte) error {
			var s seqV1
			if err := json.Unmarshal(v, &s); err != nil || len(s.Bits) > 64 {
				return err
			}
			r := model.SeqRecord{High: s.High, Span: len(s.Bits) * 64, Applied: s.ranges()}
			_, err := decodeShard(nil, encodeShard(map[string]model.SeqRecord{"bw007": r}))
			require.NoError(t, err)
			return nil
		},
	}
	f.Add([]byte("\x00" + `{"meta":{"user":"ambrel"},"hyst":[{},{"above":2}],"patterns":{"metadata_storm":{"above":1}}}`))
	f.Add([]byte("\x01" + `{"start":"2026-03-02T14:00:00Z","nodes":2,"rates":{"creates":2000}}`))
	f.Add([]byte("\x02" + `{"id":"81234/critical:creates/1772460010","job":"81234","reason":"critical:creates"}`))
	f.Add([]byte("\x03" + `{"id":"s1","job":"81234","until":"2026-03-02T14:00:00Z"}`))
	f.Add([]byte("\x04" + `{"flag":"81234/critical:creates/1772460010","by":"ops-lena"}`))
	f.Add([]byte("\x05" + `{"high":70,"bits":[255]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) == 0 {
			return
		}
		_ = converters[int(data[0])%len(converters)](t, data[1:])
	})
}

// decodedBy runs a schema-1 converter and, when it succeeds, requires the
// current decoder to read what it wrote.
func decodedBy(convert func(k, v []byte) ([]byte, []byte, error), decode func([]byte) error) func(*testing.T, []byte) error {
	return func(t *testing.T, v []byte) error {
		_, out, err := convert([]byte("81234\x00\x00\x00\x00\x01"), v)
		if err == nil {
			require.NoError(t, decode(out), "the current decoder reading what conversion wrote from %q", v)
		}
		return err
	}
}
