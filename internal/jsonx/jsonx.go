// Package jsonx holds JSON helpers: numbers that may be undefined (NaN or
// infinite) are written as null, which JSON readers in every language accept.
package jsonx

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
)

// DecodeStrict decodes the JSON value in b into v; a field that v does not
// have is an error, as in every file and record celerity reads back.
func DecodeStrict(b []byte, v any) error {
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	return dec.Decode(v)
}

// Float is a float64 written as null when it is not finite.
type Float float64

// MarshalJSON implements json.Marshaler.
func (f Float) MarshalJSON() ([]byte, error) {
	v := float64(f)
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, v, 'g', -1, 64), nil
}

// Floats is a []float64 whose non-finite entries are written as null.
type Floats []float64

// MarshalJSON implements json.Marshaler.
func (fs Floats) MarshalJSON() ([]byte, error) {
	if fs == nil {
		return []byte("null"), nil
	}
	b := []byte{'['}
	for i, v := range fs {
		if i > 0 {
			b = append(b, ',')
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			b = append(b, "null"...)
		} else {
			b = strconv.AppendFloat(b, v, 'g', -1, 64)
		}
	}
	return append(b, ']'), nil
}

// UnmarshalJSON implements json.Unmarshaler: null reads as NaN, so that a
// value written by MarshalJSON reads back as it was.
func (f *Float) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*f = Float(math.NaN())
		return nil
	}
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return fmt.Errorf("jsonx: %q is not a number", b)
	}
	*f = Float(v)
	return nil
}
