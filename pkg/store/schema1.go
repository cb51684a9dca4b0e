package store

import (
	"bytes"
	"encoding/json"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// Migration says what opening a file of schema 1 changed.
type Migration struct {
	// Backup is the copy of the file as it was, kept beside it.
	Backup string
	// Records counts the records rewritten, by bucket.
	Records map[string]int
	// Running is the jobs that were running: what their open windows and
	// live window had summed was in their records and is not carried
	// over, so each starts its next window afresh.
	Running int
}

// migrateChunk bounds the records rewritten per transaction: a file of
// months of windows is migrated without holding it all in one.
const migrateChunk = 5000

// migrateSchema1 rewrites a file of schema 1 (JSON records) in the
// binary records of schema 2, after copying it to path+".schema1". It is
// safe to stop at any point: the schema stays "1" until the last step,
// and a record already rewritten (its first byte is a record version, not
// a JSON "{") is passed over when it runs again.
func (s *Store) migrateSchema1() (Migration, error) {
	m := Migration{Backup: s.path + ".schema1", Records: map[string]int{}}
	if err := s.db.View(func(tx *bolt.Tx) error { return tx.CopyFile(m.Backup, 0o600) }); err != nil {
		return m, fmt.Errorf("keep a copy in %s: %w", m.Backup, err)
	}
	steps := []struct {
		bucket  []byte
		convert func(k, v []byte) (key, val []byte, err error)
	}{
		{bucketJobs, func(k, v []byte) ([]byte, []byte, error) { return convertJob(k, v, &m) }},
		{bucketWindows, convertWindow},
		{bucketFlags, convertFlag},
		{bucketSilence, convertSilence},
		{bucketAcks, convertAck},
	}
	for _, st := range steps {
		n, err := s.rewrite(st.bucket, st.convert)
		if err != nil {
			return m, fmt.Errorf("bucket %s: %w", st.bucket, err)
		}
		m.Records[string(st.bucket)] = n
	}
	err := s.update(func(tx *bolt.Tx) error {
		n, err := convertNodes(tx)
		m.Records[string(bucketNodes)] = n
		if err != nil {
			return err
		}
		if err := indexEnded(tx); err != nil {
			return err
		}
		return convertMeta(tx)
	})
	return m, err
}

// rewrite converts a bucket's JSON records chunk by chunk; convert gives
// each record's new key (which may differ) and value.
func (s *Store) rewrite(bucket []byte, convert func(k, v []byte) ([]byte, []byte, error)) (int, error) {
	total := 0
	var after []byte
	for {
		n, last, err := s.rewriteChunk(bucket, after, convert)
		total += n
		if err != nil || last == nil {
			return total, err
		}
		after = last
	}
}

func (s *Store) rewriteChunk(bucket, after []byte, convert func(k, v []byte) ([]byte, []byte, error)) (n int, last []byte, err error) {
	err = s.update(func(tx *bolt.Tx) error {
		b := tx.Bucket(bucket)
		if b == nil {
			return nil
		}
		type kv struct{ k, v []byte }
		var todo []kv
		c := b.Cursor()
		k, v := c.First()
		if after != nil {
			if k, v = c.Seek(after); bytes.Equal(k, after) {
				k, v = c.Next()
			}
		}
		for ; k != nil && len(todo) < migrateChunk; k, v = c.Next() {
			last = bytes.Clone(k)
			if len(v) > 0 && v[0] == '{' {
				todo = append(todo, kv{bytes.Clone(k), bytes.Clone(v)})
			}
		}
		if k == nil {
			last = nil // the bucket is done
		}
		for _, r := range todo {
			nk, nv, err := convert(r.k, r.v)
			if err != nil {
				return err
			}
			if !bytes.Equal(nk, r.k) {
				if err := b.Delete(r.k); err != nil {
					return err
				}
			}
			if err := b.Put(nk, nv); err != nil {
				return err
			}
		}
		n = len(todo)
		return nil
	})
	return n, last, err
}

// jobV1 is a job record of schema 1. Open and Live held the open
// windows' and the live window's sums; they are counted, not carried.
type jobV1 struct {
	Meta        model.JobMeta              `json:"meta"`
	Live        map[string]json.RawMessage `json:"live"`
	Open        map[string]json.RawMessage `json:"open"`
	Closed      int                        `json:"closed"`
	LastSample  time.Time                  `json:"last_sample"`
	Totals      metric.Values              `json:"totals"`
	LiveRates   metric.Rates               `json:"live_rates"`
	LiveLevels  coding.Levels              `json:"live_levels"`
	LiveNodes   int                        `json:"live_nodes"`
	Streaks     map[model.Reason]streakV1  `json:"streaks"`
	FlagsRaised int                        `json:"flags_raised"`
	Finished    bool                       `json:"finished"`
	// Rates and Patterns are how files written before Streaks kept the
	// same state: a high-rate state by its metric's position, a pattern
	// state by the pattern's name.
	Rates    []streakV1          `json:"hyst"`
	Patterns map[string]streakV1 `json:"patterns"`
}

type streakV1 struct {
	Above int         `json:"above"`
	Below int         `json:"below"`
	Since time.Time   `json:"since"`
	Score float64     `json:"score"`
	Flag  *model.Flag `json:"flag"`
}

func convertJob(k, v []byte, m *Migration) ([]byte, []byte, error) {
	var old jobV1
	if err := json.Unmarshal(v, &old); err != nil {
		return nil, nil, fmt.Errorf("job %q: %w", k, err)
	}
	j := model.JobRecord{
		Meta: old.Meta, Closed: old.Closed, LastSample: old.LastSample, Totals: old.Totals,
		LiveRates: old.LiveRates, LiveLevels: old.LiveLevels, LiveNodes: old.LiveNodes,
		Streaks: old.streaks(), FlagsRaised: old.FlagsRaised, Finished: old.Finished,
	}
	j.Meta.ID = string(k)
	if !j.Finished && (len(old.Open) > 0 || len(old.Live) > 0) {
		m.Running++
	}
	return k, encodeJob(&j), nil
}

// streaks gathers the record's raise-and-clear states by reason, folding
// in the older forms; a state with nothing building up and no flag is
// not kept.
func (j *jobV1) streaks() map[model.Reason]model.StreakRecord {
	out := map[model.Reason]model.StreakRecord{}
	add := func(r model.Reason, s streakV1) {
		if s.Above > 0 || s.Flag != nil || s.Below > 0 {
			out[r] = model.StreakRecord{Above: s.Above, Below: s.Below, Since: s.Since, Score: s.Score, Flag: s.Flag}
		}
	}
	for r, s := range j.Streaks {
		add(r, s)
	}
	for i, s := range j.Rates {
		if i < int(metric.Count) {
			add(model.HighRateOf(metric.ID(i)), s)
		}
	}
	for name, s := range j.Patterns {
		add(model.PatternOf(name), s)
	}
	if len(out) == 0 {
		return nil
	}
	return out
}

func convertWindow(k, v []byte) ([]byte, []byte, error) {
	var w model.Window
	if err := json.Unmarshal(v, &w); err != nil {
		return nil, nil, fmt.Errorf("window %q: %w", k, err)
	}
	return k, encodeWindow(&w), nil
}

func convertFlag(k, v []byte) ([]byte, []byte, error) {
	var f model.Flag
	if err := json.Unmarshal(v, &f); err != nil {
		return nil, nil, fmt.Errorf("flag %q: %w", k, err)
	}
	key, err := flagKey(f.ID)
	if err != nil {
		return nil, nil, err
	}
	return key, encodeFlagRecord(&f), nil
}

func convertSilence(k, v []byte) ([]byte, []byte, error) {
	var sl model.Silence
	if err := json.Unmarshal(v, &sl); err != nil {
		return nil, nil, fmt.Errorf("silence %q: %w", k, err)
	}
	return k, encodeSilence(&sl), nil
}

func convertAck(k, v []byte) ([]byte, []byte, error) {
	var a model.Ack
	if err := json.Unmarshal(v, &a); err != nil {
		return nil, nil, fmt.Errorf("acknowledgement %q: %w", k, err)
	}
	key, err := flagKey(a.Flag)
	if err != nil {
		return nil, nil, err
	}
	return key, encodeAck(&a), nil
}

// seqV1 is a node's sequence set of schema 1: the highest applied number
// and a ring bitmap of the span below it, bit q%span for number q.
type seqV1 struct {
	High uint64   `json:"high"`
	Bits []uint64 `json:"bits"`
}

// ranges lists the applied numbers of the span as ranges, highest first.
func (s seqV1) ranges() []model.SeqRange {
	span := uint64(len(s.Bits)) * 64
	var out []model.SeqRange
	for q, n := s.High, uint64(0); n < span; q, n = q-1, n+1 {
		if i := q % span; s.Bits[i/64]&(1<<(i%64)) != 0 {
			if len(out) > 0 && out[len(out)-1].First == q+1 {
				out[len(out)-1].First = q
			} else {
				out = append(out, model.SeqRange{First: q, Last: q})
			}
		}
		if q == 0 {
			break
		}
	}
	return out
}

// convertNodes moves the nodes' sequence sets from one record each
// (JSON, keyed by node) into shards; it is one transaction, so it either
// happened or did not.
func convertNodes(tx *bolt.Tx) (int, error) {
	b := tx.Bucket(bucketNodes)
	if b == nil {
		return 0, nil
	}
	recs := map[string]model.SeqRecord{}
	err := b.ForEach(func(k, v []byte) error {
		if len(v) == 0 || v[0] != '{' {
			return nil
		}
		var old seqV1
		if err := json.Unmarshal(v, &old); err != nil {
			return fmt.Errorf("node %q: %w", k, err)
		}
		recs[string(k)] = model.SeqRecord{High: old.High, Span: len(old.Bits) * 64, Applied: old.ranges()}
		return nil
	})
	if err != nil || len(recs) == 0 {
		return 0, err
	}
	for n := range recs {
		if err := b.Delete([]byte(n)); err != nil {
			return 0, err
		}
	}
	return len(recs), putNodes(tx, recs)
}

// indexEnded lists every finished job in the ended index: those with a
// record by their end, those already forgotten (windows but no record)
// by their last window's end.
func indexEnded(tx *bolt.Tx) error {
	ended, err := tx.CreateBucketIfNotExists(bucketEnded)
	if err != nil {
		return err
	}
	jobs := tx.Bucket(bucketJobs)
	err = jobs.ForEach(func(k, v []byte) error {
		j, err := decodeJob(string(k), v)
		if err != nil || !j.Finished {
			return err
		}
		return ended.Put(endedKey(j.Meta.End, j.Meta.ID), nil)
	})
	if err != nil {
		return err
	}
	lastEnd := map[string]time.Time{}
	c := tx.Bucket(bucketWindows).Cursor()
	for k, v := c.First(); k != nil; k, v = c.Next() {
		if job := string(k[:max(len(k)-9, 0)]); len(k) >= 9 && jobs.Get([]byte(job)) == nil {
			w, err := decodeWindow(job, 0, v)
			if err != nil {
				return err
			}
			lastEnd[job] = w.End
		}
	}
	for job, end := range lastEnd {
		if err := ended.Put(endedKey(end, job), nil); err != nil {
			return err
		}
	}
	return nil
}

// convertMeta rewrites the watermark in binary and, last of all, sets the
// schema.
func convertMeta(tx *bolt.Tx) error {
	meta := tx.Bucket(bucketMeta)
	if v := meta.Get(keyWatermark); len(v) > 0 && v[0] != 0 && v[0] != 1 {
		wm, err := time.Parse(time.RFC3339Nano, string(v))
		if err != nil {
			return fmt.Errorf("watermark %q: %w", v, err)
		}
		e := enc{}
		e.time(wm)
		if err := meta.Put(keyWatermark, e.b); err != nil {
			return err
		}
	}
	return meta.Put(keySchema, []byte(SchemaVersion))
}
