// Package store keeps the aggregator's state in one bbolt file: jobs (with
// their open windows, so a restart resumes mid-window), closed windows,
// flags and each node's applied sequence numbers.
//
// # Basics
//
// [Open] takes the file lock with a timeout, so a second aggregator on the
// same file fails fast with [ErrLocked] instead of hanging. Writes go
// through [Store.Apply], one transaction per [Batch]; the aggregator batches
// a second's worth of changes into one. Records are JSON, keyed as:
//
//	meta     "schema" -> "1", "watermark" -> RFC 3339 time,
//	         "stream_seq" -> the last stream sequence whose changes are saved
//	jobs     job id -> model.JobRecord
//	windows  job id, 0x00, 8-byte big-endian index -> model.Window
//	flags    flag id -> model.Flag
//	nodes    node -> model.SeqRecord
//	signatures job id -> signature.Signature in its binary form
//	baseline origin, "/", YYYY-MM-DD -> baseline.Day in its binary form
//	silences silence id -> model.Silence
//	acks     flag id -> model.Ack
//
// # Caveats
//
// Values returned by the read methods are decoded copies; nothing refers to
// memory bbolt owns after a transaction ends. The schema version is checked
// on open: a file from a newer schema is refused rather than misread.
package store

import (
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"strings"
	"time"

	bolt "go.etcd.io/bbolt"
	bolterr "go.etcd.io/bbolt/errors"

	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/model"
	"sluice/pkg/signature"
)

// SchemaVersion is the layout version this package reads and writes.
const SchemaVersion = "1"

var (
	bucketMeta    = []byte("meta")
	bucketJobs    = []byte("jobs")
	bucketWindows = []byte("windows")
	bucketFlags   = []byte("flags")
	bucketNodes   = []byte("nodes")
	bucketSigs    = []byte("signatures")
	bucketDays    = []byte("baseline")
	bucketSilence = []byte("silences")
	bucketAcks    = []byte("acks")
	allBuckets    = [][]byte{bucketMeta, bucketJobs, bucketWindows, bucketFlags, bucketNodes, bucketSigs, bucketDays, bucketSilence, bucketAcks}
)

// ErrLocked means another process holds the file.
var ErrLocked = errors.New("store file is locked by another process")

// ErrSchema means the file was written with a schema this build cannot read.
var ErrSchema = errors.New("unsupported store schema")

// Options configures Open. Zero values mean defaults.
type Options struct {
	// LockTimeout bounds the wait for the file lock; zero means 1 second.
	LockTimeout time.Duration
	// BeforeApply, if set, is asked before each batch is written; an error
	// fails the write as a full or broken disk would, and nothing of the
	// batch is kept. Tests use it: a disk that fails to order cannot be
	// made on a shared test machine.
	BeforeApply func() error
}

// Store is an open state file.
type Store struct {
	db   *bolt.DB
	path string
	opts Options
}

// Open opens or creates the file at path.
func Open(path string, opts Options) (*Store, error) {
	if opts.LockTimeout == 0 {
		opts.LockTimeout = time.Second
	}
	db, err := bolt.Open(path, 0o600, &bolt.Options{Timeout: opts.LockTimeout})
	if errors.Is(err, bolterr.ErrTimeout) {
		return nil, fmt.Errorf("open %s: %w (waited %s; is another aggregator running on it?)", path, ErrLocked, opts.LockTimeout)
	}
	if err != nil {
		return nil, fmt.Errorf("open %s: %w", path, err)
	}
	s := &Store{db: db, path: path, opts: opts}
	if err := s.init(); err != nil {
		db.Close()
		return nil, err
	}
	return s, nil
}

func (s *Store) init() error {
	return s.db.Update(func(tx *bolt.Tx) error {
		for _, b := range allBuckets {
			if _, err := tx.CreateBucketIfNotExists(b); err != nil {
				return fmt.Errorf("create bucket %s: %w", b, err)
			}
		}
		meta := tx.Bucket(bucketMeta)
		switch v := meta.Get([]byte("schema")); {
		case v == nil:
			return meta.Put([]byte("schema"), []byte(SchemaVersion))
		case string(v) != SchemaVersion:
			return fmt.Errorf("%s: %w %q (this build reads %q)", s.path, ErrSchema, v, SchemaVersion)
		}
		return nil
	})
}

// Close releases the file.
func (s *Store) Close() error { return s.db.Close() }

// Path is the file's path.
func (s *Store) Path() string { return s.path }

// Check runs bbolt's consistency check and returns the first problem.
func (s *Store) Check() error {
	return s.db.View(func(tx *bolt.Tx) error {
		for err := range tx.Check() {
			return err
		}
		return nil
	})
}

// Batch is a set of changes written in one transaction.
type Batch struct {
	Jobs      []model.JobRecord
	GoneJobs  []string
	Windows   []model.Window
	Flags     []model.Flag
	Nodes     map[string]model.SeqRecord
	Watermark time.Time
	// StreamSeq, if not zero, is the last stream sequence whose changes
	// the batch holds: after a crash the aggregator reads on from the next.
	StreamSeq uint64
	// Days are baseline days to write (a nil Day deletes the key).
	Days map[baseline.Key]*baseline.Day
}

// Empty reports whether the batch would write nothing.
func (b *Batch) Empty() bool {
	return len(b.Jobs) == 0 && len(b.GoneJobs) == 0 && len(b.Windows) == 0 && len(b.Flags) == 0 && len(b.Nodes) == 0 && b.Watermark.IsZero() && len(b.Days) == 0 && b.StreamSeq == 0
}

// Apply writes a batch in one transaction.
func (s *Store) Apply(b *Batch) error {
	err := s.db.Update(func(tx *bolt.Tx) error {
		if s.opts.BeforeApply != nil {
			if err := s.opts.BeforeApply(); err != nil {
				return err
			}
		}
		for i := range b.Jobs {
			if err := putJob(tx, &b.Jobs[i]); err != nil {
				return err
			}
		}
		for _, id := range b.GoneJobs {
			if err := tx.Bucket(bucketJobs).Delete([]byte(id)); err != nil {
				return err
			}
		}
		for i := range b.Windows {
			w := &b.Windows[i]
			if err := putJSON(tx.Bucket(bucketWindows), windowKey(w.Job, w.Index), w); err != nil {
				return err
			}
		}
		for i := range b.Flags {
			if err := putJSON(tx.Bucket(bucketFlags), []byte(b.Flags[i].ID), &b.Flags[i]); err != nil {
				return err
			}
		}
		for n, seqs := range b.Nodes {
			if err := putJSON(tx.Bucket(bucketNodes), []byte(n), &seqs); err != nil {
				return err
			}
		}
		if err := putDays(tx, b.Days); err != nil {
			return err
		}
		if b.StreamSeq > 0 {
			if err := tx.Bucket(bucketMeta).Put([]byte("stream_seq"), binary.BigEndian.AppendUint64(nil, b.StreamSeq)); err != nil {
				return err
			}
		}
		if !b.Watermark.IsZero() {
			return tx.Bucket(bucketMeta).Put([]byte("watermark"), []byte(b.Watermark.UTC().Format(time.RFC3339Nano)))
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("store %s: apply batch: %w", s.path, err)
	}
	return nil
}

func dayKey(k baseline.Key) []byte { return []byte(string(k.Origin) + "/" + k.Day.String()) }

func putDays(tx *bolt.Tx, days map[baseline.Key]*baseline.Day) error {
	bk := tx.Bucket(bucketDays)
	for k, d := range days {
		if d == nil {
			if err := bk.Delete(dayKey(k)); err != nil {
				return err
			}
			continue
		}
		data, err := d.MarshalBinary()
		if err != nil {
			return fmt.Errorf("encode baseline day %s: %w", dayKey(k), err)
		}
		if err := bk.Put(dayKey(k), data); err != nil {
			return err
		}
	}
	return nil
}

// Days loads every stored baseline day.
func (s *Store) Days() (map[baseline.Key]*baseline.Day, error) {
	out := map[baseline.Key]*baseline.Day{}
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketDays).ForEach(func(k, v []byte) error {
			origin, day, ok := strings.Cut(string(k), "/")
			dk, err := baseline.ParseDayKey(day)
			if !ok || err != nil {
				return fmt.Errorf("baseline key %q: want origin/YYYY-MM-DD", k)
			}
			d := baseline.NewDay()
			if err := d.UnmarshalBinary(v); err != nil {
				return fmt.Errorf("baseline day %q: %w", k, err)
			}
			out[baseline.Key{Origin: baseline.Origin(origin), Day: dk}] = d
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("store %s: %w", s.path, err)
	}
	return out, nil
}

// putJob writes a job's record and, apart, its signature. Signatures of
// forgotten jobs stay, like their windows.
func putJob(tx *bolt.Tx, j *model.JobRecord) error {
	key := []byte(j.Meta.ID)
	if err := putJSON(tx.Bucket(bucketJobs), key, j); err != nil {
		return err
	}
	if j.Signature == nil {
		return nil
	}
	return tx.Bucket(bucketSigs).Put(key, j.Signature)
}

func putJSON(b *bolt.Bucket, key []byte, v any) error {
	data, err := json.Marshal(v)
	if err != nil {
		return fmt.Errorf("encode record %q: %w", key, err)
	}
	return b.Put(key, data)
}

func windowKey(job string, idx int) []byte {
	k := make([]byte, 0, len(job)+9)
	k = append(k, job...)
	k = append(k, 0)
	return binary.BigEndian.AppendUint64(k, uint64(idx))
}

// State is everything a restarting aggregator loads.
type State struct {
	Jobs      []model.JobRecord
	Nodes     map[string]model.SeqRecord
	Watermark time.Time
	// StreamSeq is the last stream sequence whose changes are saved; 0
	// when none is.
	StreamSeq uint64
}

// Load reads the jobs, node sequence sets, watermark and stream position.
func (s *Store) Load() (State, error) {
	st := State{Nodes: map[string]model.SeqRecord{}}
	err := s.db.View(func(tx *bolt.Tx) error {
		err := tx.Bucket(bucketJobs).ForEach(func(k, v []byte) error {
			var j model.JobRecord
			if err := json.Unmarshal(v, &j); err != nil {
				return fmt.Errorf("job %q: %w", k, err)
			}
			j.Upgrade()
			if err := loadSignature(tx, &j); err != nil {
				return err
			}
			st.Jobs = append(st.Jobs, j)
			return nil
		})
		if err != nil {
			return err
		}
		err = tx.Bucket(bucketNodes).ForEach(func(k, v []byte) error {
			var n model.SeqRecord
			if err := json.Unmarshal(v, &n); err != nil {
				return fmt.Errorf("node %q: %w", k, err)
			}
			st.Nodes[string(k)] = n
			return nil
		})
		if err != nil {
			return err
		}
		if v := tx.Bucket(bucketMeta).Get([]byte("watermark")); v != nil {
			wm, err := time.Parse(time.RFC3339Nano, string(v))
			if err != nil {
				return fmt.Errorf("watermark %q: %w", v, err)
			}
			st.Watermark = wm
		}
		if v := tx.Bucket(bucketMeta).Get([]byte("stream_seq")); len(v) == 8 {
			st.StreamSeq = binary.BigEndian.Uint64(v)
		}
		return nil
	})
	if err != nil {
		return State{}, fmt.Errorf("store %s: load: %w", s.path, err)
	}
	return st, nil
}

// loadSignature reads a job's signature, or rebuilds it from the job's
// stored windows when the file has none (written before signatures were
// kept): both give the same signature.
func loadSignature(tx *bolt.Tx, j *model.JobRecord) error {
	if b := tx.Bucket(bucketSigs).Get([]byte(j.Meta.ID)); b != nil {
		var sig signature.Signature
		if err := sig.UnmarshalBinary(b); err != nil {
			return fmt.Errorf("signature of job %q: %w", j.Meta.ID, err)
		}
		j.Signature = slices.Clone(b)
		return nil
	}
	ws, err := windowsOf(tx, j.Meta.ID)
	if err != nil {
		return err
	}
	sig := signature.Build(gradesOf(ws))
	j.Signature, _ = sig.MarshalBinary() // cannot fail
	return nil
}

func gradesOf(ws []model.Window) []coding.Grades {
	gs := make([]coding.Grades, len(ws))
	for i, w := range ws {
		gs[i] = w.Grades
	}
	return gs
}

// Signature rebuilds a job's signature from its stored windows.
func (s *Store) Signature(job string) (signature.Signature, error) {
	ws, err := s.Windows(job)
	if err != nil {
		return signature.Signature{}, err
	}
	return signature.Build(gradesOf(ws)), nil
}

// Windows returns a job's closed windows in index order.
func (s *Store) Windows(job string) ([]model.Window, error) {
	var ws []model.Window
	err := s.db.View(func(tx *bolt.Tx) error {
		var err error
		ws, err = windowsOf(tx, job)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("store %s: windows of %s: %w", s.path, job, err)
	}
	return ws, nil
}

func windowsOf(tx *bolt.Tx, job string) ([]model.Window, error) {
	var ws []model.Window
	prefix := append([]byte(job), 0)
	c := tx.Bucket(bucketWindows).Cursor()
	for k, v := c.Seek(prefix); k != nil && len(k) == len(prefix)+8 && string(k[:len(prefix)]) == string(prefix); k, v = c.Next() {
		var w model.Window
		if err := json.Unmarshal(v, &w); err != nil {
			return nil, fmt.Errorf("window %q: %w", k, err)
		}
		ws = append(ws, w)
	}
	return ws, nil
}

// Flags returns every stored flag, active and cleared, for every job,
// ordered by id.
func (s *Store) Flags() ([]model.Flag, error) {
	var fs []model.Flag
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketFlags).ForEach(func(k, v []byte) error {
			var f model.Flag
			if err := json.Unmarshal(v, &f); err != nil {
				return fmt.Errorf("flag %q: %w", k, err)
			}
			fs = append(fs, f)
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("store %s: flags: %w", s.path, err)
	}
	return fs, nil
}

// PutSilence stores a silence.
func (s *Store) PutSilence(sl model.Silence) error {
	err := s.db.Update(func(tx *bolt.Tx) error { return putJSON(tx.Bucket(bucketSilence), []byte(sl.ID), &sl) })
	if err != nil {
		return fmt.Errorf("store %s: silence: %w", s.path, err)
	}
	return nil
}

// DeleteSilence removes a silence; a missing one is not an error.
func (s *Store) DeleteSilence(id string) error {
	err := s.db.Update(func(tx *bolt.Tx) error { return tx.Bucket(bucketSilence).Delete([]byte(id)) })
	if err != nil {
		return fmt.Errorf("store %s: silence: %w", s.path, err)
	}
	return nil
}

// Silences returns every stored silence, expired ones included.
func (s *Store) Silences() ([]model.Silence, error) {
	var out []model.Silence
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketSilence).ForEach(func(k, v []byte) error {
			var sl model.Silence
			if err := json.Unmarshal(v, &sl); err != nil {
				return fmt.Errorf("silence %q: %w", k, err)
			}
			out = append(out, sl)
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("store %s: %w", s.path, err)
	}
	return out, nil
}

// HasFlag reports whether a flag with this id was ever stored.
func (s *Store) HasFlag(id string) (bool, error) {
	var found bool
	err := s.db.View(func(tx *bolt.Tx) error {
		found = tx.Bucket(bucketFlags).Get([]byte(id)) != nil
		return nil
	})
	if err != nil {
		return false, fmt.Errorf("store %s: %w", s.path, err)
	}
	return found, nil
}

// PutAck stores an acknowledgement.
func (s *Store) PutAck(a model.Ack) error {
	err := s.db.Update(func(tx *bolt.Tx) error { return putJSON(tx.Bucket(bucketAcks), []byte(a.Flag), &a) })
	if err != nil {
		return fmt.Errorf("store %s: ack: %w", s.path, err)
	}
	return nil
}

// Acks returns every stored acknowledgement, by flag id.
func (s *Store) Acks() (map[string]model.Ack, error) {
	out := map[string]model.Ack{}
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketAcks).ForEach(func(k, v []byte) error {
			var a model.Ack
			if err := json.Unmarshal(v, &a); err != nil {
				return fmt.Errorf("ack %q: %w", k, err)
			}
			out[string(k)] = a
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("store %s: %w", s.path, err)
	}
	return out, nil
}
