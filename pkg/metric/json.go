package metric

import (
	"encoding/json"
	"fmt"
)

// MarshalJSON writes rates as an object keyed by metric name, so the API
// reads {"creates": 1520.5, ...} rather than a positional array.
func (r Rates) MarshalJSON() ([]byte, error) {
	m := make(map[string]float64, Count)
	for i, x := range r {
		m[ID(i).String()] = x
	}
	return json.Marshal(m)
}

// UnmarshalJSON reads the object MarshalJSON writes; unknown names are an
// error and missing names are zero.
func (r *Rates) UnmarshalJSON(b []byte) error {
	var m map[string]float64
	if err := json.Unmarshal(b, &m); err != nil {
		return fmt.Errorf("rates: %w", err)
	}
	*r = Rates{}
	for name, x := range m {
		id, err := Parse(name)
		if err != nil {
			return fmt.Errorf("rates: %w", err)
		}
		r[id] = x
	}
	return nil
}

// MarshalJSON writes values as an object keyed by metric name.
func (v Values) MarshalJSON() ([]byte, error) {
	m := make(map[string]uint64, Count)
	for i, x := range v {
		m[ID(i).String()] = x
	}
	return json.Marshal(m)
}

// UnmarshalJSON reads the object MarshalJSON writes.
func (v *Values) UnmarshalJSON(b []byte) error {
	var m map[string]uint64
	if err := json.Unmarshal(b, &m); err != nil {
		return fmt.Errorf("values: %w", err)
	}
	*v = Values{}
	for name, x := range m {
		id, err := Parse(name)
		if err != nil {
			return fmt.Errorf("values: %w", err)
		}
		v[id] = x
	}
	return nil
}

// MarshalText encodes the metric by name, so maps keyed by ID and ID fields
// read as names in JSON.
func (id ID) MarshalText() ([]byte, error) { return []byte(id.String()), nil }

// UnmarshalText decodes a metric name.
func (id *ID) UnmarshalText(b []byte) error {
	p, err := Parse(string(b))
	if err != nil {
		return err
	}
	*id = p
	return nil
}
