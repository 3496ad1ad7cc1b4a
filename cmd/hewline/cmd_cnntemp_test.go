package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hewline/hewline/vision/cnn"
)

func TestCNNTemperatureUsage(t *testing.T) {
	tests := map[string][]string{
		"training seed": {"cnn-temperature", "-seed", "1"}, // the shipped model's training seed
		"too few":       {"cnn-temperature", "-frames", "10", "-synth", "0"},
		"one bin":       {"cnn-temperature", "-bins", "1"},
		"argument":      {"cnn-temperature", "x"},
	}
	wantUsageErrors(t, tests)
}

// TestCNNTemperatureWritesModel fits the temperature on a few held-out
// scenes and checks that the written model loads (Go validation, then
// OpenCV) and records the temperature it printed.
func TestCNNTemperatureWritesModel(t *testing.T) {
	p := filepath.Join(t.TempDir(), "cal.onnx")
	var out, errb bytes.Buffer
	if code := run(context.Background(), []string{"cnn-temperature", "-o", p, "-frames", "200", "-synth", "0"}, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	for _, want := range []string{"fitted temperature", "| 0.9–1.0 |", "expected calibration error"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("output lacks %q:\n%s", want, out.String())
		}
	}
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	net, err := cnn.Load(b)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	if tt := net.Model().Temperature(); tt == 1 || !strings.Contains(out.String(), "temperature "+net.Model().Notes[cnn.TemperatureNote][:4]) {
		t.Errorf("model temperature %v (note %q) not the one printed:\n%s", tt, net.Model().Notes[cnn.TemperatureNote], out.String())
	}
}
