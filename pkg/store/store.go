// Package store keeps the aggregator's state in one bbolt file: jobs,
// closed windows, flags, each node's applied sequence numbers, the
// baseline's days, silences and acknowledgements.
//
// # Basics
//
// [Open] takes the file lock with a timeout, so a second aggregator on the
// same file fails fast with [ErrLocked] instead of hanging. Writes go
// through [Store.Apply], one transaction per [Batch]; the aggregator batches
// a second's worth of changes into one. Each record is binary, led by its
// record version (records.go); a batch writes only what changed: a job's
// small record, a window once when it closes, the node shards that
// changed. Keys:
//
//	meta       "schema" -> "2", "watermark" -> time,
//	           "stream_seq" -> the last stream sequence whose changes are saved,
//	           "replay_from" -> where the stream is read again from after a
//	           restart, to sum the open windows again
//	jobs       job id -> model.JobRecord
//	windows    job id, 0x00, 8-byte big-endian index -> model.Window
//	flags      job id, 0x00, 4-byte big-endian number -> model.Flag
//	nodes      2-byte shard -> the sequence sets of the nodes hashed to it
//	signatures job id -> signature.Signature in its binary form
//	baseline   origin, "/", YYYY-MM-DD -> baseline.Day in its binary form
//	silences   silence id -> model.Silence
//	acks       job id, 0x00, 4-byte number (the flag's) -> model.Ack
//	ended      8-byte big-endian end (Unix ns), job id -> nothing: the
//	           finished jobs, oldest first, for [Store.Prune]
//
// # Caveats
//
// Values returned by the read methods are decoded copies; nothing refers to
// memory bbolt owns after a transaction ends. A file of schema 1 (JSON
// records) is migrated on open, after a copy of it is kept beside it; a
// file of a newer schema is refused rather than misread.
package store

import (
	"encoding/binary"
	"errors"
	"fmt"
	"strings"
	"sync/atomic"
	"time"

	bolt "go.etcd.io/bbolt"
	bolterr "go.etcd.io/bbolt/errors"

	"sluice/pkg/baseline"
	"sluice/pkg/model"
)

// SchemaVersion is the layout version this package reads and writes.
const SchemaVersion = "2"

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
	bucketEnded   = []byte("ended")
	allBuckets    = [][]byte{bucketMeta, bucketJobs, bucketWindows, bucketFlags, bucketNodes, bucketSigs, bucketDays, bucketSilence, bucketAcks, bucketEnded}

	keySchema     = []byte("schema")
	keyWatermark  = []byte("watermark")
	keyStreamSeq  = []byte("stream_seq")
	keyReplayFrom = []byte("replay_from")
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
	db       *bolt.DB
	path     string
	opts     Options
	commits  atomic.Int64
	migrated *Migration
}

// Open opens or creates the file at path, migrating a file of schema 1.
func Open(path string, opts Options) (*Store, error) {
	if opts.LockTimeout == 0 {
		opts.LockTimeout = time.Second
	}
	// The freelist is not written with each commit but rebuilt on open:
	// with a commit every second it would be a page or more each time.
	db, err := bolt.Open(path, 0o600, &bolt.Options{Timeout: opts.LockTimeout, NoFreelistSync: true, FreelistType: bolt.FreelistMapType})
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
	var schema string
	err := s.db.View(func(tx *bolt.Tx) error {
		if meta := tx.Bucket(bucketMeta); meta != nil {
			schema = string(meta.Get(keySchema))
		}
		return nil
	})
	switch {
	case err != nil:
		return fmt.Errorf("%s: %w", s.path, err)
	case schema == "1":
		m, err := s.migrateSchema1()
		if err != nil {
			return fmt.Errorf("%s: migrate from schema 1: %w", s.path, err)
		}
		s.migrated = &m
	case schema != "" && schema != SchemaVersion:
		return fmt.Errorf("%s: %w %q (this build reads %q and migrates \"1\")", s.path, ErrSchema, schema, SchemaVersion)
	}
	return s.db.Update(func(tx *bolt.Tx) error {
		for _, b := range allBuckets {
			if _, err := tx.CreateBucketIfNotExists(b); err != nil {
				return fmt.Errorf("create bucket %s: %w", b, err)
			}
		}
		return tx.Bucket(bucketMeta).Put(keySchema, []byte(SchemaVersion))
	})
}

// Migrated says what opening the file migrated, or nil if nothing.
func (s *Store) Migrated() *Migration { return s.migrated }

// Close releases the file.
func (s *Store) Close() error { return s.db.Close() }

// Path is the file's path.
func (s *Store) Path() string { return s.path }

// Written is the bytes the store has written to the file since it was
// opened: the pages its transactions allocated and one meta page per
// commit. The operating system may write less (pages written twice in a
// flush interval) or more (its own metadata).
func (s *Store) Written() int64 {
	st := s.db.Stats()
	return st.TxStats.GetPageAlloc() + s.commits.Load()*int64(s.db.Info().PageSize)
}

// Check runs bbolt's consistency check and returns the first problem.
func (s *Store) Check() error {
	return s.db.View(func(tx *bolt.Tx) error {
		for err := range tx.Check() {
			return err
		}
		return nil
	})
}

// update runs fn in a write transaction and counts the commit.
func (s *Store) update(fn func(*bolt.Tx) error) error {
	if err := s.db.Update(fn); err != nil {
		return err
	}
	s.commits.Add(1)
	return nil
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
	// ReplayFrom, written with StreamSeq, is the first stream sequence of
	// the samples the open windows and live windows have summed: a
	// restarted aggregator reads the stream again from there to sum them
	// again. Zero: nothing to read again.
	ReplayFrom uint64
	// Days are baseline days to write (a nil Day deletes the key).
	Days map[baseline.Key]*baseline.Day
}

// Empty reports whether the batch would write nothing.
func (b *Batch) Empty() bool {
	return len(b.Jobs) == 0 && len(b.GoneJobs) == 0 && len(b.Windows) == 0 && len(b.Flags) == 0 && len(b.Nodes) == 0 && b.Watermark.IsZero() && len(b.Days) == 0 && b.StreamSeq == 0
}

// Apply writes a batch in one transaction.
func (s *Store) Apply(b *Batch) error {
	err := s.update(func(tx *bolt.Tx) error {
		if s.opts.BeforeApply != nil {
			if err := s.opts.BeforeApply(); err != nil {
				return err
			}
		}
		for _, put := range []func(*bolt.Tx, *Batch) error{putJobs, putWindows, putFlags, putBatchNodes, putBatchDays, putMeta} {
			if err := put(tx, b); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("store %s: apply batch: %w", s.path, err)
	}
	return nil
}

func putJobs(tx *bolt.Tx, b *Batch) error {
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
	return nil
}

// putJob writes a job's record, its signature apart when it changed, and
// a finished job's place in the ended index. Signatures of forgotten jobs
// stay, like their windows, until Prune.
func putJob(tx *bolt.Tx, j *model.JobRecord) error {
	id := j.Meta.ID
	if err := tx.Bucket(bucketJobs).Put([]byte(id), encodeJob(j)); err != nil {
		return fmt.Errorf("put job %q: %w", id, err)
	}
	if j.Signature != nil {
		if err := tx.Bucket(bucketSigs).Put([]byte(id), j.Signature); err != nil {
			return fmt.Errorf("put signature of %q: %w", id, err)
		}
	}
	if j.Finished {
		return tx.Bucket(bucketEnded).Put(endedKey(j.Meta.End, id), nil)
	}
	return nil
}

func putWindows(tx *bolt.Tx, b *Batch) error {
	for i := range b.Windows {
		w := &b.Windows[i]
		if err := tx.Bucket(bucketWindows).Put(windowKey(w.Job, w.Index), encodeWindow(w)); err != nil {
			return fmt.Errorf("put window %d of %q: %w", w.Index, w.Job, err)
		}
	}
	return nil
}

func putFlags(tx *bolt.Tx, b *Batch) error {
	for i := range b.Flags {
		f := &b.Flags[i]
		key, err := flagKey(f.ID)
		if err != nil {
			return err
		}
		if err := tx.Bucket(bucketFlags).Put(key, encodeFlagRecord(f)); err != nil {
			return fmt.Errorf("put flag %s: %w", f.ID, err)
		}
	}
	return nil
}

func putBatchNodes(tx *bolt.Tx, b *Batch) error { return putNodes(tx, b.Nodes) }
func putBatchDays(tx *bolt.Tx, b *Batch) error  { return putDays(tx, b.Days) }

func putMeta(tx *bolt.Tx, b *Batch) error {
	meta := tx.Bucket(bucketMeta)
	if b.StreamSeq > 0 {
		if err := meta.Put(keyStreamSeq, binary.BigEndian.AppendUint64(nil, b.StreamSeq)); err != nil {
			return err
		}
		if err := meta.Put(keyReplayFrom, binary.BigEndian.AppendUint64(nil, b.ReplayFrom)); err != nil {
			return err
		}
	}
	if b.Watermark.IsZero() {
		return nil
	}
	e := enc{}
	e.time(b.Watermark)
	return meta.Put(keyWatermark, e.b)
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
