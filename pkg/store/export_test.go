package store

import bolt "go.etcd.io/bbolt"

// PutRaw writes v under key in bucket as it is, for tests that hold a
// record as an older build wrote it.
func (s *Store) PutRaw(bucket, key string, v []byte) error {
	return s.db.Update(func(tx *bolt.Tx) error { return tx.Bucket([]byte(bucket)).Put([]byte(key), v) })
}
