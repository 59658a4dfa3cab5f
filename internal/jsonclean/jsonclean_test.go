package jsonclean

import (
	"encoding/json"
	"math"
	"testing"
	"time"
)

type inner struct {
	A float64 `json:"a"`
}

type outer struct {
	inner
	B    float64   `json:"b"`
	L    []float64 `json:"l"`
	O    string    `json:"o,omitempty"`
	Skip int       `json:"-"`
	When time.Time `json:"when"`
	Nil  []int     `json:"nil"`
}

// The expected JSON is what encoding/json (RFC 8259 numbers, no NaN) gives
// for the same value with the unknown numbers removed by hand.
func TestCleanDropsUnknownNumbers(t *testing.T) {
	v := outer{inner: inner{A: math.NaN()}, B: 2.5, L: []float64{1, math.Inf(1), 3}, Skip: 7,
		When: time.Date(2026, 3, 14, 9, 30, 0, 0, time.UTC)}
	b, err := json.Marshal(Clean(v))
	if err != nil {
		t.Fatal(err)
	}
	want := `{"b":2.5,"l":[1,null,3],"nil":[],"when":"2026-03-14T09:30:00Z"}`
	if string(b) != want {
		t.Errorf("got %s\nwant %s", b, want)
	}
	if got, _ := json.Marshal(Clean(map[string]float64{"x": math.NaN(), "y": 1})); string(got) != `{"y":1}` {
		t.Errorf("map: %s", got)
	}
}
