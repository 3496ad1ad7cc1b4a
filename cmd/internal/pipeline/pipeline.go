package pipeline

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"sync"
	"sync/atomic"
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
	// Predicted is the centreline guidance runs on when it is tracking on
	// the filter's prediction alone (Est.Tracking without Est.Measured):
	// the last accepted line moved with the filtered offset and heading.
	// Nil when this frame's measurement was used or there is no track.
	// It is the result's own: a sink may keep it.
	Predicted []vision.Point
	// Floor holds floor-plane values when a calibration is in force.
	Floor *FloorValues
	// Captured is the wall time the frame was read (live), Decided the
	// time its estimate was ready.
	Captured, Decided time.Time
	// TrackT is the time the tracker was given for this frame: the
	// frame's timestamp in replay, the clock in live mode. A recording
	// keeps it, so that replaying the recording repeats the decisions.
	TrackT time.Duration
	// Tick marks a watchdog result: no frame, no image, no detection;
	// Info is the last frame's.
	Tick bool
	// Drops is the number of frames the live pipeline had dropped as
	// stale when this result was made (Stats.Drops so far), so that a
	// sink can show the count while the run goes on.
	Drops int
}

// FloorValues are the calibrated measurements of one frame. In lane mode
// LaneWidthMM is the lane's width (LaneOK when it could be mapped).
type FloorValues struct {
	OffsetMM, HeadingDeg, WidthMM float64
	LaneWidthMM                   float64
	LaneOK                        bool
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
	// Live drops stale frames instead of processing every frame, and
	// times the tracker by the clock (Now) rather than by frame
	// timestamps, so that frames and watchdog ticks share one time base.
	Live bool
	// Watchdog (live only) is how often the tracker is ticked when no
	// frame arrives, so that a stalled source raises the fail-safe on
	// time; each tick goes to the sinks as a Result with Tick set and no
	// image. 0 turns it off.
	Watchdog time.Duration
	// Transient (live only) says whether a source error is one to ride
	// out (a camera stall or loss being reopened): the tracker is faulted
	// at once with the error as the reason and reading goes on. Other
	// errors end the run.
	Transient func(error) bool
	// Now gives wall time for the latency fields (default time.Now).
	Now func() time.Time
}

// Stats counts what happened in a run.
type Stats struct {
	Frames int // frames processed
	Drops  int // frames dropped in live mode
	// SizeChanges counts frames whose size differed from the frame before.
	SizeChanges int
	// Faults counts transient source errors ridden out (live).
	Faults int
	// Ticks counts watchdog results sent to the sinks.
	Ticks int
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
	var drops atomic.Int64 // st.Drops, readable by the watchdog
	var srcErr error
	frames := make(chan item, 1)
	results := make(chan item, 1)
	ticks := make(chan Result, 1)
	tk := &trackerClock{tr: cfg.Tracker, live: cfg.Live, now: now, start: now()}
	g, gctx := errgroup.WithContext(ctx)
	detectDone := make(chan struct{})

	// Watchdog (live): tick the tracker while no frame comes.
	if cfg.Live && cfg.Watchdog > 0 {
		g.Go(func() error {
			t := time.NewTicker(cfg.Watchdog)
			defer t.Stop()
			for {
				select {
				case <-gctx.Done():
					return nil
				case <-detectDone:
					return nil
				case <-t.C:
				}
				r, ok := tk.tick(cfg.Watchdog)
				if !ok {
					continue
				}
				r.Drops = int(drops.Load())
				select {
				case ticks <- r:
				default: // the sinks still have the previous tick: skip
				}
			}
		})
	}

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
			if err != nil && cfg.Live && cfg.Transient != nil && !errors.Is(err, io.EOF) && cfg.Transient(err) {
				free <- m
				st.Faults++
				tk.fault(err.Error())
				continue
			}
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
					drops.Add(1)
				default:
				}
				it.res.Drops = st.Drops
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
		defer close(detectDone)
		defer close(results)
		var last capture.FrameInfo
		var pred predictor
		first := true
		for it := range frames {
			r := &it.res
			if !first && r.Info.Size != last.Size {
				st.SizeChanges++
				tk.fault(fmt.Sprintf("frame size changed from %dx%d to %dx%d", last.Size.X, last.Size.Y, r.Info.Size.X, r.Info.Size.Y))
			}
			if first || r.Info.Size != last.Size {
				tk.frameSize(r.Info.Size.X, r.Info.Size.Y)
			}
			first, last = false, r.Info
			if !cfg.Live {
				tk.replay(r.Info.Before)
			}
			hint := tk.hint(r)
			r.Det = cfg.Detector.Detect(*it.mat, hint)
			m := guidance.Measurement{
				Valid: r.Det.Found, OffsetPx: r.Det.OffsetPx, HeadingDeg: r.Det.HeadingDeg, Confidence: r.Det.Confidence,
			}
			m.ReachPx, m.HasReach = reach(r.Det)
			r.Est = tk.update(r, m)
			r.Cue = guidance.Decide(r.Est)
			r.Predicted = pred.next(r.Det, r.Est)
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
		empty := gocv.NewMat()
		defer empty.Close()
		for {
			select {
			case r := <-ticks:
				st.Ticks++
				for _, s := range cfg.Sinks {
					if err := s.Frame(&r, empty); err != nil {
						drain(results, free)
						return err
					}
				}
			case it, ok := <-results:
				if !ok {
					return nil
				}
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
		}
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

// trackerClock serialises the tracker between the frame stage and the
// watchdog, and gives it its time: frame timestamps in replay, the clock
// in live mode.
type trackerClock struct {
	mu        sync.Mutex
	tr        *guidance.Tracker
	live      bool
	now       func() time.Time
	start     time.Time
	lastFrame time.Time
	last      Result
	// pending (live) collects the ticks and faults since the last frame;
	// update hands them to that frame's Info.Before, so that a recording
	// keeps them and its replay repeats them.
	pending []capture.TrackerEvent
}

func (c *trackerClock) at(r *Result) time.Duration {
	if c.live {
		return c.now().Sub(c.start)
	}
	return r.Info.T
}

func (c *trackerClock) hint(r *Result) vision.Hint {
	c.mu.Lock()
	defer c.mu.Unlock()
	if off, head, so, sh, ok := c.tr.Predict(c.at(r)); ok {
		return vision.Hint{Valid: true, OffsetPx: off, HeadingDeg: head, OffsetSigma: so, HeadingSigma: sh}
	}
	return vision.Hint{}
}

func (c *trackerClock) update(r *Result, m guidance.Measurement) guidance.Estimate {
	c.mu.Lock()
	defer c.mu.Unlock()
	r.TrackT = c.at(r)
	e := c.tr.Update(r.TrackT, m)
	c.lastFrame = c.now()
	if c.live {
		r.Info.Before, c.pending = c.pending, nil
	}
	info := r.Info
	info.Before = nil
	c.last = Result{Info: info, Tick: true}
	return e
}

// frameSize scales the tracker's pixel settings to the frames' width and
// its row settings to their height.
func (c *trackerClock) frameSize(w, h int) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.tr.SetFrameWidth(w)
	c.tr.SetFrameHeight(h)
}

// replay (replay only) tells the tracker what a recorded live run's
// tracker was told before this frame: its watchdog ticks and faults.
func (c *trackerClock) replay(events []capture.TrackerEvent) {
	c.mu.Lock()
	defer c.mu.Unlock()
	for _, e := range events {
		if e.Fault != "" {
			c.tr.Fault(e.T, e.Fault)
		} else {
			c.tr.Tick(e.T)
		}
	}
}

func (c *trackerClock) fault(reason string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	t := c.last.Info.T
	if c.live {
		t = c.now().Sub(c.start)
		c.pending = append(c.pending, capture.TrackerEvent{T: t, Fault: reason})
	}
	c.tr.Fault(t, reason)
}

// tick ticks the tracker when no frame came for one watchdog period and
// returns the result for the sinks.
func (c *trackerClock) tick(period time.Duration) (Result, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	now := c.now()
	if !c.lastFrame.IsZero() && now.Sub(c.lastFrame) < period {
		return Result{}, false
	}
	r := c.last
	r.Tick = true // also before the first frame, when c.last is empty
	t := now.Sub(c.start)
	r.Est = c.tr.Tick(t)
	if c.live {
		c.pending = append(c.pending, capture.TrackerEvent{T: t})
	}
	r.Cue = guidance.Decide(r.Est)
	r.Captured, r.Decided = time.Time{}, now
	return r, true
}

// reach is how far the detected line extends beyond the reference row
// toward the far end (image rows, negative when it ends short of the row),
// for guidance.Measurement.ReachPx (in lane mode the lane detector's
// LaneMeasure.ReachPx). ok is false without a line.
func reach(d vision.Detection) (rows float64, ok bool) {
	if !d.Found || len(d.Points) == 0 {
		return 0, false
	}
	if d.Lane != nil {
		// the lane's centre is fitted across gaps in both lines: the
		// lane detector measures the reach from the lines' support
		return d.Lane.ReachPx, true
	}
	if d.HasReach {
		// the near mark's end, ahead of a stretch too long to bridge
		return d.ReachPx, true
	}
	top := d.Points[0].Y
	for _, p := range d.Points[1:] {
		top = math.Min(top, p.Y)
	}
	return d.RefRow - top, true
}
