package pattern

import "fmt"

// Quantity is a derived quantity: a number computed from a window's rates
// or node figures that rules can compare with below: and above:. Package
// matcher computes it (matcher.Derived).
type Quantity uint8

// The derived quantities; the package doc gives each formula and unit.
const (
	// MeanReadSize is read_bytes / read_ops, in bytes.
	MeanReadSize Quantity = iota + 1
	// MeanWriteSize is write_bytes / write_ops, in bytes.
	MeanWriteSize
	// MeanTransferSize is (read_bytes + write_bytes) / (read_ops +
	// write_ops), in bytes.
	MeanTransferSize
	// MetaToDataRatio is metadata operations over max(1, read_ops +
	// write_ops).
	MetaToDataRatio
	// BusiestNodeShare is the busiest node's share of the job's data bytes
	// (model.Window.BusiestShare; jobs of 2+ nodes).
	BusiestNodeShare
	// NodeSpread is the spread of the per-node data byte rates
	// (model.Window.NodeSpread; jobs of 2+ nodes).
	NodeSpread
	// DataBytes is read_bytes + write_bytes, in bytes/s per node.
	DataBytes
	// SyncPerWrite is syncs / max(1, write_ops).
	SyncPerWrite
)

var quantityNames = [...]string{
	MeanReadSize:     "mean_read_size",
	MeanWriteSize:    "mean_write_size",
	MeanTransferSize: "mean_transfer_size",
	MetaToDataRatio:  "meta_to_data_ratio",
	BusiestNodeShare: "busiest_node_share",
	NodeSpread:       "node_spread",
	DataBytes:        "data_bytes",
	SyncPerWrite:     "sync_per_write",
}

// Quantities lists every derived quantity.
func Quantities() []Quantity {
	out := make([]Quantity, 0, len(quantityNames)-1)
	for q := MeanReadSize; int(q) < len(quantityNames); q++ {
		out = append(out, q)
	}
	return out
}

// String returns the quantity's name as written in pattern files.
func (q Quantity) String() string {
	if q > 0 && int(q) < len(quantityNames) {
		return quantityNames[q]
	}
	return fmt.Sprintf("quantity(%d)", uint8(q))
}

// ParseQuantity returns the derived quantity with the given name.
func ParseQuantity(name string) (Quantity, error) {
	for i, n := range quantityNames {
		if i > 0 && n == name {
			return Quantity(i), nil
		}
	}
	return 0, fmt.Errorf("unknown derived quantity %q", name)
}

// Unit returns the quantity's unit: "bytes", "bytes/s" or "" for a ratio.
func (q Quantity) Unit() string {
	switch q {
	case MeanReadSize, MeanWriteSize, MeanTransferSize:
		return "bytes"
	case DataBytes:
		return "bytes/s"
	}
	return ""
}

// NeedsNodes reports whether the quantity is defined only for jobs of two
// or more nodes; a rule using it must have min_nodes of at least 2.
func (q Quantity) NeedsNodes() bool { return q == BusiestNodeShare || q == NodeSpread }
