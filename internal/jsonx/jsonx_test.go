package jsonx

import (
	"encoding/json"
	"math"
	"testing"
)

func TestNullForNonFinite(t *testing.T) {
	t.Parallel()
	b, err := json.Marshal(struct {
		A Float
		B Floats
	}{Float(math.NaN()), Floats{1.5, math.Inf(1), -2}})
	if err != nil {
		t.Fatal(err)
	}
	if got, want := string(b), `{"A":null,"B":[1.5,null,-2]}`; got != want {
		t.Errorf("got %s, want %s", got, want)
	}
}

func TestFloatRoundTrip(t *testing.T) {
	t.Parallel()
	type rec struct{ A, B, C Float }
	in := rec{Float(math.NaN()), Float(1540.123456789012), Float(-3e-9)}
	b, err := json.Marshal(in)
	if err != nil {
		t.Fatal(err)
	}
	var out rec
	if err := json.Unmarshal(b, &out); err != nil {
		t.Fatal(err)
	}
	if !math.IsNaN(float64(out.A)) || out.B != in.B || out.C != in.C {
		t.Errorf("round trip of %s gave %+v", b, out)
	}
	if err := json.Unmarshal([]byte(`{"A":"x"}`), &out); err == nil {
		t.Error("a string read as a number")
	}
}

// TestDecodeStrict: known fields decode; an unknown field is an error.
func TestDecodeStrict(t *testing.T) {
	var v struct{ A int }
	if err := DecodeStrict([]byte(`{"A": 3}`), &v); err != nil || v.A != 3 {
		t.Fatalf("known field: %v, %+v", err, v)
	}
	if err := DecodeStrict([]byte(`{"A": 3, "B": 1}`), &v); err == nil {
		t.Fatal("unknown field accepted")
	}
}
