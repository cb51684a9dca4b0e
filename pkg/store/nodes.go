package store

import (
	"encoding/binary"
	"fmt"
	"hash/fnv"
	"maps"
	"slices"

	bolt "go.etcd.io/bbolt"

	"sluice/pkg/model"
)

// nodeShards is how many records the nodes' sequence sets are spread
// over. Every node reports every few seconds, so with one record per node
// each commit would rewrite every page of the bucket; with a few hundred
// shards a commit rewrites the shards that changed, each packed tight.
const nodeShards = 256

func shardOf(node string) uint16 {
	h := fnv.New32a()
	h.Write([]byte(node))
	return uint16(h.Sum32() % nodeShards)
}

func shardKey(s uint16) []byte { return binary.BigEndian.AppendUint16(nil, s) }

// putNodes writes the changed sequence sets into their shards.
func putNodes(tx *bolt.Tx, changed map[string]model.SeqRecord) error {
	byShard := map[uint16][]string{}
	for n := range changed {
		s := shardOf(n)
		byShard[s] = append(byShard[s], n)
	}
	bk := tx.Bucket(bucketNodes)
	for s, names := range byShard {
		key := shardKey(s)
		recs, err := decodeShard(key, bk.Get(key))
		if err != nil {
			return err
		}
		for _, n := range names {
			recs[n] = changed[n]
		}
		if err := bk.Put(key, encodeShard(recs)); err != nil {
			return fmt.Errorf("put node shard %d: %w", s, err)
		}
	}
	return nil
}

func loadNodes(tx *bolt.Tx) (map[string]model.SeqRecord, error) {
	out := map[string]model.SeqRecord{}
	err := tx.Bucket(bucketNodes).ForEach(func(k, v []byte) error {
		recs, err := decodeShard(k, v)
		maps.Copy(out, recs)
		return err
	})
	return out, err
}

// encodeShard writes a shard's nodes in name order: each node's highest
// sequence number and span, then its applied ranges from the highest
// down, each as its distance below the previous range's first number (or
// below the highest) and its length less one.
func encodeShard(recs map[string]model.SeqRecord) []byte {
	e := enc{b: make([]byte, 0, 16*len(recs))}
	e.byte(recordVersion)
	e.count(len(recs))
	for _, n := range slices.Sorted(maps.Keys(recs)) {
		r := recs[n]
		e.str(n)
		e.uvarint(r.High)
		e.count(r.Span)
		e.count(len(r.Applied))
		above := r.High
		for _, a := range r.Applied {
			e.uvarint(above - a.Last)
			e.uvarint(a.Last - a.First)
			above = a.First
		}
	}
	return e.b
}

func decodeShard(key, v []byte) (map[string]model.SeqRecord, error) {
	out := map[string]model.SeqRecord{}
	if v == nil {
		return out, nil
	}
	d := dec{b: v}
	d.version("node shard", recordVersion)
	for range d.count("nodes", 4) {
		name := d.str("node")
		r := model.SeqRecord{High: d.uvarint("high")}
		if span := d.uvarint("span"); span <= maxSpan {
			r.Span = int(span)
		} else {
			d.fail("span", fmt.Sprint(span))
		}
		r.Applied = decodeRanges(&d, r.High)
		out[name] = r
	}
	if err := d.end(); err != nil {
		return nil, fmt.Errorf("node shard %x: %w", key, err)
	}
	return out, nil
}

// maxSpan bounds a sequence set's span on reading: a corrupt one must not
// allocate gigabytes.
const maxSpan = 1 << 24

func decodeRanges(d *dec, high uint64) []model.SeqRange {
	n := d.count("ranges", 2)
	out := make([]model.SeqRange, 0, n)
	above, gapMin := high, uint64(0) // the first range may end at the highest
	for range n {
		gap, length := d.uvarint("range gap"), d.uvarint("range length")
		if d.err == nil && (gap < gapMin || gap > above || length > above-gap) {
			d.fail("range", fmt.Sprintf("gap %d and length %d below %d", gap, length, above))
		}
		if d.err != nil {
			return nil
		}
		last := above - gap
		out = append(out, model.SeqRange{First: last - length, Last: last})
		above, gapMin = last-length, 2 // ranges neither touch nor overlap
	}
	return out
}
