package pipeline

import (
	"fmt"
	"math"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/vision"
)

// Methods a fused measurement can carry in Detection.Method (and so in
// the track log's method), besides the detectors' own names ("classical",
// "cnn").
const (
	// MethodFused: both detectors found the stripe and agree; the
	// position is the primary's, which is the more precise.
	MethodFused = "fused"
	// MethodDisputed prefixes the detector whose position was kept when
	// the two disagree ("disputed:classical", "disputed:cnn"); the
	// confidence is halved.
	MethodDisputed = "disputed:"
)

// Fused runs the classical detector on every frame and a fallback (the
// CNN) when the classical one is unsure, plus, optionally, every
// CrossCheck-th frame as a cross-check.
//
// The fallback is a second opinion, never a source of a track of its own.
// The rule, in order:
//   - classical confidence ≥ Threshold and no cross-check due: the
//     classical measurement, untouched (Method "classical");
//   - otherwise the fallback runs. A fallback measurement counts only when
//     the tracker predicts the line (hint.Valid: there is a track) and the
//     fallback's offset and heading lie within GateSigmas of that
//     prediction (at least AgreePx in offset). Without a track, or far
//     from its prediction, the fallback's answer is dropped and the
//     classical one returned as it is; Reason says why.
//   - both found the stripe and their offsets at the classical reference
//     row agree within AgreePx (scaled with the frame width from 640 px):
//     "fused", the classical position with the better of the two
//     confidences (the fallback's capped, see below). The fallback's
//     confidence counts only when the classical line covers three
//     quarters of the frame's lower half and the fallback sees the line
//     on its own rows there (see near rows below); otherwise the classical
//     confidence stands: agreeing on where a line is says nothing about
//     whether it goes on, and the classical detector's confidence falls
//     as a line's end comes near;
//   - they disagree, and the image shows the fallback's line on its near
//     rows (see near rows below): "disputed:classical" or "disputed:cnn",
//     whichever is nearer the prediction (the fallback only if it passed
//     the gate), with its confidence halved: two detectors that disagree
//     are not to be trusted. A fallback reading the image does not show
//     is dropped and the classical measurement stands: the network
//     carries a line on across a dash gap at full confidence, where the
//     image shows nothing;
//   - classical found nothing and the fallback's measurement passed the
//     gate and covers at least three quarters of the lower half of the
//     frame (the rows guidance steers by; a line that ends or starts in
//     them is for the classical detector to judge) and it sees the line on
//     its near rows: the fallback's measurement (Method "cnn"). The
//     fallback bridges
//     one unbroken stretch only: the first frame in which classical finds
//     nothing and the fallback has no measurement that passes the gate
//     ends the bridge, and the fallback is not used alone again until the
//     classical detector is confident (≥ Threshold) once more. A bridge
//     that has started to fail is not trusted to recover by itself, and
//     no bridge lasts longer than MaxBridge frames.
//
// Near rows: a fallback that reads the frame in rows (rowCoverage, the
// CNN) must see the line, with the image showing it there, on at least
// MinNearSeen of its rows in the frame's lower half. The network reads
// rows in context and carries a line on across a gap or past its end at
// full confidence; only rows where the image shows the stripe count.
//
// Any confidence that rests on the fallback is capped at MaxFallbackConf.
// Set it below the tracker's MinConfidence (the acquisition threshold) and
// above its HoldConfidence: then the fallback can carry a locked track
// through a hard stretch, but it can never start one or regain one after
// a loss: that takes the classical detector. The tracker's fail-safe
// timer still runs on trusted measurements only.
type Fused struct {
	Primary, Fallback Detector
	// Threshold is the classical confidence below which the fallback
	// runs (default 0.5).
	Threshold float64
	// CrossCheck > 0 also runs the fallback every CrossCheck-th frame.
	CrossCheck int
	// AgreePx is the largest offset difference at 640 px width that still
	// counts as agreement (default 10, the scoring tolerance).
	AgreePx float64
	// GateSigmas is how many of the prediction's standard deviations
	// (hint.OffsetSigma, hint.HeadingSigma) a fallback measurement may
	// lie from the prediction (default 3).
	GateSigmas float64
	// MaxFallbackConf caps the confidence of a measurement resting on the
	// fallback (default 0.45, between the tracker's default
	// HoldConfidence 0.4 and MinConfidence 0.5).
	MaxFallbackConf float64
	// MaxBridge is the most consecutive frames the fallback may carry the
	// track alone (default 30: one second at 30 frames/s).
	MaxBridge int
	// MinNearSeen is the least share of a row-reading fallback's rows in
	// the frame's lower half that must see the line for its measurement
	// or its confidence to count (default 1: all of them).
	MinNearSeen float64

	n int
	// broken is set when a bridge on the fallback alone failed, until the
	// classical detector is confident again.
	broken bool
	bridge int // consecutive frames carried by the fallback alone
	// Counters for the summary: fallback runs, measurements taken from
	// it (Method "cnn", "fused" with its confidence, "disputed:cnn"),
	// disagreements, and fallback measurements dropped by the gate.
	FallbackRuns, FallbackUsed, Disagreements, FallbackGated int
}

func (f *Fused) defaults() (thr, agree, gate, capConf float64) {
	thr, agree, gate, capConf = f.Threshold, f.AgreePx, f.GateSigmas, f.MaxFallbackConf
	if thr <= 0 {
		thr = 0.5
	}
	if agree <= 0 {
		agree = 10
	}
	if gate <= 0 {
		gate = 3
	}
	if capConf <= 0 {
		capConf = 0.45
	}
	return
}

// rowCoverage is what Fused asks of a fallback that reads the frame in
// rows (cnn.Detector): the share of its rows between frame rows y0 and y1
// on which its last Detect saw the line, with the image showing it there.
type rowCoverage interface {
	Coverage(y0, y1 float64) float64
}

// nearSeen reports whether the fallback's last measurement sees the line
// on enough of its rows in the lower half of a frame h rows high; true
// for a fallback that does not read rows.
func (f *Fused) nearSeen(h float64) bool {
	rc, ok := f.Fallback.(rowCoverage)
	if !ok {
		return true
	}
	need := f.MinNearSeen
	if need <= 0 || need > 1 {
		need = 1
	}
	return rc.Coverage(h/2, h) >= need-1e-9
}

// Detect implements Detector.
func (f *Fused) Detect(img gocv.Mat, hint vision.Hint) vision.Detection {
	f.n++
	d := f.Primary.Detect(img, hint)
	if f.Fallback == nil {
		return d
	}
	thr, agree, gateK, capConf := f.defaults()
	unsure := !d.Found || d.Confidence < thr
	if !unsure {
		f.broken = false
	}
	if d.Found {
		f.bridge = 0
	}
	cross := f.CrossCheck > 0 && f.n%f.CrossCheck == 0
	if !unsure && !cross {
		return d
	}
	f.FallbackRuns++
	c := f.Fallback.Detect(img, hint)
	if !c.Found {
		if !d.Found {
			f.broken = true
		}
		return d
	}
	c.Confidence = math.Min(c.Confidence, capConf)
	half := float64(img.Cols()) / 2
	tol := agree * float64(img.Cols()) / 640

	// The gate: the fallback counts only near the tracker's prediction.
	gated, why := true, "no track to check it against"
	if hint.Valid {
		dOff := math.Abs(c.OffsetPx - hint.OffsetPx)
		dHead := math.Abs(c.HeadingDeg - hint.HeadingDeg)
		offTol := math.Max(gateK*hint.OffsetSigma, tol)
		headTol := gateK * hint.HeadingSigma
		switch {
		case dOff > offTol:
			why = fmt.Sprintf("%.0f px from the prediction (gate %.0f px)", dOff, offTol)
		case dHead > headTol:
			why = fmt.Sprintf("heading %.1f° from the prediction (gate %.1f°)", dHead, headTol)
		default:
			gated = false
		}
	}

	if d.Found {
		// Compare where the classical one measured: the fallback's line
		// at the same row (its own RefRow may differ).
		cx, ok := xAt(c.Points, d.RefRow)
		if !ok {
			cx = c.OffsetPx + half
		}
		diff := math.Abs(d.OffsetPx + half - cx)
		if diff <= tol {
			use := d
			use.Method = MethodFused
			if c.Confidence > d.Confidence {
				if coversNear(d.Points, float64(img.Rows())) && f.nearSeen(float64(img.Rows())) {
					use.Confidence = c.Confidence
					f.FallbackUsed++
				} else {
					use.Reason = joinReason(use.Reason, "cnn agrees but its confidence does not count: the line is not seen over the near half")
				}
			}
			return use
		}
		// A reading the image does not show on its near rows (the
		// network carrying a line on across a dash gap or past a line's
		// end) is no evidence against the classical line: dropped, the
		// classical measurement stands.
		if !f.nearSeen(float64(img.Rows())) {
			f.FallbackGated++
			d.Reason = joinReason(d.Reason, fmt.Sprintf("cnn ignored (%.0f px off): the image does not show its line on all its near rows", diff))
			return d
		}
		f.Disagreements++
		use, who := d, d.Method
		if !gated && (!hint.Valid || math.Abs(c.OffsetPx-hint.OffsetPx) < math.Abs(d.OffsetPx-hint.OffsetPx)) {
			use, who = c, c.Method
			f.FallbackUsed++
		}
		use.Method = MethodDisputed + who
		use.Confidence /= 2
		use.Reason = fmt.Sprintf("classical and cnn disagree by %.0f px; kept %s", diff, who)
		return use
	}
	maxBridge := f.MaxBridge
	if maxBridge <= 0 {
		maxBridge = 30
	}
	switch {
	case gated:
	case !coversNear(c.Points, float64(img.Rows())):
		gated, why = true, "it does not see the line over the near half of the frame"
	case !f.nearSeen(float64(img.Rows())):
		gated, why = true, "the image does not show the line on all its near rows"
	case f.broken:
		gated, why = true, "the bridge on the cnn alone failed; waiting for a confident classical measurement"
	case f.bridge >= maxBridge:
		gated, why = true, fmt.Sprintf("the cnn alone carried the track for %d frames, the most allowed", f.bridge)
	}
	if gated {
		f.FallbackGated++
		f.broken = true
		d.Reason = joinReason(d.Reason, "cnn ignored: "+why)
		return d
	}
	f.FallbackUsed++
	f.bridge++
	return c
}

// coversNear reports whether the centreline pts reach from the bottom
// eighth of a frame h rows high up to at least 5/8 of its height: three
// quarters of its lower half.
func coversNear(pts []vision.Point, h float64) bool {
	if len(pts) == 0 {
		return false
	}
	lo, hi := pts[0].Y, pts[0].Y
	for _, p := range pts {
		lo, hi = math.Min(lo, p.Y), math.Max(hi, p.Y)
	}
	return hi >= 0.875*h && lo <= 0.625*h
}

func joinReason(a, b string) string {
	if a == "" {
		return b
	}
	return a + "; " + b
}

// xAt interpolates a centreline's x at row y; false outside its rows.
func xAt(pts []vision.Point, y float64) (float64, bool) {
	for i := 1; i < len(pts); i++ {
		a, b := pts[i-1], pts[i]
		if (y-a.Y)*(y-b.Y) > 0 {
			continue
		}
		if a.Y == b.Y {
			return (a.X + b.X) / 2, true
		}
		return a.X + (y-a.Y)/(b.Y-a.Y)*(b.X-a.X), true
	}
	return 0, false
}
