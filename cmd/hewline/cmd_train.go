package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/vision"
	"github.com/hewline/hewline/vision/cnn"
	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"
)

// siteLabeler makes the detector that labels site footage for
// "hewline train -site": the classical detector with its default
// settings. When nil, -site refuses to run rather than train on no labels.
var siteLabeler = func() (cnn.Labeler, error) { return vision.NewClassical(vision.DefaultConfig()) }

type listFlag []string

func (l *listFlag) String() string     { return strings.Join(*l, ",") }
func (l *listFlag) Set(s string) error { *l = append(*l, s); return nil }

func init() {
	register(&command{
		name:    "train",
		summary: "train the row-anchor CNN fallback on rendered scenes (and site clips) and write it as ONNX",
		run:     runTrain,
	})
}

func runTrain(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("train", "[-o model.onnx] [-seed N] [-epochs N] [-frames N] [-synth N] [-site CLIP]... [CLIP...]", stderr)
	out := fs.String("o", "model.onnx", "where to write the trained model")
	seed := fs.Uint64("seed", 1, "random seed for scenes, weights, split and shuffling")
	epochs := fs.Int("epochs", 30, "most passes over the training data (early stopping may end sooner)")
	frames := fs.Int("frames", 16000, "quick image-plane training scenes")
	synthFrames := fs.Int("synth", 4000, "frames from the renderer's scenarios (capture/synth), randomised")
	batch := fs.Int("batch", 32, "samples per Adam step")
	lr := fs.Float64("lr", 2e-3, "Adam step size")
	decay := fs.Float64("decay", 0.9, "factor applied to the step size after every epoch")
	val := fs.Float64("val", 0.15, "share of samples held out for validation")
	patience := fs.Int("patience", 4, "epochs without a better validation loss before stopping")
	minConf := fs.Float64("site-min-conf", 0.8, "lowest classical confidence taken as a label from site clips")
	copies := fs.Int("site-copies", 3, "degraded copies of each labelled site frame")
	every := fs.Int("site-every", 5, "use one site frame in this many")
	mirror := fs.Bool("mirror", true, "also learn from left-right mirror images")
	logPath := fs.String("log", "", "also write the loss/accuracy log to this file")
	var sites listFlag
	fs.Var(&sites, "site", "a site recording (video file or image folder) to label and learn from; repeatable, and any arguments are site recordings too (hewline train -site rec/*.avi)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	sites = append(sites, fs.Args()...)
	if *frames < 0 || *synthFrames < 0 || *epochs < 1 || *batch < 1 || *lr <= 0 || *decay <= 0 || *decay > 1 || *val <= 0 || *val >= 1 || *patience < 1 {
		return usagef("-frames ≥ 0, -synth ≥ 0, -epochs ≥ 1, -batch ≥ 1, -lr > 0, 0 < -decay ≤ 1, 0 < -val < 1 and -patience ≥ 1")
	}
	if *frames == 0 && *synthFrames == 0 && len(sites) == 0 {
		return usagef("nothing to train on: give -frames, -synth or -site")
	}
	if len(sites) > 0 && siteLabeler == nil {
		return fmt.Errorf("-site %s: this build has no classical detector wired in to label site footage", sites[0])
	}
	logw := stderr
	if *logPath != "" {
		f, err := os.Create(*logPath)
		if err != nil {
			return fmt.Errorf("create log: %w", err)
		}
		defer f.Close()
		logw = io.MultiWriter(stderr, f)
	}
	a := cnn.DefaultArch()
	start := time.Now()
	fmt.Fprintf(logw, "rendering %d scenes (seed %d)...\n", *frames, *seed)
	data, err := cnn.SceneSamples(a, *frames, *seed)
	if err != nil {
		return err
	}
	if *synthFrames > 0 {
		fmt.Fprintf(logw, "rendering %d frames of the renderer's scenarios...\n", *synthFrames)
		s, err := cnn.SynthSamples(a, *synthFrames, *seed)
		if err != nil {
			return err
		}
		data = append(data, s...)
	}
	for _, clip := range sites {
		lab, err := siteLabeler()
		if err != nil {
			return fmt.Errorf("-site %s: labeller: %w", clip, err)
		}
		src, err := capture.Open(clip)
		if err != nil {
			return err
		}
		s, st, err := cnn.SiteSamples(src, lab, a, cnn.SiteConfig{MinConfidence: *minConf, Every: *every, Copies: *copies, Seed: *seed})
		src.Close()
		if c, ok := lab.(io.Closer); ok {
			c.Close()
		}
		if err != nil {
			return fmt.Errorf("-site %s: %w", clip, err)
		}
		fmt.Fprintf(logw, "%s: %d frames, %d labelled, %d too unsure, %d samples\n", clip, st.Frames, st.Used, st.Unsure, len(s))
		data = append(data, s...)
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	m, err := cnn.NewModel(a, cnn.NewRand(*seed))
	if err != nil {
		return err
	}
	fmt.Fprintf(logw, "training %s (%d weights) on %d samples\n", a, m.NumParams(), len(data))
	var bar *progressbar.ProgressBar
	if f, ok := stderr.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		bar = progressbar.NewOptions(100, progressbar.OptionSetWriter(stderr), progressbar.OptionClearOnFinish())
	}
	cfg := cnn.TrainConfig{Epochs: *epochs, Batch: *batch, LR: *lr, Decay: *decay, Seed: *seed, ValFrac: *val, Patience: *patience, Mirror: *mirror, Log: logw,
		Stop: func() bool { return ctx.Err() != nil }}
	if bar != nil {
		cfg.Step = func(ep, done, total int) {
			bar.Describe(fmt.Sprintf("epoch %d", ep))
			bar.Set(100 * done / total)
		}
	}
	stats, err := cnn.Train(m, data, cfg)
	if bar != nil {
		bar.Finish()
	}
	if err != nil {
		return err
	}
	if err := ctx.Err(); err != nil {
		return fmt.Errorf("interrupted; nothing written: %w", err)
	}
	best := stats[0]
	for _, s := range stats {
		if s.Val.Loss < best.Val.Loss {
			best = s
		}
	}
	m.Notes["train.command"] = "hewline train " + strings.Join(args, " ")
	m.Notes["train.seed"] = fmt.Sprint(*seed)
	m.Notes["train.samples"] = fmt.Sprint(len(data))
	m.Notes["train.best_epoch"] = fmt.Sprint(best.Epoch)
	m.Notes["train.val_loss"] = fmt.Sprintf("%.4f", best.Val.Loss)
	m.Notes["train.val_row_acc"] = fmt.Sprintf("%.4f", best.Val.RowAcc)
	m.Notes["train.val_within_1_cell"] = fmt.Sprintf("%.4f", best.Val.RowNear)
	m.Notes["train.sites"] = fmt.Sprint(len(sites))
	m.Notes["train.data"] = fmt.Sprintf("%d image-plane scenes, %d renderer frames, %d site clips", *frames, *synthFrames, len(sites))
	b, err := m.MarshalONNX()
	if err != nil {
		return err
	}
	if err := cnn.Validate(b); err != nil {
		return fmt.Errorf("the exported model does not validate (a bug): %w", err)
	}
	if dir := filepath.Dir(*out); dir != "" {
		if err := os.MkdirAll(dir, 0o755); err != nil {
			return err
		}
	}
	if err := os.WriteFile(*out, b, 0o644); err != nil {
		return fmt.Errorf("write model: %w", err)
	}
	fmt.Fprintf(stdout, "wrote %s (%d bytes): best epoch %d, validation loss %.4f, row accuracy %.4f, within one cell %.4f, %s\n",
		*out, len(b), best.Epoch, best.Val.Loss, best.Val.RowAcc, best.Val.RowNear, time.Since(start).Round(time.Second))
	return nil
}
