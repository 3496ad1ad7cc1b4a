package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"

	"github.com/hewline/hewline/vision"
	"github.com/hewline/hewline/vision/cnn"
	"github.com/hewline/hewline/vision/cnn/shipped"
)

func init() {
	register(&command{
		name: "cnn-temperature",
		summary: "fit the CNN's softmax temperature on rendered scenes it was not trained on, print the " +
			"reliability of its row confidence before and after, and write the calibrated model",
		run: runCNNTemperature,
	})
}

func runCNNTemperature(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("cnn-temperature", "[-model in.onnx] [-o out.onnx] [-seed N]", stderr)
	in := fs.String("model", "", "model `FILE` to calibrate (default the shipped model)")
	out := fs.String("o", "", "write the calibrated model to `FILE` (default: only print the tables)")
	seed := fs.Uint64("seed", 1001, "seed of the held-out scenes; must differ from the model's training seed")
	frames := fs.Int("frames", 3000, "held-out image-plane scenes")
	synthFrames := fs.Int("synth", 1000, "held-out frames of the renderer's scenarios")
	bins := fs.Int("bins", 10, "reliability bins")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("cnn-temperature takes no arguments (got %q)", fs.Args())
	}
	if *frames < 0 || *synthFrames < 0 || *frames+*synthFrames < 100 || *bins < 2 || *bins > 100 {
		return usagef("-frames and -synth ≥ 0 with at least 100 between them, 2 ≤ -bins ≤ 100")
	}
	b, name := shipped.StripeRowAnchor, "shipped stripe-rowanchor"
	if *in != "" {
		var err error
		if b, err = os.ReadFile(*in); err != nil {
			return fmt.Errorf("cnn model: %w", err)
		}
		name = *in
	}
	m, err := cnn.UnmarshalONNX(b)
	if err != nil {
		return fmt.Errorf("cnn model %s: %w", name, err)
	}
	if s := m.Notes["train.seed"]; s == strconv.FormatUint(*seed, 10) {
		return usagef("-seed %d is the model's training seed: its scenes are the training data; pick another", *seed)
	}
	fmt.Fprintf(stderr, "rendering %d scenes and %d renderer frames (seed %d)...\n", *frames, *synthFrames, *seed)
	data, err := cnn.SceneSamples(m.Arch, *frames, *seed)
	if err != nil {
		return err
	}
	if *synthFrames > 0 {
		s, err := cnn.SynthSamples(m.Arch, *synthFrames, *seed)
		if err != nil {
			return err
		}
		data = append(data, s...)
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	// Fit on two thirds, judge on the other third (every third sample:
	// both halves hold scenes and renderer frames).
	var fit, test []cnn.Sample
	for i, s := range data {
		if i%3 == 2 {
			test = append(test, s)
		} else {
			fit = append(fit, s)
		}
	}
	before, eceBefore, err := cnn.RowReliability(m, test, *bins)
	if err != nil {
		return err
	}
	t, err := cnn.FitTemperature(m, fit)
	if err != nil {
		return err
	}
	prev := m.Temperature()
	if err := m.ApplyTemperature(t); err != nil {
		return err
	}
	after, eceAfter, err := cnn.RowReliability(m, test, *bins)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "model %s (temperature so far %.4g): fitted temperature %.4f on %d samples; checked on %d others\n\n",
		name, prev, t, len(fit), len(test))
	writeReliabilityPair(stdout, before, after)
	fmt.Fprintf(stdout, "\nexpected calibration error of the row confidence: %.4f before, %.4f after\n", eceBefore, eceAfter)
	if *out == "" {
		return nil
	}
	m.Notes["calib.seed"] = strconv.FormatUint(*seed, 10)
	m.Notes["calib.samples"] = fmt.Sprintf("%d image-plane scenes, %d renderer frames", *frames, *synthFrames)
	m.Notes["calib.ece"] = fmt.Sprintf("%.4f before, %.4f after", eceBefore, eceAfter)
	enc, err := m.MarshalONNX()
	if err != nil {
		return err
	}
	if err := cnn.Validate(enc); err != nil {
		return fmt.Errorf("the calibrated model does not validate (a bug): %w", err)
	}
	if dir := filepath.Dir(*out); dir != "" {
		if err := os.MkdirAll(dir, 0o755); err != nil {
			return err
		}
	}
	if err := os.WriteFile(*out, enc, 0o644); err != nil {
		return fmt.Errorf("write model: %w", err)
	}
	fmt.Fprintf(stdout, "wrote %s (temperature %.4f)\n", *out, m.Temperature())
	return nil
}

// writeReliabilityPair writes two reliability tables over the same bins
// side by side as Markdown.
func writeReliabilityPair(w io.Writer, before, after []vision.ReliabilityBin) {
	fmt.Fprintln(w, "| stated row confidence | rows before | mean stated | right | rows after | mean stated | right |")
	fmt.Fprintln(w, "|---|---:|---:|---:|---:|---:|---:|")
	for i := range before {
		b, a := before[i], after[i]
		fmt.Fprintf(w, "| %.1f–%.1f | %d | %s | %s | %d | %s | %s |\n", b.Lo, b.Hi,
			b.N, relCell(b.N, b.MeanConfidence), relCell(b.N, b.Accuracy), a.N, relCell(a.N, a.MeanConfidence), relCell(a.N, a.Accuracy))
	}
}

func relCell(n int, v float64) string {
	if n == 0 {
		return "–"
	}
	return fmt.Sprintf("%.3f", v)
}
