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
