package vision

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"gocv.io/x/gocv"
)

// MethodLane is Detection.Method of the lane detector.
const MethodLane = "lane"

// LaneConfig holds the lane detector's settings beyond the Config it
// shares with the stripe detector.
type LaneConfig struct {
	// LearnRate is the weight of one frame's measured width in the
	// learned lane width, per row band (default 0.5: the width seen in a
	// curve changes within a second, and the fitted boundaries are smooth
	// enough to need little averaging).
	LearnRate float64
	// OneSideFactor multiplies the confidence when the centre comes from
	// one boundary and the learned width (default 0.6).
	OneSideFactor float64
	// MaxSaturated is the largest share of saturated candidates a
	// boundary may have; a line made mostly of clipped pixels is taken for
	// a mirrored lamp, not tape (default 0.5).
	MaxSaturated float64
	// WidthPx is the lane's width, centre to centre of its lines, in
	// input pixels along the reference row with the vehicle straight in
	// the lane (0: learned). Without a calibration it replaces the learned
	// width once the horizon is learned (both lines seen for a moment),
	// and pairs of lines whose width is far from it are no lane.
	WidthPx float64
	// WidthMM is the lane's width on the floor, centre to centre of its
	// lines, in millimetres (0: learned). It needs Floor.
	WidthMM float64
	// Floor is the floor calibration (nil: none). With it the centre is
	// inferred from one line on the floor itself: half the lane's width
	// (WidthMM, or the width learned on the floor) along the line's
	// normal. The Lane only reads it.
	Floor FloorPlane
}

// FloorPlane is a floor calibration both ways: FloorMap, and the raw
// image pixel of a floor point (millimetres, forward and right), ok false
// behind the camera. calib.Mapper provides both.
type FloorPlane interface {
	FloorMap
	ToImageMM(forward, right float64) (x, y float64, ok bool)
}

// DefaultLaneConfig returns the settings described on each field.
func DefaultLaneConfig() LaneConfig {
	return LaneConfig{LearnRate: 0.5, OneSideFactor: 0.6, MaxSaturated: 0.5}
}

// Validate reports the first setting that cannot work.
func (lc LaneConfig) Validate() error {
	var errs []error
	if !(lc.LearnRate > 0 && lc.LearnRate <= 1) {
		errs = append(errs, fmt.Errorf("vision: lane learn rate %v: want (0, 1]", lc.LearnRate))
	}
	if !(lc.OneSideFactor > 0 && lc.OneSideFactor < 1) {
		errs = append(errs, fmt.Errorf("vision: lane one-side factor %v: want (0, 1)", lc.OneSideFactor))
	}
	if !(lc.MaxSaturated >= 0 && lc.MaxSaturated <= 1) {
		errs = append(errs, fmt.Errorf("vision: lane max saturated share %v: want [0, 1]", lc.MaxSaturated))
	}
	if !(lc.WidthPx >= 0 && lc.WidthPx < 1e5) {
		errs = append(errs, fmt.Errorf("vision: lane width %v px: want 0 (learned) or a positive width", lc.WidthPx))
	}
	if !(lc.WidthMM >= 0 && lc.WidthMM < 1e5) {
		errs = append(errs, fmt.Errorf("vision: lane width %v mm: want 0 (learned) or a positive width", lc.WidthMM))
	}
	if lc.WidthMM > 0 && lc.Floor == nil {
		errs = append(errs, fmt.Errorf("vision: lane width %v mm needs a floor calibration", lc.WidthMM))
	}
	if lc.WidthMM > 0 && lc.WidthPx > 0 {
		errs = append(errs, fmt.Errorf("vision: lane width given both in mm (%v) and px (%v): give one", lc.WidthMM, lc.WidthPx))
	}
	return errors.Join(errs...)
}

// Lane is the lane detector: it finds the two boundary lines of a lane
// with the classical detector's candidate extraction and robust fit, and
// reports the lane's centre, midway between them, as the Detection (so
// the tracker, cues and fail-safe work on the centre unchanged). Per
// frame:
//
//  1. candidates per row band, as in Classical;
//  2. with the tracker's prediction and a lane seen before, each
//     boundary is fitted among the candidates inside its own gate (the
//     prediction shifted by that boundary's place relative to the centre
//     last seen); otherwise up to three lines are fitted in turn, each
//     from candidates no earlier line uses, and the best pair that can be
//     a lane (not crossing, apart by the learned width when there is one)
//     is kept;
//  3. a line is no boundary when most of its candidates are saturated
//     (a mirrored ceiling lamp on a glossy floor), when it is short (the
//     stripe detector's minimum span), or when it is far from where the
//     tracked lane puts it;
//  4. while both are seen, the lane's width is learned per row band;
//     with one, the centre is that line shifted by half the learned width
//     and the confidence is lowered; with none, nothing is found and the
//     fail-safe follows as in stripe mode;
//  5. the centre's quadratic over the whole stretch gives the offset,
//     heading and confidence; the reported points follow a local fit of
//     the centre's points band by band (localCentre), since one
//     quadratic cannot follow an S-bend in view.
//
// Beyond the rows it was fitted on, a boundary runs on along its end
// tangents (fitResult.xAt), wherever it is used there: in the next
// frame's gate, in the candidates it takes from the other line, at the
// reference row. A short piece of a bend, its quadratic run out, can
// land on the other boundary.
//
// A Lane keeps state between frames (the learned width and the last
// boundaries): use one per clip or camera, not safe for concurrent use.
type Lane struct {
	c  *Classical
	lc LaneConfig
	// width[k] is the learned width of band k in working pixels, across
	// the lane's direction in the image (the horizontal width times the
	// cosine of the centre's image angle, so that it holds when the lane
	// turns), 0 when not yet learned; it belongs to the layout key.
	// turn[s][k] is the image angle of boundary s less the centre's there
	// (radians; the lines converge with perspective).
	width []float64
	turn  [2][]float64
	key   [3]int
	// wline is a straight line w(y) through the learned widths (a flat
	// lane's width in the image grows linearly with the distance below the
	// horizon), for bands where no width was learned; wlineOK when set.
	wline   curve
	wlineOK bool
	// fm maps the image to the floor, with the horizon and the lane's
	// width learned while both boundaries are seen (fm.ok once learned):
	// the centre is then inferred from one boundary along its normal on
	// the floor.
	fm floorModel
	// cal is the floor calibration in working pixels (with lc.Floor),
	// calW the lane's width learned on it (mm, 0 until learned).
	cal  calibFloor
	calW float64
	yRef float64 // the reference row, working pixels
	// hcost[g] is the misfit of horizon row g (learnFloor's grid) summed
	// over the recent frames, hnum/hden the sums giving W there.
	hcost, hnum, hden []float64
	// hTried and hFit count (decaying as hcost) the frames tried and
	// those that fit a horizon within 1 %.
	hTried, hFit float64
	// scratch for learnFloor
	fa, fb, qa, qb []([2]float64)
	fcost, fmean   []float64
	// prev: boundaries and centre at the reference row (input pixels,
	// degrees) in the last frame with a detection.
	prevSide   [2]sideAt
	prevCurve  [2]stretch // the boundaries in working pixels, run on along their end tangents
	prevCentre sideAt
	prevOK     bool
	fits       [3]fitResult
	sides      [2]fitResult
	cpts       [][3]float64 // scratch for centre
	bare       [2][]bool    // scratch for bandCentre: bands in a boundary's long unsupported run
}

// sideAt is a line's offset and heading at the reference row.
type sideAt struct{ off, head float64 }

// NewLane returns a lane detector for cfg and lc, or their errors.
func NewLane(cfg Config, lc LaneConfig) (*Lane, error) {
	if err := lc.Validate(); err != nil {
		return nil, err
	}
	c, err := NewClassical(cfg)
	if err != nil {
		return nil, err
	}
	c.ownHorizon = false  // see Classical.ownHorizon
	c.tangentEnds = false // see Classical.tangentEnds
	return &Lane{c: c, lc: lc}, nil
}

// Close releases the detector's images.
func (ln *Lane) Close() error { return ln.c.Close() }

// Reset forgets the learned width and the last boundaries (a new clip).
func (ln *Lane) Reset() {
	clear(ln.width)
	ln.prevOK, ln.wlineOK, ln.fm.ok, ln.fm.once, ln.calW = false, false, false, false, 0
	ln.hTried, ln.hFit = 0, 0
	clear(ln.hcost)
	clear(ln.hnum)
	clear(ln.hden)
	ln.c.mirror.forget()
}

func laneNotFound(reason string) Detection {
	return Detection{Method: MethodLane, Reason: reason}
}

// Detect measures the lane in img (as Classical.Detect). It does not
// retain img.
func (ln *Lane) Detect(img gocv.Mat, hint Hint) Detection {
	c := ln.c
	fr, why := c.load(img)
	if why != "" {
		ln.c.mirror.forget()
		return laneNotFound(why)
	}
	l, byBand, wantLight, wantDark, why := c.extract(fr)
	if why != "" {
		ln.c.mirror.forget()
		return laneNotFound(why)
	}
	// streaks of clipped pixels that do not move with the floor are
	// mirrored lamps (mirrorMotion)
	c.mirror.drop(c, fr, l, byBand)
	if k := [3]int{fr.ww, fr.wh, l.n}; k != ln.key || len(ln.width) != l.n {
		ln.key, ln.width, ln.prevOK, ln.wlineOK = k, make([]float64, l.n), false, false
		ln.fm = floorModel{cx: float64(fr.ww) / 2, cy: float64(fr.wh) / 2, f: assumedFocal * float64(fr.ww)}
		ln.hcost, ln.hnum, ln.hden, ln.hTried, ln.hFit = nil, nil, nil, 0, 0
		ln.turn = [2][]float64{make([]float64, l.n), make([]float64, l.n)}
	}
	yRefIn := c.cfg.RefRow * fr.inH
	yRefW := fr.toWorkY(yRefIn)
	ln.cal.fr, ln.cal.m, ln.yRef = fr, ln.lc.Floor, yRefW
	c.rng = frameSeed
	var pols []bool
	if wantLight {
		pols = append(pols, false)
	}
	if wantDark {
		pols = append(pols, true)
	}

	var left, right *fitResult
	gated := false
	if hint.Valid && ln.prevOK && ln.learned() {
		left, right = ln.gatedSides(fr, l, byBand, pols, hint, yRefW)
		gated = left != nil || right != nil
	}
	if !gated {
		left, right = ln.freeSides(fr, l, byBand, pols, hint, yRefW)
	}
	if left == nil && right == nil {
		ln.prevOK = ln.prevOK && hint.Valid
		return laneNotFound("no lane boundary")
	}
	both := left != nil && right != nil
	if both {
		ln.learn(l, left, right)
	}
	cr, ok := ln.centre(l, left, right, yRefW)
	if !ok {
		return laneNotFound("one boundary and no lane width learned there yet")
	}
	d := c.report(fr, l, &cr, false, gated, 0, hint, yRefIn, yRefW)
	d.Method = MethodLane
	ln.followPoints(fr, l, &cr, d.Points)
	m := &LaneMeasure{BothSeen: both}
	if left != nil {
		m.Left = curvePoints(fr, l, left)
	}
	if right != nil {
		m.Right = curvePoints(fr, l, right)
	}
	// The lane must be seen near the vehicle: where the boundaries
	// support less than 70 % of the near half's bands, the lines are
	// farther on (the near stretch is bare) and the centre there is a
	// guess; at 30 % or less it is not trusted at all.
	if cover := nearCover(l, left, right); cover < 0.7 {
		d.Confidence *= clamp01((cover - 0.3) / 0.4)
		d.Reason = "no lane line in much of the near half"
	}
	if both {
		m.WidthPx = (right.xAt(yRefW) - left.xAt(yRefW)) / fr.sx
	} else {
		seen, s := left, 0
		if seen == nil {
			seen, s = right, 1
		}
		m.WidthPx = ln.across(l, bandOf(l, yRefW), s, seen.slopeAt(yRefW)) / fr.sx
		if ln.lc.WidthPx > 0 && ln.lc.Floor == nil {
			m.WidthPx = ln.lc.WidthPx
		}
		d.Confidence *= ln.lc.OneSideFactor
		d.Reason = "one boundary: centre from the learned lane width"
	}
	m.ReachPx = ln.reach(l, left, right, yRefW) / fr.sy
	d.Lane = m
	ln.remember(fr, l, &d, left, right, yRefW)
	return d
}

// reach is how far, in working rows, the lane is seen continuously from
// its near end beyond the reference row yRefW (LaneMeasure.ReachPx).
// Bands count as seen where either boundary has support, or where a
// boundary runs through a band it could not be seen in (glare, off the
// frame's side: missing evidence, not a gap). Going up from the near end
// the stretch ends at the first run of bands without either that is
// longer than 5 % of the ROI height (a gap of its own, as in dashed), or
// for a boundary marked with a pattern (two gaps of its own or more:
// dashes) longer than half the span it is measured over, and at the far
// end of the near half of the ROI at most: the guidance is taken near
// the vehicle, and far off both faint lines drop out together now and
// then, which would make the reach jump about (the tracker reads a
// falling reach as a line ending). A lane whose nearest support lies
// beyond the reference row, by more than a tenth of the ROI height (how
// far the stripe detector runs a solid line's offset out, reachWithin),
// is not seen there at all: the near part of both lines worn away, the
// lines seen only past the gap. The reach is then negative, the rows
// from the reference row to that near end, as for a line that ends short
// of it. The fitted boundaries run on across such a gap; extrapolating
// across it is not seeing it.
func (ln *Lane) reach(l bandLayout, a, b *fitResult, yRefW float64) float64 {
	maxGap := max(2, int(0.05*float64(l.n)))
	for _, r := range []*fitResult{a, b} {
		if r != nil && ownGaps(r, l) >= 2 {
			maxGap = max(maxGap, int(0.5*(r.yHi-r.yLo)/float64(l.step)))
		}
	}
	supported := func(r *fitResult, k int) bool { return r != nil && k < len(r.bands) && r.bands[k] >= 0 }
	hidden := func(r *fitResult, k int) bool {
		if r == nil {
			return false
		}
		y := l.centre(k)
		return ln.c.unobservable(l, k, r.centre.x(y), r.width.x(y))
	}
	near, far, run := -1, -1, 0
	for k := 0; 2*k < l.n || near < 0 && k < l.n; k++ {
		switch {
		case supported(a, k) || supported(b, k):
			if near < 0 {
				near = k
			}
			far, run = k, 0
		case hidden(a, k) || hidden(b, k):
			if near < 0 {
				near = k // hidden at the near end: the lane may run there
			}
			// no gap, no support
		case near >= 0:
			run++
		}
		if run > maxGap {
			break
		}
	}
	if far < 0 {
		return float64(l.y0) - yRefW // nothing seen: short by the whole ROI
	}
	st := float64(l.step)
	if yNear := l.centre(near) + st/2; yNear < yRefW-0.1*float64(l.y1-l.y0) {
		return yNear - yRefW
	}
	return yRefW - (l.centre(far) - st/2)
}

// ownGaps counts r's gaps of its own: stretches at least 5 % of the ROI
// height long (as in dashed) between marks of three supporting bands or
// more (a stray supporting candidate in a gap does not split it). One is
// a worn stretch; a dashed line shows two or more.
func ownGaps(r *fitResult, l bandLayout) int {
	const minMark = 3
	n, lastEnd, run := 0, -1, 0
	for k := 0; k <= len(r.bands); k++ {
		if k < len(r.bands) && r.bands[k] >= 0 {
			run++
			continue
		}
		if run >= minMark {
			start := k - run
			if lastEnd >= 0 && float64((start-lastEnd-1)*l.step) >= 0.05*float64(l.y1-l.y0) {
				n++
			}
			lastEnd = k - 1
		}
		run = 0
	}
	return n
}

// nearCover is the share of the near half's bands (the lower half of the
// ROI) where at least one boundary has a supporting candidate.
func nearCover(l bandLayout, a, b *fitResult) float64 {
	n, seen := 0, 0
	for k := 0; 2*k < l.n; k++ {
		n++
		if (a != nil && k < len(a.bands) && a.bands[k] >= 0) || (b != nil && k < len(b.bands) && b.bands[k] >= 0) {
			seen++
		}
	}
	if n == 0 {
		return 0
	}
	return float64(seen) / float64(n)
}

// usable: long enough, and not a line of clipped pixels.
func (ln *Lane) usable(r *fitResult, l bandLayout) bool {
	return ln.c.acceptable(r, l) && r.satShare <= ln.lc.MaxSaturated
}

// keep copies r (whose memory belongs to a fitter slot) into dst.
func keep(dst, r *fitResult) *fitResult {
	b := dst.bands[:0]
	*dst = *r
	dst.bands = append(b, r.bands...)
	return dst
}

// best fits one line per polarity with sel and returns the better usable
// one, copied into dst, or nil.
//
// A line one quadratic cannot follow over the whole ROI (an S-bend in
// view, a boundary bending away at the far end) is fitted again over
// the nearer 60 % of the bands, where the vehicle is guided from.
func (ln *Lane) best(fr frameGeom, l bandLayout, byBand [][2]int, pols []bool, sel selector, dst *fitResult) *fitResult {
	var found *fitResult
	for _, near := range [2]bool{false, true} {
		lay := l
		if near {
			lay.n = (l.n*3 + 4) / 5
			lay.y0 = lay.y1 - lay.n*lay.step
		}
		for i, dark := range pols {
			sel.dark = dark
			r := ln.c.ransac(lay, fr.ww, byBand, sel, 4+i)
			if ln.usable(r, lay) && (found == nil || r.score > found.score) {
				found = r
			}
		}
		if found != nil {
			break
		}
	}
	if found == nil {
		return nil
	}
	return keep(dst, found)
}

// gatedSides fits each boundary inside the gate of its own prediction.
func (ln *Lane) gatedSides(fr frameGeom, l bandLayout, byBand [][2]int, pols []bool, hint Hint, yRefW float64) (left, right *fitResult) {
	var out [2]*fitResult
	// The centre's predicted move since the last detection, in working
	// pixels: a shift at the reference row and a change of slope.
	shift := (hint.OffsetPx - ln.prevCentre.off) * fr.sx
	dSlope := -(math.Tan(hint.HeadingDeg*math.Pi/180) - math.Tan(ln.prevCentre.head*math.Pi/180)) * fr.sx / fr.sy
	so := math.Hypot(math.Max(hint.OffsetSigma, 0.02*fr.inW), 0.01*fr.inW) * fr.sx
	sh := math.Max(hint.HeadingSigma, 2) * math.Pi / 180
	th := math.Tan(hint.HeadingDeg * math.Pi / 180)
	sec2 := 1 + th*th
	for s := 0; s < 2; s++ {
		// Each boundary's gate follows its own last curve (a boundary off
		// the image centre bends with the lens), moved as the centre is.
		prev := ln.prevCurve[s]
		for i := range ln.c.cands {
			cd := &ln.c.cands[i]
			pred := prev.x(cd.y) + shift + dSlope*(cd.y-yRefW)
			dy := (cd.y - yRefW) / fr.sy * fr.sx
			cd.gated = math.Abs(cd.x-pred) <= 3*math.Hypot(so, sh*sec2*dy)+0.5*cd.w
		}
		out[s] = ln.best(fr, l, byBand, pols, selector{gatedOnly: true}, &ln.sides[s])
	}
	left, right = out[0], out[1]
	if (left == nil) != (right == nil) {
		// One gate came up empty: the other boundary may have moved more
		// than its gate allows (it bends away in a curve). Take the best
		// line off the one found if the two make a lane, on the right side.
		seen := left
		if seen == nil {
			seen = right
		}
		ln.markTaken(fr, seen)
		if r := ln.best(fr, l, byBand, pols, selector{freeOnly: true}, &ln.fits[0]); r != nil {
			if seen == left && ln.pair(l, left, r) {
				right = r
			} else if seen == right && ln.pair(l, r, right) {
				left = r
			}
		}
	}
	if left != nil && right != nil && !ln.pair(l, left, right) {
		// Both gates hold a line but together they are no lane: keep the
		// better one and infer the centre from it.
		if left.score >= right.score {
			right = nil
		} else {
			left = nil
		}
	}
	return left, right
}

// freeSides finds up to three lines in turn and keeps the best pair that
// can be a lane; with no such pair, the best line alone when the tracked
// lane says which side it is.
func (ln *Lane) freeSides(fr frameGeom, l bandLayout, byBand [][2]int, pols []bool, hint Hint, yRefW float64) (left, right *fitResult) {
	c := ln.c
	for i := range c.cands {
		c.cands[i].taken, c.cands[i].gated = false, false
	}
	n := 0
	for n < len(ln.fits) {
		r := ln.best(fr, l, byBand, pols, selector{freeOnly: true}, &ln.fits[n])
		if r == nil {
			break
		}
		ln.markTaken(fr, r)
		n++
	}
	bestScore := 0.0
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			a, b := &ln.fits[i], &ln.fits[j]
			if a.xAt(yRefW) > b.xAt(yRefW) {
				a, b = b, a
			}
			if s := a.score + b.score; s > bestScore && ln.pair(l, a, b) {
				bestScore, left, right = s, a, b
			}
		}
	}
	if left != nil || n == 0 || !hint.Valid || !ln.prevOK || !ln.learned() {
		return left, right
	}
	// One line: which side, if either, does the tracked lane put there?
	r := &ln.fits[0]
	x := fr.toInX(r.xAt(yRefW)) - fr.inW/2
	tol := 3 * math.Hypot(math.Max(hint.OffsetSigma, 0.02*fr.inW), 0.01*fr.inW)
	dl := math.Abs(x - (hint.OffsetPx + ln.prevSide[0].off - ln.prevCentre.off))
	dr := math.Abs(x - (hint.OffsetPx + ln.prevSide[1].off - ln.prevCentre.off))
	switch {
	case dl <= tol && dl < dr:
		return r, nil
	case dr <= tol:
		return nil, r
	}
	return nil, nil
}

// markTaken marks the candidates on or next to line r as taken.
func (ln *Lane) markTaken(fr frameGeom, r *fitResult) {
	for i := range ln.c.cands {
		cd := &ln.c.cands[i]
		if math.Abs(cd.x-r.xAt(cd.y)) <= math.Max(1.5*r.width.x(cd.y), 2*tolerance(cd, fr.ww)) {
			cd.taken = true
		}
	}
}

// pair reports whether a (left) and b (right) can be a lane's two
// boundaries: they overlap over at least a fifth of the ROI, b lies right
// of a wherever both are, by at least four times the wider line's width
// at the near end of the overlap (a lane is much wider than its lines),
// the gap narrows with distance, and it matches the learned width
// (within a factor 1.3) where that is known.
func (ln *Lane) pair(l bandLayout, a, b *fitResult) bool {
	lo, hi := math.Max(a.yLo, b.yLo), math.Min(a.yHi, b.yHi)
	if hi-lo < 0.2*float64(l.y1-l.y0) {
		return false
	}
	// Perspective: on a floor seen from above the horizon, a lane looks
	// narrower the farther it is (higher in the image). Two rack uprights
	// or wall edges above the horizon do not.
	if b.centre.x(lo)-a.centre.x(lo) > 1.05*(b.centre.x(hi)-a.centre.x(hi)) {
		return false
	}
	// Where the two are nearest the vehicle their widths are measured
	// best: there the lane must be far wider than its lines.
	if b.centre.x(hi)-a.centre.x(hi) < 4*math.Max(math.Max(a.width.x(hi), b.width.x(hi)), 1) {
		return false
	}
	if !ln.widthAgrees(a, b) {
		return false
	}
	for k := 0; k < l.n; k++ {
		y := l.centre(k)
		if y < lo || y > hi {
			continue
		}
		sep := b.centre.x(y) - a.centre.x(y)
		if sep <= 0 {
			return false
		}
		perp := sep * math.Cos(math.Atan((a.centre.slope(y)+b.centre.slope(y))/2))
		if w := ln.width[k]; w > 0 && (perp > 1.3*w || perp < w/1.3) {
			return false
		}
	}
	return true
}

// configuredTol is how far (as a factor) a pair's width across the lane
// may be from the configured width: a pair that far off is another pair
// of lines, or the configuration is wrong; either way no lane is taken
// from it (the fail-safe follows rather than a guess).
const configuredTol = 1.25

// widthAgrees reports whether the pair a, b is as wide as the configured
// lane width (true when none is configured), along the reference row:
// with a calibration, the distance on the floor from b to a's tangent;
// without, the horizontal width in pixels times the cosine of the pair's
// mean image angle.
func (ln *Lane) widthAgrees(a, b *fitResult) bool {
	y, fr := ln.yRef, ln.cal.fr
	xa, xb := a.xAt(y), b.xAt(y)
	var w, want float64
	switch {
	case ln.lc.Floor != nil && ln.lc.WidthMM > 0:
		Xa, Za, ok1 := ln.cal.toFloor(xa, y)
		Xt, Zt, ok2 := ln.cal.toFloor(xa-a.slopeAt(y), y-1)
		Xb, Zb, ok3 := ln.cal.toFloor(xb, y)
		n := math.Hypot(Xt-Xa, Zt-Za)
		if !ok1 || !ok2 || !ok3 || n == 0 {
			return false
		}
		w = math.Abs((Xt-Xa)*(Zb-Za)-(Zt-Za)*(Xb-Xa)) / n
		want = ln.lc.WidthMM
	case ln.lc.Floor == nil && ln.lc.WidthPx > 0:
		w = (xb - xa) / fr.sx * math.Cos(math.Atan((a.slopeAt(y)+b.slopeAt(y))/2))
		want = ln.lc.WidthPx
	default:
		return true
	}
	return w <= configuredTol*want && w >= want/configuredTol
}

// learned reports whether a width is known in at least a fifth of the
// bands.
func (ln *Lane) learned() bool {
	n := 0
	for _, w := range ln.width {
		if w > 0 {
			n++
		}
	}
	return n > 0 && 5*n >= len(ln.width)
}

// covers reports whether y lies on the fitted stretch of r, give or take
// a band.
func covers(r *fitResult, l bandLayout, y float64) bool {
	st := float64(l.step)
	return r != nil && y >= r.yLo-st && y <= r.yHi+st
}

// learn updates the width of every band where both boundaries were fitted.
//
// A frame where either boundary's fit crosses a long stretch without its
// support (bareRuns) teaches the floor model nothing, neither a fit nor
// a misfit: the fit's inliers beyond the stretch may be another line (a
// boundary leaving the frame's side in a bend, the far piece of the other
// line beyond it), and such frames, counted as misfits, dropped a model
// that fitted well before and after (lane-s-curve at 1280×720, frames
// 27–58). The widths are still learned there.
func (ln *Lane) learn(l bandLayout, a, b *fitResult) {
	bareA, bareB := ln.bareRuns(0, l, a), ln.bareRuns(1, l, b)
	bare := slices.Contains(bareA, true) || slices.Contains(bareB, true)
	for k := 0; k < l.n; k++ {
		y := l.centre(k)
		if !covers(a, l, y) || !covers(b, l, y) {
			continue
		}
		sa, sb := math.Atan(a.centre.slope(y)), math.Atan(b.centre.slope(y))
		ac := math.Atan((a.centre.slope(y) + b.centre.slope(y)) / 2)
		w := (b.centre.x(y) - a.centre.x(y)) * math.Cos(ac)
		if ln.width[k] == 0 {
			ln.width[k], ln.turn[0][k], ln.turn[1][k] = w, sa-ac, sb-ac
		} else {
			r := ln.lc.LearnRate
			ln.width[k] += r * (w - ln.width[k])
			ln.turn[0][k] += r * (sa - ac - ln.turn[0][k])
			ln.turn[1][k] += r * (sb - ac - ln.turn[1][k])
		}
	}
	// the straight line through the learned widths, by least squares
	var n, sy, sw, syy, syw float64
	for k, w := range ln.width {
		if w > 0 {
			y := l.centre(k)
			n++
			sy += y
			sw += w
			syy += y * y
			syw += y * w
		}
	}
	ln.wlineOK = false
	if det := n*syy - sy*sy; n >= 5 && det > 0 {
		b := (n*syw - sy*sw) / det
		ln.wline = curve{a: (sw - b*sy) / n, b: b, scale: 1}
		ln.wlineOK = true
	}
	if bare {
		return
	}
	if ln.lc.Floor != nil {
		ln.learnCalibrated(l, a, b)
	} else {
		ln.learnFloor(l, a, b)
	}
}

// floorMemory is the share of the floor model's evidence kept from one
// frame to the next (about a second at 30 frames/s): one frame's widths,
// extrapolated to the horizon far above them, can put it tens of pixels
// off; a camera's pitch changes slowly.
const floorMemory = 0.97

// horizonStep is the spacing, in working pixels, of the horizon rows
// tried (refined between them by a parabola).
const horizonStep = 4

// learnFloor updates the floor model from a frame with both boundaries.
// With the right horizon the lane mapped to the floor is as wide
// everywhere, in a bend as on a straight (a wrong one fans it out or in,
// and a wrong one shows in a bend as in a straight), so every horizon row
// on a grid is tried: both boundaries are mapped to the floor, the
// distance from each point of the left one to the right one is measured,
// and their spread relative to their mean is the misfit, summed over the
// recent frames. The horizon with the least misfit is kept, with the mean
// distance there as the lane's width. A frame that fits no horizon within
// 1 % (a boundary fitted off the tape somewhere) is left out, and counts
// against the model: while fewer than half the recent frames fit, it is
// not used (floorModel.ok false; a strong fisheye fits none).
func (ln *Lane) learnFloor(l bandLayout, a, b *fitResult) {
	pa, pb, yTop := ln.sample(l, a, b)
	if len(pa) < 5 || len(pb) < 5 {
		return
	}
	m := ln.fm
	g0 := -4 * m.cy                          // the grid: two image heights above the top …
	gn := int((1.6*m.cy-g0)/horizonStep) + 1 // … to 0.8 of the height down
	if len(ln.hcost) != gn {
		ln.hcost, ln.hnum, ln.hden = make([]float64, gn), make([]float64, gn), make([]float64, gn)
	}
	cost, mean := ln.fcost[:0], ln.fmean[:0]
	best := math.Inf(1)
	qa, qb := ln.qa, ln.qb
	for g := 0; g < gn; g++ {
		m.setHorizon(g0 + float64(g)*horizonStep)
		if m.yh > yTop-minHorizonGap {
			// at or below the rows seen: ruled out by this frame
			cost, mean = append(cost, 1), append(mean, 0)
			continue
		}
		qa, qb = floorPoints(&m, pa, qa[:0]), floorPoints(&m, pb, qb[:0])
		mu, r2, ok := floorSpread(qa, qb)
		if !ok {
			cost, mean = append(cost, 1), append(mean, 0)
			continue
		}
		best = math.Min(best, r2)
		cost, mean = append(cost, r2), append(mean, mu)
	}
	ln.fcost, ln.fmean, ln.qa, ln.qb = cost, mean, qa, qb
	ln.hTried = floorMemory*ln.hTried + 1
	ln.hFit *= floorMemory
	if best > 0.01*0.01 {
		ln.fm.ok = ln.fm.ok && ln.hFit >= 0.5*ln.hTried
		return
	}
	ln.hFit++
	gb := 0
	for g := range ln.hcost {
		ln.hcost[g] = floorMemory*ln.hcost[g] + cost[g]
		ln.hnum[g] = floorMemory * ln.hnum[g]
		ln.hden[g] = floorMemory * ln.hden[g]
		if mean[g] > 0 {
			ln.hnum[g] += mean[g]
			ln.hden[g]++
		}
		if ln.hcost[g] < ln.hcost[gb] {
			gb = g
		}
	}
	if ln.hden[gb] <= 0 {
		return
	}
	yh := g0 + float64(gb)*horizonStep
	if gb > 0 && gb < gn-1 {
		// parabola through the least misfit and its neighbours
		c0, c1, c2 := ln.hcost[gb-1], ln.hcost[gb], ln.hcost[gb+1]
		if d := c0 - 2*c1 + c2; d > 0 {
			yh += horizonStep * math.Max(-0.5, math.Min(0.5, (c0-c2)/(2*d)))
		}
	}
	W := ln.hnum[gb] / ln.hden[gb]
	m.setHorizon(yh)
	m.w = W
	// A lens the pinhole model does not describe (strong distortion) fits
	// in few frames: the model is then not used.
	m.ok = W > 0 && ln.hFit >= 0.5*ln.hTried
	m.once = m.once || m.ok
	ln.fm = m
}

// floorPoints maps image points to the floor (X, Z), appended to dst;
// points at or above the horizon are left out.
func floorPoints(m laneFloor, pts [][2]float64, dst [][2]float64) [][2]float64 {
	for _, p := range pts {
		if X, Z, ok := m.toFloor(p[0], p[1]); ok {
			dst = append(dst, [2]float64{X, Z})
		}
	}
	return dst
}

// nearestSegment is the distance from p to polyline q, looking at the
// segments from j−2 on while the distance falls; inside is false when the
// nearest point is an end of q (p lies beyond it, not beside it).
func nearestSegment(p [2]float64, q [][2]float64, j int) (d float64, jn int, inside bool) {
	// Squared distances are compared (the same order as the distances,
	// without a square root per segment: learnFloor calls this for every
	// point at every horizon it tries); one root at the end.
	d2, jn := math.Inf(1), -1
	var tn float64
	for i := max(j-2, 0); i+1 < len(q); i++ {
		a, b := q[i], q[i+1]
		dx, dz := b[0]-a[0], b[1]-a[1]
		L := dx*dx + dz*dz
		t := 0.0
		if L > 0 {
			t = min(1, max(0, ((p[0]-a[0])*dx+(p[1]-a[1])*dz)/L))
		}
		ex, ez := p[0]-a[0]-t*dx, p[1]-a[1]-t*dz
		if di2 := ex*ex + ez*ez; di2 < d2 {
			d2, jn, tn = di2, i, t
		} else if jn >= 0 && i > jn+2 {
			break
		}
	}
	if jn < 0 {
		return math.Inf(1), j, false
	}
	inside = !(jn == 0 && tn <= 0) && !(jn == len(q)-2 && tn >= 1)
	return math.Sqrt(d2), jn, inside
}

// across is the horizontal lane width at band k, seen from boundary s
// whose image slope (dx/dy) there is slope: the learned width across the
// lane over the cosine of the centre's angle, which is the boundary's
// angle less the learned turn between them. Bands without a learned width
// use the straight line through the learned widths and the nearest
// band's turn. 0 when nothing is known.
func (ln *Lane) across(l bandLayout, k, s int, slope float64) float64 {
	w, ac := ln.perp(l, k, s, slope)
	return w / math.Max(math.Cos(ac), 0.2)
}

// perp is the learned width across the lane at band k and the centre's
// image angle there, seen from boundary s with slope dx/dy (see across).
func (ln *Lane) perp(l bandLayout, k, s int, slope float64) (w, ac float64) {
	w, kt := ln.width[k], k
	if w == 0 {
		if !ln.wlineOK {
			return 0, 0
		}
		w = math.Max(ln.wline.x(l.centre(k)), 0)
		kt = -1
		for j, v := range ln.width {
			if v > 0 && (kt < 0 || abs(j-k) < abs(kt-k)) {
				kt = j
			}
		}
		if kt < 0 {
			return 0, 0
		}
	}
	return w, math.Atan(slope) - ln.turn[s][kt]
}

func abs(i int) int {
	if i < 0 {
		return -i
	}
	return i
}

// bandOf is the band whose rows hold y (clamped to the layout).
func bandOf(l bandLayout, y float64) int {
	return min(max(int((float64(l.y1)-y)/float64(l.step)), 0), l.n-1)
}

// centre fits the lane's centre: with one boundary on a known floor, the
// centre beside it on the floor (onFloor); otherwise, or where that is
// no plausible quadratic, band by band from the boundaries' image fits
// (bandCentre). The result carries the boundaries' summaries, so that the
// stripe detector's confidence factors apply.
func (ln *Lane) centre(l bandLayout, a, b *fitResult, yRefW float64) (fitResult, bool) {
	fl, fw, fok := ln.floor(yRefW)
	var r fitResult
	ok := false
	if fok && (a == nil) != (b == nil) {
		// One boundary on a known floor: the centre beside it on the
		// floor (onFloor); where that is no plausible quadratic, the
		// bands as below.
		p, d := a, fw/2
		if p == nil {
			p, d = b, -d
		}
		ln.cpts = ln.onFloor(fl, l, p, d, ln.cpts[:0])
		// points in order along the lane: where the whole is no
		// plausible quadratic (the lane turns too far in view), the
		// farthest are left out until it is
		pts := ln.cpts
		r, ok = fitCentre(l, pts)
		for i := 0; i < 4 && !ok && len(pts) >= 10; i++ {
			pts = pts[:len(pts)*5/6]
			r, ok = fitCentre(l, pts)
		}
	}
	if !ok {
		r, ok = ln.bandCentre(l, a, b, fl, fw, fok)
	}
	if !ok {
		return r, false
	}
	y0, sc := float64(l.y1), float64(l.y1-l.y0)
	// Summaries: the support and quality of the boundaries used.
	r.meanSNR, r.rms = math.Inf(1), 0
	var parts []*fitResult
	for _, p := range []*fitResult{a, b} {
		if p != nil {
			parts = append(parts, p)
		}
	}
	r.width = curve{y0: y0, scale: sc}
	share := 0.0
	for _, p := range parts {
		r.score += p.score
		r.rms = math.Max(r.rms, p.rms)
		r.meanSNR = math.Min(r.meanSNR, p.meanSNR)
		r.satShare = math.Max(r.satShare, p.satShare)
		k := 1 / float64(len(parts))
		r.width.a += k * p.width.a
		r.width.b += k * p.width.b
		r.width.c += k * p.width.c
		// the boundary's support along its own stretch
		share += k * float64(p.inliers) / ((p.yHi-p.yLo)/float64(l.step) + 1)
	}
	// The stripe detector's "gaps along the line" factor counts inliers
	// over the stretch: carry the boundaries' own share of support.
	r.inliers = int(math.Round(share * ((r.yHi-r.yLo)/float64(l.step) + 1)))
	return r, true
}

// bandCentre is the centre from the boundaries' image fits, band by
// band: midway between them where both are, half the lane's width from
// the one there (on the floor when fok, at half weight) otherwise. With
// one boundary on the floor, the centre is run out to that boundary's far
// end (the lane runs on there). On the floor (fok), where one boundary's
// fit crosses a long stretch without its support (bareRuns) while the
// other is seen there, the centre there comes from the seen one alone:
// such a fit reaches its far inliers across the stretch, and those may
// be another line crossing its quadratic (a boundary leaving the frame's
// side in a bend, a piece of the other line beyond it), so midway is no
// better than a guess. The same holds, with the learned widths, where
// the floor model was learned once and is lost for now (most recent
// frames fit no horizon: before learn left out frames with such a
// stretch, lane-s-curve at 1280×720 lost it on frames 27–58, and this
// rule alone took its recall from 0.923 to 0.940). A camera whose floor was
// never learned (a strong fisheye fits none) keeps the centre midway:
// there the learned widths alone put it no better.
func (ln *Lane) bandCentre(l bandLayout, a, b *fitResult, fl laneFloor, fw float64, fok bool) (fitResult, bool) {
	pts := ln.cpts[:0]
	bareA, bareB := ln.bareRuns(0, l, a), ln.bareRuns(1, l, b)
	for k := 0; k < l.n; k++ {
		y := l.centre(k)
		inA, inB := covers(a, l, y), covers(b, l, y)
		if (fok || ln.fm.once) && inA && inB && bareA[k] != bareB[k] {
			inA, inB = !bareA[k], !bareB[k]
		}
		var x, wt float64
		switch {
		case inA && inB:
			x, wt = (a.centre.x(y)+b.centre.x(y))/2, 1
		case (inA || inB) && fok:
			// half the lane's width along the seen boundary's floor normal
			p, d := a, fw/2
			if !inA {
				p, d = b, -d
			}
			xc, yc, ok := beside(fl, p.centre.x(y), y, p.centre.slope(y), d)
			if !ok || yc < float64(l.y0) || yc > float64(l.y1) {
				continue
			}
			x, y, wt = xc, yc, 0.5
		case inA && ln.across(l, k, 0, a.centre.slope(y)) > 0:
			x, wt = a.centre.x(y)+ln.across(l, k, 0, a.centre.slope(y))/2, 0.5
		case inB && ln.across(l, k, 1, b.centre.slope(y)) > 0:
			x, wt = b.centre.x(y)-ln.across(l, k, 1, b.centre.slope(y))/2, 0.5
		default:
			continue
		}
		pts = append(pts, [3]float64{x, y, wt})
	}
	ln.cpts = pts
	r, ok := fitCentre(l, pts)
	if !ok || !fok || (a == nil) == (b == nil) {
		return r, ok
	}
	p := a
	if p == nil {
		p = b
	}
	if p.yLo < r.yLo && r.yHi-r.yLo > 0.25*float64(l.y1-l.y0) {
		r.yLo = math.Max(p.yLo, r.yLo-0.5*(r.yHi-r.yLo))
		over := l
		over.y0, over.y1 = int(math.Floor(r.yLo)), int(math.Ceil(r.yHi))
		ok = plausible(r.centre, over)
	}
	return r, ok
}

// bareRuns marks, in ln.bare[s] (valid until the next call for s), the
// bands of r's stretch inside a run of bands without r's support longer
// than 5 % of the ROI height (as reach counts a gap). A boundary marked
// with a pattern (two gaps of its own or more: dashes) has none: its
// fit through the gaps is the line. A nil r has none.
func (ln *Lane) bareRuns(s int, l bandLayout, r *fitResult) []bool {
	if cap(ln.bare[s]) < l.n {
		ln.bare[s] = make([]bool, l.n)
	}
	bare := ln.bare[s][:l.n]
	clear(bare)
	if r == nil || len(r.bands) < l.n || ownGaps(r, l) >= 2 {
		return bare
	}
	maxGap := max(2, int(0.05*float64(l.n)))
	start := -1 // first band of the current unsupported run after support
	seen := false
	for k := 0; k < l.n; k++ {
		if r.bands[k] >= 0 {
			if seen && start >= 0 && k-start > maxGap {
				for j := start; j < k; j++ {
					bare[j] = true
				}
			}
			seen, start = true, -1
			continue
		}
		if seen && start < 0 {
			start = k
		}
	}
	return bare
}

// followPoints moves the detection's points (input pixels, from the
// centre's quadratic) onto a local fit of the centre's points (ln.cpts,
// working pixels) where those are dense (localCentre): the quadratic is
// fitted to the whole stretch, and one quadratic cannot follow a lane
// that bends one way near the vehicle and the other way farther on (an S
// in view, a bend seen in perspective that tightens towards the
// horizon). Rows without enough points nearby keep the quadratic.
func (ln *Lane) followPoints(fr frameGeom, l bandLayout, r *fitResult, pts []Point) {
	for i := range pts {
		y := fr.toWorkY(pts[i].Y)
		if y < r.yLo || y > r.yHi {
			continue
		}
		if x, ok := ln.localCentre(l, y); ok {
			pts[i].X = fr.toInX(x)
		}
	}
}

// localCentre is the centre's x at working row y from a
// weighted quadratic through the centre's points (ln.cpts) within the
// ROI's height over followWindow of the row (tricube weights, as in
// Cleveland's LOWESS); ok false unless points lie on both sides of the
// row over most of that window (or up to the ROI's edge).
func (ln *Lane) localCentre(l bandLayout, y float64) (x float64, ok bool) {
	h := float64(l.y1-l.y0) / followWindow
	var A [3][3]float64
	var B [3]float64
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, p := range ln.cpts {
		u := math.Abs(p[1]-y) / h
		if u >= 1 {
			continue
		}
		w := p[2] * (1 - u*u*u) * (1 - u*u*u) * (1 - u*u*u) // tricube
		t := (p[1] - y) / h
		addNormal(&A, &B, [3]float64{1, t, t * t}, w, p[0])
		lo, hi = math.Min(lo, p[1]), math.Max(hi, p[1])
	}
	if A[0][0] <= 0 || lo > y-0.3*h && y-0.3*h > float64(l.y0) || hi < y+0.3*h && y+0.3*h < float64(l.y1) {
		return 0, false
	}
	sol, ok := solve3(A, B)
	if !ok {
		return 0, false
	}
	return sol[0], true
}

// followWindow: localCentre fits the centre's points within the ROI's
// height over followWindow either side of each row (a quarter: some
// twenty bands each way smooth the points' jitter; a quadratic over that
// window follows a bend that reverses within the view).
const followWindow = 4

// fitCentre fits the centre's quadratic to the points (working x, y and
// weight), by weighted least squares; r.inliers is the number of points.
// ok false with fewer than five or when the quadratic is not plausible
// over the rows it was fitted on (see plausible).
func fitCentre(l bandLayout, pts [][3]float64) (r fitResult, ok bool) {
	var A [3][3]float64
	var B [3]float64
	y0, sc := float64(l.y1), float64(l.y1-l.y0)
	r = fitResult{ok: true, yLo: math.Inf(1), yHi: math.Inf(-1)}
	for _, p := range pts {
		x, y, wt := p[0], p[1], p[2]
		t := (y - y0) / sc
		v := [3]float64{1, t, t * t}
		for i := 0; i < 3; i++ {
			for j := 0; j < 3; j++ {
				A[i][j] += wt * v[i] * v[j]
			}
			B[i] += wt * v[i] * x
		}
		r.yLo, r.yHi = math.Min(r.yLo, y), math.Max(r.yHi, y)
	}
	if len(pts) < 5 {
		return r, false
	}
	A[2][2] += 1e-6 * A[0][0]
	sol, ok := solve3(A, B)
	if !ok {
		return r, false
	}
	r.centre = curve{a: sol[0], b: sol[1], c: sol[2], y0: y0, scale: sc}
	r.inliers = len(pts)
	// Plausible over the stretch it was fitted on: where the boundaries
	// were fitted over the nearer rows only (a bend), a quadratic run out
	// to the far end of the ROI may lean or bend past the limits.
	over := l
	over.y0, over.y1 = int(math.Floor(r.yLo)), int(math.Ceil(r.yHi))
	return r, plausible(r.centre, over)
}

// curvePoints samples a fitted line over its stretch, near end first, in
// input pixels.
func curvePoints(fr frameGeom, l bandLayout, r *fitResult) []Point {
	st := float64(l.step)
	yBot, yTop := math.Min(r.yHi+st/2, float64(l.y1)), math.Max(r.yLo-st/2, float64(l.y0))
	pts := make([]Point, 16)
	for i := range pts {
		y := yBot + (yTop-yBot)*float64(i)/float64(len(pts)-1)
		pts[i] = Point{X: fr.toInX(r.centre.x(y)), Y: fr.toInY(y)}
	}
	return pts
}

// remember keeps the boundaries' and the centre's place at the reference
// row for the next frame's gates; an unseen boundary is put at the
// learned width from the seen one.
func (ln *Lane) remember(fr frameGeom, l bandLayout, d *Detection, a, b *fitResult, yRefW float64) {
	at := func(x, slope float64) sideAt {
		return sideAt{off: fr.toInX(x) - fr.inW/2, head: math.Atan(-slope*fr.sy/fr.sx) * 180 / math.Pi}
	}
	// the other boundary, w(y) ≈ w + dw·(y − yRef) away from the seen
	// one, with w and its slope dw from the learned width at the
	// reference row
	var w, dw float64
	if a == nil || b == nil {
		seen, s := a, 0
		if seen == nil {
			seen, s = b, 1
		}
		k := bandOf(l, yRefW)
		k0, k1 := min(k+4, l.n-1), max(k-4, 0) // k0 lower in the image
		w = ln.across(l, k, s, seen.slopeAt(yRefW))
		w0 := ln.across(l, k0, s, seen.slopeAt(l.centre(k0)))
		w1 := ln.across(l, k1, s, seen.slopeAt(l.centre(k1)))
		if w0 > 0 && w1 > 0 && k0 != k1 {
			dw = (w0 - w1) / (l.centre(k0) - l.centre(k1))
		}
	}
	beside := func(q stretch, sign float64) stretch {
		q.q.a += sign * (w + dw*(q.q.y0-yRefW))
		q.q.b += sign * dw * q.q.scale
		return q
	}
	switch {
	case a != nil && b != nil:
		ln.prevCurve = [2]stretch{a.stretch(), b.stretch()}
	case a != nil:
		ln.prevCurve = [2]stretch{a.stretch(), beside(a.stretch(), 1)}
	default:
		ln.prevCurve = [2]stretch{beside(b.stretch(), -1), b.stretch()}
	}
	for s, q := range ln.prevCurve {
		ln.prevSide[s] = at(q.x(yRefW), q.slope(yRefW))
	}
	ln.prevCentre = sideAt{off: d.OffsetPx, head: d.HeadingDeg}
	ln.prevOK = true
}
