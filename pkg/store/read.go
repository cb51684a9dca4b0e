package store

import (
	"encoding/binary"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	bolt "go.etcd.io/bbolt"

	"sluice/pkg/coding"
	"sluice/pkg/model"
	"sluice/pkg/signature"
)

// State is everything a restarting aggregator loads.
type State struct {
	Jobs      []model.JobRecord
	Nodes     map[string]model.SeqRecord
	Watermark time.Time
	// StreamSeq is the last stream sequence whose changes are saved; 0
	// when none is.
	StreamSeq uint64
	// ReplayFrom is where to read the stream again from to sum the open
	// windows again; 0 when there is nothing to read again.
	ReplayFrom uint64
}

// Load reads the jobs (each with its signature and last window), node
// sequence sets, watermark and stream positions.
func (s *Store) Load() (State, error) {
	var st State
	err := s.db.View(func(tx *bolt.Tx) error {
		var err error
		if st.Jobs, err = loadJobs(tx); err != nil {
			return err
		}
		if st.Nodes, err = loadNodes(tx); err != nil {
			return err
		}
		meta := tx.Bucket(bucketMeta)
		if v := meta.Get(keyWatermark); v != nil {
			d := dec{b: v}
			st.Watermark = d.time("watermark")
			if err := d.end(); err != nil {
				return fmt.Errorf("watermark: %w", err)
			}
		}
		st.StreamSeq, st.ReplayFrom = uint64At(meta, keyStreamSeq), uint64At(meta, keyReplayFrom)
		return nil
	})
	if err != nil {
		return State{}, fmt.Errorf("store %s: load: %w", s.path, err)
	}
	return st, nil
}

func uint64At(b *bolt.Bucket, key []byte) uint64 {
	if v := b.Get(key); len(v) == 8 {
		return binary.BigEndian.Uint64(v)
	}
	return 0
}

func loadJobs(tx *bolt.Tx) ([]model.JobRecord, error) {
	var jobs []model.JobRecord
	err := tx.Bucket(bucketJobs).ForEach(func(k, v []byte) error {
		j, err := decodeJob(string(k), v)
		if err != nil {
			return err
		}
		ws, err := windowsOf(tx, j.Meta.ID)
		if err != nil {
			return err
		}
		if len(ws) > 0 {
			j.LastWindow = &ws[len(ws)-1]
		}
		if j.Signature, err = signatureOf(tx, j.Meta.ID, ws); err != nil {
			return err
		}
		jobs = append(jobs, j)
		return nil
	})
	return jobs, err
}

// signatureOf reads a job's signature, or builds it from the job's
// windows when none is stored: both give the same signature.
func signatureOf(tx *bolt.Tx, job string, ws []model.Window) ([]byte, error) {
	if b := tx.Bucket(bucketSigs).Get([]byte(job)); b != nil {
		var sig signature.Signature
		if err := sig.UnmarshalBinary(b); err != nil {
			return nil, fmt.Errorf("signature of job %q: %w", job, err)
		}
		return slices.Clone(b), nil
	}
	sig := signature.Build(gradesOf(ws))
	return sig.MarshalBinary()
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
	prefix := jobPrefix(job)
	c := tx.Bucket(bucketWindows).Cursor()
	for k, v := c.Seek(prefix); hasPrefix(k, prefix, 8); k, v = c.Next() {
		w, err := decodeWindow(job, int(binary.BigEndian.Uint64(k[len(prefix):])), v)
		if err != nil {
			return nil, err
		}
		ws = append(ws, w)
	}
	return ws, nil
}

// Flags returns every stored flag, active and cleared, for every job,
// ordered by job and then by the flag's number.
func (s *Store) Flags() ([]model.Flag, error) {
	var fs []model.Flag
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketFlags).ForEach(func(k, v []byte) error {
			f, err := decodeFlagRecord(k, v)
			fs = append(fs, f)
			return err
		})
	})
	if err != nil {
		return nil, fmt.Errorf("store %s: flags: %w", s.path, err)
	}
	return fs, nil
}

// HasFlag reports whether a flag with this id was ever stored (and not
// yet pruned).
func (s *Store) HasFlag(id string) (bool, error) {
	key, err := flagKey(id)
	if err != nil {
		return false, nil // not an id a flag can have
	}
	var found bool
	err = s.db.View(func(tx *bolt.Tx) error {
		found = tx.Bucket(bucketFlags).Get(key) != nil
		return nil
	})
	if err != nil {
		return false, fmt.Errorf("store %s: %w", s.path, err)
	}
	return found, nil
}

// PutSilence stores a silence.
func (s *Store) PutSilence(sl model.Silence) error {
	err := s.update(func(tx *bolt.Tx) error { return tx.Bucket(bucketSilence).Put([]byte(sl.ID), encodeSilence(&sl)) })
	if err != nil {
		return fmt.Errorf("store %s: silence: %w", s.path, err)
	}
	return nil
}

// DeleteSilence removes a silence; a missing one is not an error.
func (s *Store) DeleteSilence(id string) error {
	err := s.update(func(tx *bolt.Tx) error { return tx.Bucket(bucketSilence).Delete([]byte(id)) })
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
			sl, err := decodeSilence(k, v)
			out = append(out, sl)
			return err
		})
	})
	if err != nil {
		return nil, fmt.Errorf("store %s: %w", s.path, err)
	}
	return out, nil
}

// PutAck stores an acknowledgement of a flag.
func (s *Store) PutAck(a model.Ack) error {
	key, err := flagKey(a.Flag)
	if err != nil {
		return fmt.Errorf("store %s: ack: %w", s.path, err)
	}
	err = s.update(func(tx *bolt.Tx) error { return tx.Bucket(bucketAcks).Put(key, encodeAck(&a)) })
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
			a, err := decodeAck(k, v)
			out[a.Flag] = a
			return err
		})
	})
	if err != nil {
		return nil, fmt.Errorf("store %s: %w", s.path, err)
	}
	return out, nil
}

// jobPrefix is the start of every key of a job's windows, flags and
// acknowledgements. Each such key is the prefix and a fixed number of
// bytes, so checking the length as well (hasPrefix) keeps one job's keys
// apart from another's, whatever bytes the ids hold.
func jobPrefix(job string) []byte { return append([]byte(job), 0) }

// hasPrefix reports whether k is prefix followed by n bytes.
func hasPrefix(k, prefix []byte, n int) bool {
	return len(k) == len(prefix)+n && strings.HasPrefix(string(k), string(prefix))
}

func windowKey(job string, idx int) []byte {
	return binary.BigEndian.AppendUint64(jobPrefix(job), uint64(idx))
}

// flagKey is the key of flag id "<job>-<n>": the job's prefix and n.
func flagKey(id string) ([]byte, error) {
	i := strings.LastIndexByte(id, '-')
	if i <= 0 {
		return nil, fmt.Errorf("flag id %q: want <job>-<number>", id)
	}
	n, err := strconv.ParseUint(id[i+1:], 10, 32)
	if err != nil || strconv.FormatUint(n, 10) != id[i+1:] {
		return nil, fmt.Errorf("flag id %q: want <job>-<number>", id)
	}
	return binary.BigEndian.AppendUint32(jobPrefix(id[:i]), uint32(n)), nil
}

func endedKey(end time.Time, job string) []byte {
	return append(binary.BigEndian.AppendUint64(nil, uint64(end.UnixNano())), job...)
}
