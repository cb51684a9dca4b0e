package store

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"
)

// Pruned counts what a Prune call deleted: the jobs, and their windows,
// flags and acknowledgements.
type Pruned struct {
	Jobs, Windows, Flags, Acks int
	// More says jobs older than the cutoff remain: call again.
	More bool
}

// Prune deletes everything the file keeps of jobs that ended before
// cutoff, oldest first: their windows, signature, flags,
// acknowledgements, record and place in the ended index. It handles at
// most limit jobs, in one transaction, so that the commits of new state
// never wait long behind it.
func (s *Store) Prune(cutoff time.Time, limit int) (Pruned, error) {
	var p Pruned
	err := s.update(func(tx *bolt.Tx) error {
		p = Pruned{}
		var done [][]byte
		c := tx.Bucket(bucketEnded).Cursor()
		for k, _ := c.First(); k != nil; k, _ = c.Next() {
			if len(k) < 8 || int64(binary.BigEndian.Uint64(k)) >= cutoff.UnixNano() {
				break
			}
			if len(done) == limit {
				p.More = true
				break
			}
			done = append(done, bytes.Clone(k))
		}
		p.Jobs = len(done)
		for _, k := range done {
			if err := pruneJob(tx, string(k[8:]), &p); err != nil {
				return err
			}
			if err := tx.Bucket(bucketEnded).Delete(k); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return Pruned{}, fmt.Errorf("store %s: prune: %w", s.path, err)
	}
	return p, nil
}

func pruneJob(tx *bolt.Tx, job string, p *Pruned) error {
	prefix := jobPrefix(job)
	var err error
	if p.Windows, err = deleteKeyed(tx.Bucket(bucketWindows), prefix, 8, p.Windows); err != nil {
		return err
	}
	if p.Flags, err = deleteKeyed(tx.Bucket(bucketFlags), prefix, 4, p.Flags); err != nil {
		return err
	}
	if p.Acks, err = deleteKeyed(tx.Bucket(bucketAcks), prefix, 4, p.Acks); err != nil {
		return err
	}
	if err := tx.Bucket(bucketSigs).Delete([]byte(job)); err != nil {
		return err
	}
	return tx.Bucket(bucketJobs).Delete([]byte(job))
}

// deleteKeyed deletes the keys that are prefix and n more bytes, and
// adds their count to counted.
func deleteKeyed(b *bolt.Bucket, prefix []byte, n, counted int) (int, error) {
	var keys [][]byte
	c := b.Cursor()
	for k, _ := c.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, _ = c.Next() {
		if len(k) == len(prefix)+n {
			keys = append(keys, bytes.Clone(k))
		}
	}
	for _, k := range keys {
		if err := b.Delete(k); err != nil {
			return counted, err
		}
	}
	return counted + len(keys), nil
}
