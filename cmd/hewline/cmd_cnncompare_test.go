package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
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

func TestCNNCompareSizeFlag(t *testing.T) {
	for name, size := range map[string]string{"two sizes": "320x240,640x480", "not WxH": "320", "too small": "8x8"} {
		t.Run(name, func(t *testing.T) {
			var out, errb bytes.Buffer
			if code := run(context.Background(), []string{"cnn-compare", "-scenario", "gap", "-size", size, "-out", t.TempDir()}, &out, &errb); code != 2 {
				t.Errorf("-size %s: exit %d, want 2 (stderr %q)", size, code, errb.String())
			}
		})
	}
	if testing.Short() {
		t.Skip("renders and replays a scene twice")
	}
	dir := t.TempDir()
	var out, errb bytes.Buffer
	if code := run(context.Background(), []string{"cnn-compare", "-scenario", "gap", "-size", "160x120", "-jobs", "1", "-out", dir}, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	for _, f := range []string{"gap@160x120.avi", "gap@160x120.truth.ndjson", "gap@160x120.fallback.track.ndjson"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Error(err)
		}
	}
	// The clip is rendered at the size asked for (the track log's header).
	b, err := os.ReadFile(filepath.Join(dir, "gap@160x120.classical.track.ndjson"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(b[:min(len(b), 400)]), `"width":160,"height":120`) {
		t.Errorf("track log header %q, want width 160 and height 120", b[:min(len(b), 400)])
	}
}
