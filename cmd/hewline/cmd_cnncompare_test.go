package main

import (
	"strings"
	"testing"

	"github.com/hewline/hewline/guidance/score"
)

// TestFallbackTable: one row per scenario with both runs' recall and
// false-track frames, the fallback's method counts, and an overall row
// that adds the frames up (score.Combine).
func TestFallbackTable(t *testing.T) {
	res := func(visible, correct, falseTracks int) *score.Result {
		return &score.Result{Frames: 300, VisibleFrames: visible, CorrectFrames: correct, FalseTracks: falseTracks, Losses: 1, AlarmLatencies: []float64{0.3}}
	}
	rows := []*fallbackRow{
		{name: "a", off: res(300, 150, 10), on: res(300, 240, 4), methods: map[string]int{"cnn": 5, "fused": 7, "disputed:classical": 2, "disputed:cnn": 1}, cnnGated: 3},
		{name: "b", off: res(100, 100, 0), on: res(100, 90, 2), methods: map[string]int{"classical": 300}},
	}
	var b strings.Builder
	writeFallbackTable(&b, rows)
	got := b.String()
	for _, want := range []string{
		"| a | 300 | 0.500 | 0.800 ▲ | 10 | 4 ▲ | 0.300 / 0.300 | 5 / 7 / 3 | 3 |",
		"| b | 100 | 1.000 | 0.900 ▼ | 0 | 2 ▼ | 0.300 / 0.300 | 0 / 0 / 0 | 0 |",
		"| **overall** | 400 | 0.625 | 0.825 ▲ | 10 | 6 ▲ | 0.300 / 0.300 | 5 / 7 / 3 | 3 |",
	} {
		if !strings.Contains(got, want) {
			t.Errorf("table lacks %q:\n%s", want, got)
		}
	}
}
