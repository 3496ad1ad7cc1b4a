package guidance

import (
	"fmt"
	"math"
	"time"
)

// Measurement is one frame's detector output as the tracker sees it.
type Measurement struct {
	// Valid is false when the detector found nothing in the frame.
	Valid bool
	// OffsetPx and HeadingDeg follow the conventions of package vision.
	OffsetPx, HeadingDeg float64
	// Confidence in [0, 1].
	Confidence float64
	// ReachPx, when HasReach is true, is how far the measured line
	// extends beyond the reference row toward its far end, in image rows:
	// positive when it reaches past the reference row, negative when it
	// ends short of it (the offset there would be an extrapolation). See
	// "Seeing the line end" at Tracker.
	ReachPx  float64
	HasReach bool
}

// Estimate is the tracker's answer for one instant. Only an Estimate with
// Tracking true may steer a vehicle or drive cues (see Decide).
type Estimate struct {
	// T is the time the estimate is for (the time passed in).
	T time.Duration
	// State is the tracking state after this call.
	State State
	// Tracking is true when the estimate may be used for guidance
	// (State Holding or Coasting).
	Tracking bool
	// Alarm is true when the fail-safe alarm must sound (State Lost or
	// Regaining).
	Alarm bool
	// OffsetPx, HeadingDeg: the filtered estimate at T; OffsetRate (px/s)
	// and HeadingRate (deg/s) their rates. Zero when there is no track
	// (Lost, or Seeking before the first measurement). Outside Holding
	// and Coasting they are for the log only.
	OffsetPx, HeadingDeg    float64
	OffsetRate, HeadingRate float64
	// Confidence in [0, 1]: the confidence of the last trusted
	// measurement while Holding, fading linearly to 0 over FailSafeAfter
	// while Coasting, and 0 in every untrusted state.
	Confidence float64
	// Gated is true when this frame's measurement was rejected by the
	// chi-square innovation gate.
	Gated bool
	// Measured is true when this frame's measurement was accepted into
	// the track. While Tracking without it (Coasting on a missing,
	// unsure or gated measurement) the estimate is the filter's
	// prediction alone.
	Measured bool
	// Reason says why the estimate is not Holding, or why the alarm is
	// on, e.g. "no trusted measurement for 0.31 s", "camera stalled: no
	// frame for 0.30 s". Empty while Holding normally.
	Reason string
}

// Tracker follows the stripe over time: a constant-velocity Kalman filter
// per channel (offset, heading), run as a small bank of process-noise
// levels so that a hard weave is followed and a smooth run keeps a narrow
// gate (ModelAccelFactors), a chi-square innovation gate, coasting
// through short dropouts and the fail-safe state machine described at
// State.
//
// Seeing the line end: coasting is for frames that cannot be read. When
// the measurements report how far the line reaches past the reference row
// (Measurement.ReachPx) and that reach has been shrinking steadily, the
// line is running out (its end, or a gap, coming toward the camera); the
// tracker then goes Lost as soon as the line ends short of the reference
// row, seen or extrapolated, instead of coasting for FailSafeAfter on a
// line that is no longer there. A dashed line's fitted far end stays far,
// so dashes do not trigger it; a single short detection is refused, never
// an alarm on its own (reach.go).
//
// Time is passed in as a time.Duration since any fixed origin (frame
// timestamps in replay, an injected Clock in live operation); it must not go
// backwards. A call with a time earlier than one already seen is handled as
// a fault: the tracker goes Lost with the Reason "time went backwards by
// …", keeps its latest time, and must then reacquire the line.
//
// A Tracker is not safe for concurrent use; the caller serialises Update,
// Tick and Fault (for example in the goroutine that reads frames, with the
// watchdog sending it ticks).
type Tracker struct {
	cfg      Config
	gate     float64 // chi-square 2-DOF quantile of cfg.GateProbability
	pxScale  float64 // frame width / RefWidthPx (SetFrameWidth); 1 until set
	rowScale float64 // frame height / RefHeightPx (SetFrameHeight); 1 until set

	state   State
	started bool
	last    time.Duration // latest time seen

	lastFrame   time.Duration // latest Update
	lastTrusted time.Duration // latest trusted measurement, or the start
	startT      time.Duration // first time seen since New or Reset
	conf        float64       // confidence of the latest trusted measurement
	note        string        // why the latest frame was not used
	lostReason  string        // why the fail-safe turned on

	bank    modelBank     // the filters: motion models compared on the measurements (models.go)
	reach   reachTrack    // how far the accepted lines reached (reach.go)
	filterT time.Duration // time the filter state refers to
	updateT time.Duration // time of the bank's latest update
	heldS   [2]float64    // innovation variances (offset, heading) of the gate that took the latest measurement while locked; 0: none

	// Acquisition run (Seeking, Regaining): measurements agreeing with
	// each other, with no gap longer than MaxFrameGap.
	runActive bool
	runStart  time.Duration
	runLast   time.Duration
	runFrames int // frames since runStart, usable or not
	runUsed   int // of them, measurements taken into the run
	runMisses int // unusable frames in a row at the run's end

	// Step candidate while locked: consecutive gate-rejected
	// measurements that agree with each other.
	cand      candidate
	lastGated bool
	measured  bool // this call's measurement was accepted
	consec    int  // consecutive accepted measurements while locked
}

// An acquisition run (Seeking, Regaining) survives a single unusable frame
// (a blurred or unsure one) between measurements that agree, but not
// acquireMaxMisses+1 in a row, and locks only when at least acquireMinShare
// of its frames brought a measurement that agreed with the run. A line
// that is read in most frames but blinks out in some (smeared dashes, a
// flickering lamp) is then regained in ReacquireFor; before, every such
// frame started the count again.
const (
	acquireMaxMisses = 1
	acquireMinShare  = 0.8
)

// holdAfter is how many consecutive accepted measurements take a Coasting
// track back to Holding: a little hysteresis so a measurement stream that
// alternates between usable and unusable frames stays Coasting instead of
// flipping state every frame (it is trusted either way).
const holdAfter = 2

type candidate struct {
	active    bool
	n         int
	misses    int // unusable frames in a row since its latest measurement
	off, head KalmanCV
	t         time.Duration
	reach     reachTrack // the reach of the measurements it followed
}

// NewTracker returns a Tracker in State Seeking, or the Validate error.
func NewTracker(cfg Config) (*Tracker, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	t := &Tracker{cfg: cfg}
	t.Reset()
	return t, nil
}

// State returns the current tracking state.
func (t *Tracker) State() State { return t.state }

// Config returns the settings in force.
func (t *Tracker) Config() Config { return t.cfg }

// Reset forgets everything: the tracker is Seeking again and the next call
// starts its clock.
func (t *Tracker) Reset() {
	cfg, s, rs := t.cfg, t.pxScale, t.rowScale
	if s <= 0 {
		s = 1
	}
	if rs <= 0 {
		rs = 1
	}
	*t = Tracker{
		cfg:      cfg,
		gate:     ChiSquareQuantile(cfg.GateProbability, 2),
		pxScale:  s,
		rowScale: rs,
	}
	t.cand.off = NewKalmanCV(cfg.OffsetAccel*s, cfg.OffsetNoisePx*s)
	t.cand.head = NewKalmanCV(cfg.HeadingAccel, cfg.HeadingNoiseDeg)
	t.bank.setNoise(cfg.OffsetAccel*s, cfg.OffsetNoisePx*s, cfg.HeadingAccel, cfg.HeadingNoiseDeg)
}

// RefWidthPx is the frame width at which Config's pixel settings
// (OffsetNoisePx, OffsetAccel, OffsetRateSigma) are given. The tracker
// scales them to the frame it is given (SetFrameWidth), so that one set of
// settings means the same at 160×120 and at 1280×720: a stripe's image
// moves, and its measurements scatter, in proportion to the frame.
const RefWidthPx = 640

// SetFrameWidth tells the tracker the width in pixels of the frames its
// measurements come from, and scales the pixel settings by w/RefWidthPx.
// Call it (and SetFrameHeight) before the first Update and whenever the
// frame size changes (a size change is a fault anyway: the track starts
// again). w ≤ 0 means RefWidthPx.
func (t *Tracker) SetFrameWidth(w int) {
	s := 1.0
	if w > 0 {
		s = float64(w) / RefWidthPx
	}
	if s == t.pxScale {
		return
	}
	t.pxScale = s
	t.cand.off.AccelSigma, t.cand.off.MeasSigma = t.cfg.OffsetAccel*s, t.cfg.OffsetNoisePx*s
	t.bank.setNoise(t.cfg.OffsetAccel*s, t.cfg.OffsetNoisePx*s, t.cfg.HeadingAccel, t.cfg.HeadingNoiseDeg)
}

// RefHeightPx is the frame height at which the tracker's settings in
// image rows (how far a line reaches, reach.go) are given.
const RefHeightPx = 480

// SetFrameHeight tells the tracker the height in pixels of the frames its
// measurements come from: the settings in image rows (a line's reach,
// Measurement.ReachPx) are scaled by h/RefHeightPx, as SetFrameWidth
// scales those across the image. h ≤ 0 means RefHeightPx.
func (t *Tracker) SetFrameHeight(h int) {
	t.rowScale = 1
	if h > 0 {
		t.rowScale = float64(h) / RefHeightPx
	}
}

// offsetRateSigma is OffsetRateSigma at the frame's width.
func (t *Tracker) offsetRateSigma() float64 { return t.cfg.OffsetRateSigma * t.pxScale }

// Update takes one frame's measurement taken at now. Call it once per
// frame, whether or not the detector found anything.
func (t *Tracker) Update(now time.Duration, m Measurement) Estimate {
	t.lastGated, t.measured = false, false
	if !t.advance(now) {
		return t.estimate(t.last)
	}
	t.checkTimers(now) // before lastFrame moves, so a stall is named as one
	t.lastFrame = now
	if t.state.Trusted() {
		t.updateLocked(now, m)
	} else {
		t.updateAcquiring(now, m)
	}
	return t.estimate(now)
}

// Tick reports that time now has come with no new frame. A watchdog calls
// it (for example every 50 ms) so that the fail-safe fires on time even
// when the camera stops delivering frames.
func (t *Tracker) Tick(now time.Duration) Estimate {
	t.lastGated, t.measured = false, false
	if !t.advance(now) {
		return t.estimate(t.last)
	}
	t.checkTimers(now)
	if t.state == Holding && now-t.lastTrusted > t.cfg.MaxFrameGap {
		t.state = Coasting
		t.consec = 0
		t.note = "no frame for " + secs(now-t.lastFrame)
	}
	return t.estimate(now)
}

// Fault reports an outside fault at now (camera gone, decoder error…): the
// fail-safe turns on at once with reason as the Reason, and the line must
// be reacquired for ReacquireFor before guidance resumes.
func (t *Tracker) Fault(now time.Duration, reason string) Estimate {
	t.lastGated, t.measured = false, false
	if t.advance(now) {
		t.toLost(reason)
	}
	return t.estimate(t.last)
}

// Predict returns where the stripe is expected at now, for the detector's
// hint: the predicted offset and heading and the 1-sigma spread of the
// next measurement around them (state uncertainty plus measurement noise).
// ok is false when there is no track to predict from (Lost, or nothing seen
// yet). Predict does not change the tracker.
func (t *Tracker) Predict(now time.Duration) (offset, heading, offsetSigma, headingSigma float64, ok bool) {
	if !t.bank.ready() || t.state == Lost {
		return 0, 0, 0, 0, false
	}
	dt := (now - t.filterT).Seconds()
	// The detector's prior comes from the smooth-running model (the
	// first of the bank), not from the model in use: its prediction is
	// steadier frame to frame. With the model in use as the prior, the
	// lane detector's one-boundary centre (which moves the previous
	// frame's boundaries by the prior's change) lost lane-s-curve at
	// 320x240 from 0.890 to 0.663; rolling-shutter costs 0.977 -> 0.950.
	b0 := t.bank.smooth()
	xo, po := b0.off.Predicted(dt)
	xh, ph := b0.head.Predicted(dt)
	offsetSigma = math.Sqrt(po[0][0] + b0.off.MeasSigma*b0.off.MeasSigma)
	headingSigma = math.Sqrt(ph[0][0] + b0.head.MeasSigma*b0.head.MeasSigma)
	return xo[0], xh[0], offsetSigma, headingSigma, true
}

// advance moves the tracker's clock to now. It returns false, after
// putting the tracker in Lost, when now is earlier than a time already
// seen.
func (t *Tracker) advance(now time.Duration) bool {
	if !t.started {
		t.started = true
		t.last, t.lastFrame, t.lastTrusted, t.filterT, t.startT = now, now, now, now, now
		return true
	}
	if now < t.last {
		t.toLost("time went backwards by " + (t.last - now).String())
		return false
	}
	t.last = now
	return true
}

// checkTimers applies the time limits before anything else happens at now,
// so a late frame can never hide a loss.
func (t *Tracker) checkTimers(now time.Duration) {
	switch t.state {
	case Seeking, Holding, Coasting:
		// Seeking also counts from the start: acquisition runs that keep
		// restarting (the line seen, but never steadily) must not keep
		// the alarm off for ever. A first lock takes ReacquireFor; allow
		// FailSafeAfter beyond that.
		if now-t.lastTrusted >= t.cfg.FailSafeAfter ||
			(t.state == Seeking && now-t.startT >= t.cfg.ReacquireFor+t.cfg.FailSafeAfter) {
			t.toLost(t.lossReason(now))
			return
		}
		if t.state == Seeking && t.runActive && now-t.runLast > t.cfg.MaxFrameGap {
			t.runActive = false
		}
	case Regaining:
		// Regaining falls back to Lost only when the line has not been
		// seen for MaxFrameGap; a single unusable frame restarts the
		// count but keeps the state (no chatter, the alarm is on anyway).
		if now-t.runLast > t.cfg.MaxFrameGap {
			t.runActive = false
			t.state = Lost
			t.bank.clear()
		}
	}
}

func (t *Tracker) lossReason(now time.Duration) string {
	switch {
	case now-t.lastFrame >= t.cfg.FailSafeAfter:
		return "camera stalled: no frame for " + secs(now-t.lastFrame)
	case t.state == Seeking:
		return "no lock for " + secs(now-t.startT) + " since start"
	case t.note != "":
		return "no trusted measurement for " + secs(now-t.lastTrusted) + " (" + t.note + ")"
	default:
		return "no trusted measurement for " + secs(now-t.lastTrusted)
	}
}

func (t *Tracker) toLost(reason string) {
	t.reach.reset()
	t.heldS = [2]float64{}
	t.state = Lost
	t.lostReason = reason
	t.runActive = false
	t.cand.active = false
	t.bank.clear()
	t.conf = 0
}

// usable says whether m may be used at all in the current state, and if
// not, why. A locked track accepts confidences down to HoldConfidence; an
// acquisition needs MinConfidence.
func (t *Tracker) usable(m Measurement) (bool, string) {
	if !m.Valid {
		return false, "no line in frame"
	}
	if !finite(m.OffsetPx) || !finite(m.HeadingDeg) || !finite(m.Confidence) {
		return false, "measurement not a finite number"
	}
	threshold := t.cfg.MinConfidence
	if t.state.Trusted() {
		threshold = t.cfg.HoldConfidence
	}
	if m.Confidence < threshold {
		return false, fmt.Sprintf("confidence %.2f below %.2f", m.Confidence, threshold)
	}
	if m.HasReach && m.ReachPx < 0 {
		return false, fmt.Sprintf("line ends %.0f rows short of the reference row", -m.ReachPx)
	}
	return true, ""
}

func (t *Tracker) updateLocked(now time.Duration, m Measurement) {
	t.predictTo(now)
	ok, why := t.usable(m)
	if !ok || (m.HasReach && m.ReachPx < t.aheadRows()) {
		if reason, ended := t.lineEnded(now, m, ok); ended {
			t.toLost(reason)
			return
		}
	}
	if !ok {
		t.state = Coasting
		t.consec = 0
		t.note = why
		// A step must show in consecutive frames, which may hold one
		// unusable frame between them, as an acquisition run may
		// (acquireMaxMisses). Right after a line stops sweeping, the
		// detector may rate the moved line below HoldConfidence in
		// every other frame: fisheye-tight at 640×480, frames 233–239,
		// "ambiguous" (the bend ahead read as a second line, with or
		// without the prediction as a prior) and "far from the
		// prediction" in turn.
		if t.cand.misses++; t.cand.misses > acquireMaxMisses {
			t.cand.active = false
		}
		return
	}
	d2 := t.gateNIS(m)
	if d2 <= t.gate {
		md := t.bank.use()
		_, so := md.off.Innovation(m.OffsetPx)
		_, sh := md.head.Innovation(m.HeadingDeg)
		t.heldS = [2]float64{so, sh}
		t.accept(now, m)
		t.cand.active = false
		return
	}
	t.lastGated = true
	t.state = Coasting
	t.consec = 0
	t.note = fmt.Sprintf("measurement rejected by gate (chi-square %.1f > %.2f)", d2, t.gate)
	t.stepCandidate(now, m)
}

// stepCandidate follows gate-rejected measurements with a second filter;
// when StepConfirmFrames of them in a row agree, the line really moved and
// the track jumps to the candidate.
func (t *Tracker) stepCandidate(now time.Duration, m Measurement) {
	c := &t.cand
	if c.active {
		dt := (now - c.t).Seconds()
		c.off.Predict(dt)
		c.head.Predict(dt)
		c.t = now
		if nis(&c.off, &c.head, m) <= t.gate {
			c.misses = 0
			c.off.Update(m.OffsetPx)
			c.head.Update(m.HeadingDeg)
			c.n++
			c.reach.add(now, m)
		} else {
			c.active = false
		}
	}
	if !c.active {
		c.active, c.n, c.misses, c.t = true, 1, 0, now
		c.off.Init(m.OffsetPx, t.offsetRateSigma())
		c.head.Init(m.HeadingDeg, t.cfg.HeadingRateSigma)
		c.reach.reset()
		c.reach.add(now, m)
	}
	if c.n >= t.cfg.StepConfirmFrames {
		// The re-locked track's reach trend is that of the measurements
		// that confirmed the step: a line that moved as it left the frame
		// (a fisheye's bend sweeping out at the side) is seen running
		// out from the next frame on, not after a new trend of
		// reachMinSamples (fisheye-tight at 1280×720: coasted over 8
		// frames, to the fail-safe's 0.3 s, with the reach reset here).
		t.reach.s = append(t.reach.s[:0], c.reach.s...)
		t.bank.adopt(c.off, c.head)
		t.heldS = [2]float64{}
		t.filterT, t.updateT = now, now
		c.active = false
		t.lastGated = false
		t.state = Holding
		t.consec = t.cfg.StepConfirmFrames
		t.lastTrusted = now
		t.conf = m.Confidence
		t.measured = true
		t.note = fmt.Sprintf("line moved: track re-locked after %d frames", t.cfg.StepConfirmFrames)
	}
}

func (t *Tracker) updateAcquiring(now time.Duration, m Measurement) {
	ok, why := t.usable(m)
	if !ok {
		t.note = why
		if t.runActive {
			t.runFrames++
			t.runMisses++
			if t.runMisses > acquireMaxMisses {
				t.runActive = false
			}
		}
		return
	}
	if !t.runActive || !t.bank.ready() {
		t.startRun(now, m)
		return
	}
	t.predictTo(now)
	md := t.bank.use()
	if d2 := nis(&md.off, &md.head, m); d2 > t.gate {
		// The run disagrees with itself: start again from the newest
		// measurement rather than lock onto either.
		t.lastGated = true
		t.note = fmt.Sprintf("measurement rejected by gate (chi-square %.1f > %.2f)", d2, t.gate)
		t.startRun(now, m)
		return
	}
	t.updateBank(now, m)
	t.runLast = now
	t.runFrames++
	t.runUsed++
	t.runMisses = 0
	t.lastTrusted = now
	t.conf = m.Confidence
	t.note = ""
	if now-t.runStart >= t.cfg.ReacquireFor && float64(t.runUsed) >= acquireMinShare*float64(t.runFrames) {
		t.lock(now, m)
	}
}

// startRun begins an acquisition run at m. The first measurement of a run
// does not count as trusted (it agrees with nothing yet), unless
// ReacquireFor is 0.
func (t *Tracker) startRun(now time.Duration, m Measurement) {
	t.bank.init(m, t.offsetRateSigma(), t.cfg.HeadingRateSigma)
	t.filterT, t.updateT = now, now
	t.runActive, t.runStart, t.runLast = true, now, now
	t.runFrames, t.runUsed, t.runMisses = 1, 1, 0
	if t.state == Lost {
		t.state = Regaining
	}
	if t.cfg.ReacquireFor == 0 {
		t.lock(now, m)
	}
}

func (t *Tracker) lock(now time.Duration, m Measurement) {
	t.reach.reset()
	t.heldS = [2]float64{}
	t.reach.add(now, m)
	t.state = Holding
	t.consec = holdAfter
	t.runActive = false
	t.lastTrusted = now
	t.conf = m.Confidence
	t.measured = true
	t.note = ""
	t.lostReason = ""
}

func (t *Tracker) accept(now time.Duration, m Measurement) {
	t.reach.add(now, m)
	t.updateBank(now, m)
	t.consec++
	if t.state == Holding || t.consec >= holdAfter {
		t.state = Holding
		t.note = ""
	} else {
		t.note = fmt.Sprintf("measurements back, %d of %d", t.consec, holdAfter)
	}
	t.lastTrusted = now
	t.conf = m.Confidence
	t.measured = true
}

func (t *Tracker) predictTo(now time.Duration) {
	dt := (now - t.filterT).Seconds()
	t.bank.predict(dt)
	t.filterT = now
}

// updateBank folds an accepted measurement into every motion model and
// takes the best one's state as the estimate.
func (t *Tracker) updateBank(now time.Duration, m Measurement) {
	t.bank.update(m, (now - t.updateT).Seconds())
	t.updateT = now
}

func (t *Tracker) estimate(now time.Duration) Estimate {
	e := Estimate{
		T:        now,
		State:    t.state,
		Tracking: t.state.Trusted(),
		Alarm:    t.state.Alarmed(),
		Gated:    t.lastGated,
		Measured: t.measured && t.state.Trusted(),
	}
	if md := t.bank.use(); md.off.Ready {
		dt := (now - t.filterT).Seconds()
		xo, _ := md.off.Predicted(dt)
		xh, _ := md.head.Predicted(dt)
		e.OffsetPx, e.OffsetRate = xo[0], xo[1]
		e.HeadingDeg, e.HeadingRate = xh[0], xh[1]
	}
	switch t.state {
	case Holding:
		e.Confidence = t.conf
		e.Reason = t.note
	case Coasting:
		fade := 1 - float64(now-t.lastTrusted)/float64(t.cfg.FailSafeAfter)
		e.Confidence = t.conf * math.Max(0, fade)
		e.Reason = "coasting: " + t.note
	case Seeking:
		e.Reason = "no lock yet"
		if t.runActive {
			e.Reason = fmt.Sprintf("acquiring: line seen for %s of %s", secs(now-t.runStart), secs(t.cfg.ReacquireFor))
		} else if t.note != "" {
			e.Reason = "no lock yet: " + t.note
		}
	case Lost:
		e.Reason = t.lostReason
	case Regaining:
		if t.runActive {
			e.Reason = fmt.Sprintf("regaining: line seen for %s of %s after %s",
				secs(now-t.runStart), secs(t.cfg.ReacquireFor), t.lostReason)
		} else {
			e.Reason = fmt.Sprintf("regaining: count restarted (%s) after %s", t.note, t.lostReason)
		}
	}
	return e
}

// nis is the normalised innovation squared of m against the two channel
// filters: chi-square with 2 degrees of freedom when the filters are right.
func nis(off, head *KalmanCV, m Measurement) float64 {
	no, so := off.Innovation(m.OffsetPx)
	nh, sh := head.Innovation(m.HeadingDeg)
	return no*no/so + nh*nh/sh
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func secs(d time.Duration) string { return fmt.Sprintf("%.2f s", d.Seconds()) }
