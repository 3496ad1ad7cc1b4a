package pipeline

import (
	"context"
	"errors"
	"fmt"
	"io"
	"time"

	"gocv.io/x/gocv"
	"golang.org/x/sync/errgroup"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/vision"
)

// Source is a frame source. Read decodes the next frame into dst (which the
// source may reallocate but must not retain) and returns io.EOF at the end.
type Source interface {
	Read(dst *gocv.Mat) (capture.FrameInfo, error)
}

// Detector measures the stripe in one frame. It must not retain img.
type Detector interface {
	Detect(img gocv.Mat, hint vision.Hint) vision.Detection
}

// Sink receives every processed frame, in order. It must not retain img or
// r after Frame returns. An error from a sink stops the run.
type Sink interface {
	Frame(r *Result, img gocv.Mat) error
}

// Result is one frame's outcome.
type Result struct {
	Info capture.FrameInfo
	// Det is the detector's raw measurement.
	Det vision.Detection
	// Est is the tracker's estimate after this frame.
	Est guidance.Estimate
	// Cue is what outputs may do with Est (guidance.Decide).
	Cue guidance.CueDecision
	// Floor holds floor-plane values when a calibration is in force.
	Floor *FloorValues
	// Captured is the wall time the frame was read (live), Decided the
	// time its estimate was ready.
	Captured, Decided time.Time
}

// FloorValues are the calibrated measurements of one frame.
type FloorValues struct {
	OffsetMM, HeadingDeg, WidthMM float64
}

// FloorMapper turns a detection into floor values; nil means uncalibrated.
type FloorMapper interface {
	Floor(d vision.Detection) (FloorValues, bool)
}

// Config wires the stages.
type Config struct {
	Detector Detector
	Tracker  *guidance.Tracker
	Floor    FloorMapper
	Sinks    []Sink
	// Live drops stale frames instead of processing every frame.
	Live bool
	// Now gives wall time for the latency fields (default time.Now).
	Now func() time.Time
}

// Stats counts what happened in a run.
type Stats struct {
	Frames int // frames processed
	Drops  int // frames dropped in live mode
	// SizeChanges counts frames whose size differed from the frame before.
	SizeChanges int
}

type item struct {
	mat *gocv.Mat
	res Result
}

// poolSize Mats are enough for one frame in every stage and channel slot.
const poolSize = 6

// Run processes src until it ends, ctx is cancelled or a stage fails. It
// returns the source's error (nil at io.EOF) after every frame read before
// it has gone through all stages, so that logs lose nothing.
func Run(ctx context.Context, src Source, cfg Config) (Stats, error) {
	if cfg.Detector == nil || cfg.Tracker == nil {
		return Stats{}, errors.New("pipeline: detector and tracker are required")
	}
	now := cfg.Now
	if now == nil {
		now = time.Now
	}
	mats := make([]gocv.Mat, poolSize)
	free := make(chan *gocv.Mat, poolSize)
	for i := range mats {
		mats[i] = gocv.NewMat()
		free <- &mats[i]
	}
	defer func() {
		for i := range mats {
			mats[i].Close()
		}
	}()

	var st Stats
	var srcErr error
	frames := make(chan item, 1)
	results := make(chan item, 1)
	g, gctx := errgroup.WithContext(ctx)

	// Stage 1: read frames.
	g.Go(func() error {
		defer close(frames)
		for {
			var m *gocv.Mat
			select {
			case m = <-free:
			case <-gctx.Done():
				return nil
			}
			fi, err := src.Read(m)
			if err != nil {
				free <- m
				if !errors.Is(err, io.EOF) {
					srcErr = err
				}
				return nil
			}
			it := item{mat: m, res: Result{Info: fi, Captured: now()}}
			if cfg.Live {
				// Drop the stale frame still waiting, if any.
				select {
				case old := <-frames:
					free <- old.mat
					st.Drops++
				default:
				}
			}
			select {
			case frames <- it:
			case <-gctx.Done():
				free <- m
				return nil
			}
		}
	})

	// Stage 2: detect and track.
	g.Go(func() error {
		defer close(results)
		var last capture.FrameInfo
		first := true
		for it := range frames {
			r := &it.res
			if !first && r.Info.Size != last.Size {
				st.SizeChanges++
				cfg.Tracker.Fault(r.Info.T, fmt.Sprintf("frame size changed from %dx%d to %dx%d", last.Size.X, last.Size.Y, r.Info.Size.X, r.Info.Size.Y))
			}
			first, last = false, r.Info
			var hint vision.Hint
			if off, head, so, sh, ok := cfg.Tracker.Predict(r.Info.T); ok {
				hint = vision.Hint{Valid: true, OffsetPx: off, HeadingDeg: head, OffsetSigma: so, HeadingSigma: sh}
			}
			r.Det = cfg.Detector.Detect(*it.mat, hint)
			r.Est = cfg.Tracker.Update(r.Info.T, guidance.Measurement{
				Valid: r.Det.Found, OffsetPx: r.Det.OffsetPx, HeadingDeg: r.Det.HeadingDeg, Confidence: r.Det.Confidence,
			})
			r.Cue = guidance.Decide(r.Est)
			if cfg.Floor != nil && r.Det.Found {
				if fv, ok := cfg.Floor.Floor(r.Det); ok {
					r.Floor = &fv
				}
			}
			r.Decided = now()
			select {
			case results <- it:
			case <-gctx.Done():
				free <- it.mat
				drain(frames, free)
				return gctx.Err()
			}
		}
		return nil
	})

	// Stage 3: outputs.
	g.Go(func() error {
		for it := range results {
			for _, s := range cfg.Sinks {
				if err := s.Frame(&it.res, *it.mat); err != nil {
					free <- it.mat
					drain(results, free)
					return err
				}
			}
			st.Frames++
			free <- it.mat
		}
		return nil
	})

	err := g.Wait()
	if err != nil && !errors.Is(err, context.Canceled) {
		return st, err
	}
	if ctx.Err() != nil {
		return st, ctx.Err()
	}
	return st, srcErr
}

// drain returns every Mat still queued in ch to the pool.
func drain(ch <-chan item, free chan<- *gocv.Mat) {
	for it := range ch {
		free <- it.mat
	}
}
