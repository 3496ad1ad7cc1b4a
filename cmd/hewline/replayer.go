package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

	"gocv.io/x/gocv"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"

	"github.com/hewline/hewline/audio"
	"github.com/hewline/hewline/calib"
	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/record"
	"github.com/hewline/hewline/capture/truth"
	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/cmd/internal/siteconfig"
	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/guidance/ctlstream"
	"github.com/hewline/hewline/guidance/score"
	"github.com/hewline/hewline/guidance/tracklog"
	"github.com/hewline/hewline/vision"
	"github.com/hewline/hewline/vision/cnn"
	"github.com/hewline/hewline/vision/cnn/shipped"
)

// replayOptions are the settings shared by replay and demo.
type replayOptions struct {
	follow   string
	progress bool
	vision   vision.Config
	tracker  guidance.Config
	// sitePath is the site configuration file; site is what is in force
	// (defaults < file < flags), set by applySite.
	sitePath string
	site     *siteconfig.Site
	// wav, when set, receives the operator's cue and alarm sound,
	// following the frame timestamps.
	wav string
	// stream is a UDP address for the controller stream ("" = none).
	stream string
	// calib is a calibration file for floor values ("" = none).
	calib string
	// cnn turns the CNN fallback on; cnnModel replaces the shipped model;
	// cnnCheck > 0 also runs it every cnnCheck-th frame as a cross-check.
	cnn      bool
	cnnModel string
	cnnCheck int
	// baseline replaces the detector with the plain reference follower
	// (package reffollow), told the stripe is dark when baselineDark; for
	// the demo's comparison rows only.
	baseline, baselineDark bool
}

// newDetector builds the detector stage: the classical detector, fused with
// the CNN fallback unless it is switched off. The returned close releases
// both.
//
// In lane mode (-follow lane) the primary detector is vision.Lane, which
// reports the lane's centre and both boundaries; the CNN fallback knows
// stripes only and is refused there.
func (o *replayOptions) newDetector() (*pipeline.Fused, func(), error) {
	if o.baseline {
		p := newPlainDetector(o.baselineDark)
		return &pipeline.Fused{Primary: p}, func() { p.Close() }, nil
	}
	mode, err := followMode(o.follow)
	if err != nil {
		return nil, nil, err
	}
	vcfg := o.vision
	var cal *calib.File
	var floor floorPoints
	if o.calib != "" {
		if cal, floor.m, err = loadMapper(o.calib); err != nil {
			return nil, nil, err
		}
		vcfg = floorROI(vcfg, cal, floor)
	}
	if mode == followLane {
		if o.cnn || o.cnnCheck > 0 {
			return nil, nil, usagef("-cnn and -cnn-check work in stripe mode only (the shipped model knows one stripe, not a lane)")
		}
		lc := vision.DefaultLaneConfig()
		if o.site != nil {
			lc.WidthMM, lc.WidthPx = float64(o.site.Lane.WidthMM), o.site.Lane.WidthPx
		}
		if cal != nil {
			lc.Floor = floor
		}
		ln, err := vision.NewLane(vcfg, lc)
		if err != nil {
			return nil, nil, err
		}
		return &pipeline.Fused{Primary: ln}, func() { ln.Close() }, nil
	}
	cl, err := vision.NewClassical(vcfg)
	if err != nil {
		return nil, nil, err
	}
	// The fallback's confidence is capped halfway between the tracker's
	// hold and acquisition thresholds, always below the latter: it can
	// carry a locked track, never start or regain one (see pipeline.Fused).
	capConf := (o.tracker.HoldConfidence + o.tracker.MinConfidence) / 2
	if capConf >= o.tracker.MinConfidence {
		capConf = o.tracker.MinConfidence * 0.98
	}
	f := &pipeline.Fused{Primary: cl, CrossCheck: o.cnnCheck, MaxFallbackConf: capConf}
	closeAll := func() { cl.Close() }
	if !o.cnn {
		return f, closeAll, nil
	}
	model := shipped.StripeRowAnchor
	if o.cnnModel != "" {
		b, err := os.ReadFile(o.cnnModel)
		if err != nil {
			cl.Close()
			return nil, nil, fmt.Errorf("cnn model: %w", err)
		}
		model = b
	}
	nn, err := cnn.NewDetector(model, cnn.Config{RefRowFrac: o.vision.RefRow})
	if err != nil {
		cl.Close()
		return nil, nil, fmt.Errorf("cnn model %s: %w", o.cnnModel, err)
	}
	f.Fallback = nn
	return f, func() { cl.Close(); nn.Close() }, nil
}

// Follow modes: one stripe, or the centre of a lane between two lines.
const (
	followStripe = "stripe"
	followLane   = "lane"
)

// followMode reads -follow (or the site's follow:): stripe (also when
// empty) or lane, any case.
func followMode(s string) (string, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "", followStripe:
		return followStripe, nil
	case followLane:
		return followLane, nil
	}
	return "", usagef("-follow %q: want stripe or lane", s)
}

// floorROI moves the top of the detector's region of interest down to
// where the calibrated floor ends (vision.FloorTop: the horizon, or the
// floor beyond vision.FloorRangeMM), so that walls, racks and windows above
// it are never searched. A region set lower by the site stays as it is.
func floorROI(cfg vision.Config, f *calib.File, floor floorPoints) vision.Config {
	top := vision.FloorTop(floor, f.ImageSize[0], f.ImageSize[1])
	cfg.ROI.Top = math.Max(cfg.ROI.Top, math.Min(top, cfg.ROI.Bottom-0.1))
	return cfg
}

// floorPoints adapts calib.Mapper to vision.FloorMap and
// vision.FloorPlane.
type floorPoints struct{ m *calib.Mapper }

func (f floorPoints) ToFloorMM(x, y float64) (float64, float64, bool) {
	p, ok := f.m.ToFloor(calib.Pt{X: x, Y: y})
	return p.X, p.Y, ok
}

func (f floorPoints) ToImageMM(forward, right float64) (float64, float64, bool) {
	p, ok := f.m.ToImage(calib.Pt{X: forward, Y: right})
	return p.X, p.Y, ok
}

// loadMapper loads the calibration file at path and its image-floor
// mapping.
func loadMapper(path string) (*calib.File, *calib.Mapper, error) {
	f, err := calib.Load(path)
	if err != nil {
		return nil, nil, err
	}
	m, err := calib.NewMapper(f)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", path, err)
	}
	return f, m, nil
}

func (o *replayOptions) trackerConfig() (guidance.Config, error) {
	return o.tracker, o.tracker.Validate()
}

// applySite builds the settings in force: the defaults, then the site file
// (-site), then the flags the user set. Every mistake in the file is
// reported with its line.
func (o *replayOptions) applySite(fs *flag.FlagSet) error {
	site := siteconfig.Default()
	if o.sitePath != "" {
		s, err := siteconfig.Load(o.sitePath)
		if err != nil {
			return err
		}
		site = s
	}
	if err := site.Override(fs); err != nil {
		return usagef("%v", err)
	}
	o.site = site
	o.vision = site.Vision()
	o.tracker = site.Tracker()
	o.follow = site.Follow
	o.calib = site.Calibration.File
	o.stream = site.Outputs.Stream
	return nil
}

// clipResult is what one replayed clip produced.
type clipResult struct {
	clip   string
	log    string
	stats  pipeline.Stats
	sum    tracklog.Summary
	score  *score.Result
	took   time.Duration
	srcErr error
}

// replayClip runs one clip through the pipeline, writing the track log to
// logPath and, when videoPath is set, the annotated video. The log is
// complete (summary line included) even when the source fails part way; the
// source's error is returned in clipResult.srcErr and as the error.
func replayClip(ctx context.Context, clip, logPath, videoPath string, o *replayOptions, stderr io.Writer) (*clipResult, error) {
	src, err := capture.Open(clip)
	if err != nil {
		return nil, err
	}
	defer src.Close()
	info := src.Info()
	// A recording's sidecar gives the times the live run used.
	if vf, ok := src.(*capture.VideoFile); ok {
		if _, frames, err := record.ReadSidecarFull(record.SidecarPath(clip)); err == nil {
			vf.UseTimestamps(record.Times(frames))
			vf.UseEvents(record.Events(frames))
			info.Kind = "recording"
		}
	}

	mode, err := followMode(o.follow)
	if err != nil {
		return nil, err
	}
	det, closeDet, err := o.newDetector()
	if err != nil {
		return nil, err
	}
	defer closeDet()
	tcfg, err := o.trackerConfig()
	if err != nil {
		return nil, usagef("%v", err)
	}
	tr, err := guidance.NewTracker(tcfg)
	if err != nil {
		return nil, err
	}

	var floor pipeline.FloorMapper
	calibInfo := "none"
	if o.calib != "" {
		fm, err := loadFloor(o.calib, info.Size.X, info.Size.Y)
		if err != nil {
			return nil, err
		}
		floor, calibInfo = fm, o.calib
	}

	if err := os.MkdirAll(filepath.Dir(logPath), 0o755); err != nil {
		return nil, err
	}
	lf, err := os.Create(logPath)
	if err != nil {
		return nil, fmt.Errorf("track log: %w", err)
	}
	defer lf.Close()
	lw, err := tracklog.NewWriter(lf, tracklog.Header{
		Tool: "hewline " + version, Source: info.Name, Kind: info.Kind,
		Width: info.Size.X, Height: info.Size.Y, FPS: info.FPS, Follow: mode,
		Started: time.Now().UTC().Format(time.RFC3339),
		Settings: map[string]any{
			"fail_safe_after_s": tcfg.FailSafeAfter.Seconds(),
			"reacquire_for_s":   tcfg.ReacquireFor.Seconds(),
			"tracker":           tcfg.String(),
			"detector":          o.vision,
			"calibration":       calibInfo,
			"site":              o.site.File(),
			"cnn_fallback":      o.cnn,
			"cnn_model":         modelName(o),
			"cnn_cross_check":   o.cnnCheck,
		},
	})
	if err != nil {
		return nil, err
	}
	sinks := []pipeline.Sink{&pipeline.LogSink{W: lw}}
	var vs *pipeline.VideoSink
	if videoPath != "" {
		vs = &pipeline.VideoSink{Path: videoPath, FPS: info.FPS}
		defer vs.Close()
		sinks = append(sinks, vs)
	}
	var aud *pipeline.AudioSink
	if o.wav != "" {
		p, err := newWAVPlayer(o.wav)
		if err != nil {
			return nil, err
		}
		defer p.Close()
		aud = &pipeline.AudioSink{Player: p}
		sinks = append(sinks, aud)
	}
	var ss *pipeline.StreamSink
	if o.stream != "" {
		snd, err := ctlstream.NewUDP(o.stream, ctlstream.Options{})
		if err != nil {
			return nil, err
		}
		defer snd.Close()
		ss = &pipeline.StreamSink{Sender: snd}
		sinks = append(sinks, ss)
	}
	var bar *progressbar.ProgressBar
	if o.progress {
		bar = newBar(info, filepath.Base(clip), stderr)
		sinks = append(sinks, barSink{bar})
	}
	start := time.Now()
	st, runErr := pipeline.Run(ctx, src, pipeline.Config{Detector: det, Tracker: tr, Floor: floor, Sinks: sinks})
	if bar != nil {
		bar.Finish()
		fmt.Fprintln(stderr)
	}
	end := "eof"
	switch {
	case errors.Is(runErr, context.Canceled):
		end = "interrupted"
	case runErr != nil:
		end = "error: " + runErr.Error()
	}
	took := time.Since(start)
	extra := map[string]float64{"drops": float64(st.Drops), "size_changes": float64(st.SizeChanges), "wall_s": took.Seconds()}
	if aud != nil {
		tail := time.Second / 30
		if info.FPS > 0 {
			tail = time.Duration(float64(time.Second) / info.FPS)
		}
		if err := aud.Finish(tail); err != nil && runErr == nil {
			runErr = err
		}
		if err := aud.Player.Close(); err != nil && runErr == nil {
			runErr = err
		}
	}
	if ss != nil {
		extra["stream_refused"] = float64(ss.Refused)
	}
	extra["cnn_runs"], extra["cnn_used"], extra["cnn_disagreements"], extra["cnn_gated"] = float64(det.FallbackRuns), float64(det.FallbackUsed), float64(det.Disagreements), float64(det.FallbackGated)
	if err := lw.Close(end, extra); err != nil && runErr == nil {
		runErr = err
	}
	if vs != nil {
		vs.Close()
	}
	res := &clipResult{clip: clip, log: logPath, stats: st, sum: lw.Summary(), took: took, srcErr: runErr}
	return res, runErr
}

type barSink struct{ b *progressbar.ProgressBar }

func (s barSink) Frame(*pipeline.Result, gocv.Mat) error { return s.b.Add(1) }

func newBar(info capture.SourceInfo, name string, w io.Writer) *progressbar.ProgressBar {
	return progressbar.NewOptions(info.Frames,
		progressbar.OptionSetWriter(w),
		progressbar.OptionSetDescription(name),
		progressbar.OptionShowCount(),
		progressbar.OptionShowIts(),
		progressbar.OptionSetItsString("frames"),
		progressbar.OptionThrottle(100*time.Millisecond),
	)
}

// isTerminal reports whether w is a terminal (for the progress bar).
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

func modelName(o *replayOptions) string {
	switch {
	case !o.cnn:
		return "off"
	case o.cnnModel != "":
		return o.cnnModel
	}
	return "shipped stripe-rowanchor"
}

// floorMapper measures detections on the floor through a calibration.
type floorMapper struct {
	m   *calib.Mapper
	pts []calib.Pt
}

// loadFloor loads a calibration file and checks it against the frame size.
func loadFloor(path string, w, h int) (*floorMapper, error) {
	f, m, err := loadMapper(path)
	if err != nil {
		return nil, err
	}
	if err := f.CheckFrameSize(w, h); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return &floorMapper{m: m}, nil
}

// Floor implements pipeline.FloorMapper.
func (f *floorMapper) Floor(d vision.Detection) (pipeline.FloorValues, bool) {
	f.pts = f.pts[:0]
	for _, p := range d.Points {
		f.pts = append(f.pts, calib.Pt{X: p.X, Y: p.Y})
	}
	fm, err := f.m.Measure(f.pts, d.RefRow, d.WidthPx, 0)
	if err != nil || !fm.OK {
		return pipeline.FloorValues{}, false
	}
	fv := pipeline.FloorValues{OffsetMM: float64(fm.OffsetMM), HeadingDeg: float64(fm.HeadingDeg), WidthMM: float64(fm.WidthMM)}
	if d.Lane != nil && d.Lane.WidthPx > 0 {
		// The lane's width is measured like the stripe's, across the
		// centreline at the reference row.
		if lm, err := f.m.Measure(f.pts, d.RefRow, d.Lane.WidthPx, 0); err == nil && lm.OK {
			fv.LaneWidthMM, fv.LaneOK = float64(lm.WidthMM), true
		}
	}
	return fv, true
}

// newWAVPlayer makes an audio player whose one channel is a WAV file, a
// record of what the operator would have heard. In a replay nobody is
// listening, so the file stands in for the alarm channel.
func newWAVPlayer(path string) (*audio.Player, error) {
	const rate = 48000
	syn, err := audio.NewSynth(rate, audio.DefaultMapping(), audio.DefaultAlarm())
	if err != nil {
		return nil, err
	}
	w, err := audio.NewWAVSink(path, rate)
	if err != nil {
		return nil, err
	}
	p, err := audio.NewPlayer(syn, audio.PlayerConfig{}, audio.Channel{Name: path, Sink: w, Alarm: true})
	if err != nil {
		w.Close()
		return nil, err
	}
	return p, nil
}

// scoreClip scores a replayed clip's log against a truth file.
func scoreClip(name, logPath, truthPath string) (*score.Result, error) {
	h, frames, l, err := readLogAndTruth(logPath, truthPath)
	if err != nil {
		return nil, err
	}
	return score.Clip(name, h, frames, l.Records)
}

// readLogAndTruth reads the track log at logPath and the truth file at
// truthPath; errors name the file.
func readLogAndTruth(logPath, truthPath string) (truth.Header, []truth.Frame, *tracklog.Log, error) {
	tf, err := os.Open(truthPath)
	if err != nil {
		return truth.Header{}, nil, nil, fmt.Errorf("truth %s: %w", truthPath, err)
	}
	defer tf.Close()
	h, frames, err := truth.Read(tf)
	if err != nil {
		return truth.Header{}, nil, nil, fmt.Errorf("%s: %w", truthPath, err)
	}
	lf, err := os.Open(logPath)
	if err != nil {
		return truth.Header{}, nil, nil, err
	}
	defer lf.Close()
	l, err := tracklog.Read(lf)
	if err != nil {
		return truth.Header{}, nil, nil, fmt.Errorf("%s: %w", logPath, err)
	}
	return h, frames, l, nil
}

// printSummary writes a short human summary of one clip.
func printSummary(w io.Writer, r *clipResult) {
	s := r.sum
	fps := 0.0
	if r.took > 0 {
		fps = float64(s.Frames) / r.took.Seconds()
	}
	fmt.Fprintf(w, "%s: %d frames in %.2f s (%.0f frames/s); tracking %d (%.1f %%), alarm %d frames in %d alarm(s)",
		r.clip, s.Frames, r.took.Seconds(), fps, s.TrackingFrames, pct(s.TrackingFrames, s.Frames), s.AlarmFrames, s.Alarms)
	if r.stats.SizeChanges > 0 {
		fmt.Fprintf(w, "; %d frame-size changes", r.stats.SizeChanges)
	}
	fmt.Fprintf(w, "\n  track log: %s\n", r.log)
	if r.score != nil {
		sc := r.score
		fmt.Fprintf(w, "  against truth: recall %.3f, median error %.2f px, p95 %.2f px, false tracks %d, losses %d, max alarm latency %s, false alarms %d\n",
			sc.Recall(), sc.MedianError(), sc.P95Error(), sc.FalseTracks, sc.Losses, latency(sc), sc.FalseAlarms)
	}
}

func latency(sc *score.Result) string {
	l := sc.MaxLatency()
	switch {
	case sc.MissedAlarms > 0:
		return fmt.Sprintf("MISSED (%d)", sc.MissedAlarms)
	case l != l:
		return "– (no loss)"
	}
	return fmt.Sprintf("%.3f s", l)
}

func pct(a, b int) float64 {
	if b == 0 {
		return 0
	}
	return 100 * float64(a) / float64(b)
}

// clipBase is a clip's name without folder and extension.
func clipBase(clip string) string {
	b := filepath.Base(strings.TrimRight(clip, "/"))
	return strings.TrimSuffix(b, filepath.Ext(b))
}
