package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"time"

	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/guidance/report"
	"github.com/hewline/hewline/guidance/score"
	"github.com/hewline/hewline/vision"
)

func init() {
	register(&command{
		name:    "replay",
		summary: "run detection and guidance over every frame of recorded clips (video files or image folders)",
		run:     runReplay,
	})
}

func runReplay(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("replay", "[options] CLIP...", stderr)
	track := fs.String("track", "", "write the track log of the (single) clip to `FILE` (default: CLIP's name + .track.ndjson in -out)")
	out := fs.String("out", ".", "`DIR` for track logs (and annotated videos) when -track is not given")
	truthF := fs.String("truth", "", "score against the truth `FILE` (one clip), or \"auto\" to use CLIP.truth.ndjson beside each clip")
	video := fs.Bool("video", false, "also write an annotated video (CLIP.annotated.avi in -out)")
	jobs := fs.Int("jobs", 0, "clips replayed at once, one per worker (0 = one per core)")
	o := replayFlags(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := o.applySite(fs); err != nil {
		return err
	}
	clips := fs.Args()
	if len(clips) == 0 {
		return usagef("no clip given")
	}
	if *track != "" && len(clips) > 1 {
		return usagef("-track names one file; with several clips use -out DIR")
	}
	if *truthF != "" && *truthF != "auto" && len(clips) > 1 {
		return usagef("-truth FILE scores one clip; with several clips use -truth auto")
	}
	seen := map[string]string{}
	for _, c := range clips {
		if prev, dup := seen[clipBase(c)]; dup && *track == "" {
			return usagef("%s and %s would write the same log in -out; replay them separately", prev, c)
		}
		seen[clipBase(c)] = c
	}
	workers := *jobs
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	workers = min(workers, len(clips))
	o.progress = isTerminal(stderr) && workers == 1

	// One clip per worker; every clip gets its own log even when another
	// fails. Results are printed in the clips' order.
	type outcome struct {
		res     *clipResult
		logPath string
		scoreEr error
	}
	outs, errs := report.ParallelMap(ctx, clips, workers, func(ctx context.Context, clip string) (outcome, error) {
		logPath := *track
		if logPath == "" {
			logPath = filepath.Join(*out, clipBase(clip)+".track.ndjson")
		}
		videoPath := ""
		if *video {
			videoPath = filepath.Join(*out, clipBase(clip)+".annotated.avi")
		}
		res, err := replayClip(ctx, clip, logPath, videoPath, o, stderr)
		oc := outcome{res: res, logPath: logPath}
		if res != nil {
			if tp := truthPath(*truthF, clip); tp != "" {
				res.score, oc.scoreEr = scoreClip(clipBase(clip), logPath, tp)
			}
		}
		return oc, err
	})
	var results []*score.Result
	var failed []string
	for i, clip := range clips {
		oc, err := outs[i], errs[i]
		if oc.res == nil {
			if errors.As(err, new(usageError)) || len(clips) == 1 {
				return err
			}
			fmt.Fprintf(stderr, "hewline replay: %v\n", err)
			failed = append(failed, clip)
			continue
		}
		if oc.scoreEr != nil {
			fmt.Fprintf(stderr, "hewline replay: score: %v\n", oc.scoreEr)
			failed = append(failed, clip)
		} else if oc.res.score != nil {
			results = append(results, oc.res.score)
		}
		printSummary(stdout, oc.res)
		if err != nil {
			if errors.Is(err, context.Canceled) {
				return err
			}
			if len(clips) == 1 {
				return fmt.Errorf("%w (the track log %s holds every frame read before it)", err, oc.logPath)
			}
			fmt.Fprintf(stderr, "hewline replay: %v (the track log holds every frame read before it)\n", err)
			failed = append(failed, clip)
		}
	}
	if len(results) > 0 {
		fmt.Fprintln(stdout)
		if len(results) > 1 {
			results = append(results, score.Combine("overall", results))
		}
		score.WriteTable(stdout, results)
	}
	if len(failed) > 0 {
		return fmt.Errorf("%d of %d clips failed: %s", len(failed), len(clips), strings.Join(failed, ", "))
	}
	return nil
}

// truthPath resolves -truth for one clip ("" = no scoring).
func truthPath(flag, clip string) string {
	switch flag {
	case "":
		return ""
	case "auto":
		p := strings.TrimSuffix(strings.TrimRight(clip, "/"), filepath.Ext(clip)) + ".truth.ndjson"
		if _, err := os.Stat(p); err == nil {
			return p
		}
		return ""
	}
	return flag
}

// replayFlags adds the options shared by replay and demo.
func replayFlags(fs *flag.FlagSet) *replayOptions {
	o := &replayOptions{vision: vision.DefaultConfig()}
	def := guidance.DefaultConfig()
	fs.StringVar(&o.follow, "follow", "stripe", "what to follow: `stripe` (one line) or lane (the centre between two boundary lines); demo scenes carry their own")
	fs.Float64Var(new(float64), "lane-width-mm", 0, "lane mode: the lane's width on the floor in `MM`, centre to centre of its lines (needs -calib; 0 = learned while both lines are seen)")
	fs.Float64Var(new(float64), "lane-width-px", 0, "lane mode without a calibration: the lane's width in `PX` along the reference row (0 = learned)")
	fs.DurationVar(new(time.Duration), "failsafe", def.FailSafeAfter, "raise the fail-safe alarm after this long without a trusted measurement")
	fs.DurationVar(new(time.Duration), "reacquire", def.ReacquireFor, "see the line this long before guidance resumes after a loss")
	fs.String("polarity", "auto", "stripe lighter or darker than the floor: auto, light or dark")
	fs.StringVar(&o.sitePath, "site", "", "site configuration `FILE` (hewline config check); flags given here override it")
	fs.StringVar(&o.wav, "wav", "", "write the operator's cue and alarm sound, following frame times, to the WAV `FILE`")
	fs.StringVar(&o.stream, "stream", "", "send the controller stream (NDJSON over UDP) to `HOST:PORT` (loopback or an explicit address; broadcast refused)")
	fs.StringVar(&o.calib, "calib", "", "calibration `FILE` (hewline calib): adds offset_mm, heading_floor_deg and width_mm while tracking")
	fs.BoolVar(&o.cnn, "cnn", false, "use the CNN fallback when the classical detector is unsure (off by default: on the suite it no longer adds false tracks, but it gains no recall either; see README, CNN fallback)")
	fs.StringVar(&o.cnnModel, "cnn-model", "", "CNN model `FILE` (ONNX from hewline train; default the shipped model)")
	fs.IntVar(&o.cnnCheck, "cnn-check", 0, "also run the CNN every `N`th frame as a cross-check (0 = only when unsure)")
	return o
}
