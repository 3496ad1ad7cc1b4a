package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hewline/hewline/capture/synth"
	"github.com/hewline/hewline/vision/cnn"
)

func TestTrainUsage(t *testing.T) {
	tests := map[string][]string{
		"no data":       {"train", "-frames", "0", "-synth", "0"},
		"zero epochs":   {"train", "-epochs", "0"},
		"bad val":       {"train", "-val", "1.5"},
		"unknown flag":  {"train", "-bogus"},
		"negative data": {"train", "-synth", "-3"},
	}
	wantUsageErrors(t, tests)
}

// TestTrainWritesModel trains for one short epoch and checks that the file
// loads and records how it was made.
func TestTrainWritesModel(t *testing.T) {
	p := filepath.Join(t.TempDir(), "m.onnx")
	var out, errb bytes.Buffer
	code := run(context.Background(), []string{"train", "-o", p, "-frames", "80", "-synth", "20", "-epochs", "1", "-seed", "3"}, &out, &errb)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	if !strings.Contains(errb.String(), "epoch   1") || !strings.Contains(out.String(), "wrote "+p) {
		t.Errorf("log %q, output %q", errb.String(), out.String())
	}
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	m, err := cnn.UnmarshalONNX(b)
	if err != nil {
		t.Fatal(err)
	}
	if m.Notes["train.seed"] != "3" || !strings.Contains(m.Notes["train.command"], "-frames 80") {
		t.Errorf("notes %v", m.Notes)
	}
}

func TestTrainSiteNeedsLabeller(t *testing.T) {
	saved := siteLabeler
	siteLabeler = nil
	defer func() { siteLabeler = saved }()
	var out, errb bytes.Buffer
	code := run(context.Background(), []string{"train", "-o", filepath.Join(t.TempDir(), "m.onnx"), "-frames", "10", "-synth", "0", "-site", "clip.mkv"}, &out, &errb)
	if code != 1 || !strings.Contains(errb.String(), "no classical detector") {
		t.Errorf("exit %d, stderr %q", code, errb.String())
	}
}

// TestTrainOnSiteClip renders a short clip of the "weave" scenario to a
// video file, as a site recording would be, and trains on it alone: the
// classical detector must label some of its frames.
func TestTrainOnSiteClip(t *testing.T) {
	dir := t.TempDir()
	sc, err := synth.Lookup("weave")
	if err != nil {
		t.Fatal(err)
	}
	sc.Frames, sc.FPS = 30, 10
	clip := filepath.Join(dir, "aisle.avi")
	if err := synth.WriteClip(sc, clip, filepath.Join(dir, "aisle.truth.ndjson")); err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dir, "m.onnx")
	var out, errb bytes.Buffer
	// The clip given by -site and again as an argument (as a shell
	// expands "-site rec/*.avi"): both are used.
	code := run(context.Background(), []string{"train", "-o", p, "-frames", "0", "-synth", "0", "-site", clip, "-site-every", "3", "-epochs", "1", clip}, &out, &errb)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	if n := strings.Count(errb.String(), "30 frames, 10 labelled"); n != 2 {
		t.Errorf("log %q: %d clips with all 10 sampled frames labelled, want 2", errb.String(), n)
	}
}
