package vision

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// frameSeed seeds the RANSAC sampler afresh for every frame, so that the
// same frame always gives the same Detection.
const frameSeed = 0x9E3779B97F4A7C15

func (c *Classical) detect(fr frameGeom, hint Hint) Detection {
	c.dashes.age()
	c.widthMem.age()
	l, byBand, wantLight, wantDark, why := c.extract(fr)
	if why != "" {
		c.forgetFrames()
		return notFound(why)
	}
	// streaks of clipped pixels that do not move with the floor are
	// mirrored lamps (mirrorMotion)
	c.mirror.drop(c, fr, l, byBand)
	yRefIn := c.cfg.RefRow * fr.inH
	yRefW := fr.toWorkY(yRefIn)
	c.gate(fr, hint, yRefW)

	c.rng = frameSeed
	slot := 0
	chans := c.channels(wantLight, wantDark)
	// Each channel's best line is scored by its support in every channel:
	// yellow tape is both lighter than the floor and of another colour, a
	// tyre mark or a joint of the same width only darker. The score is
	// discounted for a clipped near half as the confidence is
	// (nearSatFactor): a lamp's glare streak, refused by report for it,
	// must not hide the stripe seen beside and beyond it.
	var bestFull, bestGated *fitResult
	var fullTotal, gatedTotal float64
	var fullChroma, gatedChroma bool
	for _, sel := range chans {
		r := c.ransac(l, fr.ww, byBand, sel, slot)
		slot++
		if c.acceptable(r, l) && (c.bridges(r, l, fr, hint, yRefW) || reaches(r, l, yRefW)) {
			if t := c.totalScore(r.centre, l, fr.ww, byBand, chans, false) * r.nearSatFactor(); bestFull == nil || betterLine(t, fullTotal, sel.chroma, fullChroma) {
				bestFull, fullTotal, fullChroma = r, t, sel.chroma
			}
		}
		if hint.Valid {
			gs := sel
			gs.gatedOnly = true
			g := c.ransac(l, fr.ww, byBand, gs, slot)
			slot++
			if c.acceptable(g, l) && (c.bridges(g, l, fr, hint, yRefW) || reaches(g, l, yRefW)) {
				if t := c.totalScore(g.centre, l, fr.ww, byBand, chans, true) * g.nearSatFactor(); bestGated == nil || betterLine(t, gatedTotal, sel.chroma, gatedChroma) {
					bestGated, gatedTotal, gatedChroma = g, t, sel.chroma
				}
			}
		}
	}
	chosen, fromPrior := bestFull, false
	if bestGated != nil && (bestFull == nil || gatedTotal >= 0.6*fullTotal) {
		chosen, fromPrior = bestGated, true
	}
	if chosen == nil {
		return notFound(c.whyNot(l))
	}
	c.dashes.see(chosen, l)

	// Ambiguity: the best other line, drawn from candidates off the chosen
	// one, under the same gate as the chosen line. It is compared with the
	// chosen line where the two differ (bands where its support is off
	// the chosen line): a branch or a parallel line as strong as the
	// stripe there is ambiguous, a curve that follows the stripe and
	// strays only at its far end onto a glint or a beam is not. In the far
	// half of the region only bands where the chosen line has support of
	// its own count: a fork claims the same rows as the stripe, while
	// beyond the chosen line's far end (a bend tighter than its fit, a
	// wall seen by a wide lens) it is unmeasured, not contradicted.
	for i := range c.cands {
		cd := &c.cands[i]
		cd.taken = math.Abs(cd.x-chosen.centre.x(cd.y)) <= math.Max(1.5*chosen.width.x(cd.y), 2*tolerance(cd, fr.ww))
	}
	if cap(c.perBand) < 2*l.n {
		c.perBand = make([]float64, 2*l.n)
	}
	mine, theirs := c.perBand[:l.n], c.perBand[l.n:2*l.n]
	c.support(chosen.centre, l, fr.ww, byBand, chans, fromPrior, false, mine)
	ambig := 0.0
	for _, sel := range chans {
		sel.gatedOnly, sel.sampleFree = fromPrior, true
		r := c.ransac(l, fr.ww, byBand, sel, slot)
		slot++
		if !c.acceptable(r, l) || !reaches(r, l, yRefW) || !floorLike(chosen, r) {
			continue
		}
		c.support(r.centre, l, fr.ww, byBand, chans, fromPrior, true, theirs)
		var s1, s2 float64
		apart := 0
		// Above either line's own horizon nothing is on the floor.
		yh := math.Max(chosen.yh, r.yh)
		for k := range theirs {
			if theirs[k] > 0 && (2*k < l.n || mine[k] > 0) && l.centre(k) >= yh {
				s2 += theirs[k]
				s1 += mine[k]
				apart++
			}
		}
		// Apart over less than half the shortest accepted line: the same
		// line, not another one.
		if float64(apart) < 0.5*c.cfg.MinSpan*float64(l.n) {
			continue
		}
		ambig = math.Max(ambig, s2*r.nearSatFactor()/math.Max(s1, 1e-9))
	}
	d := c.report(fr, l, chosen, false, fromPrior, ambig, hint, yRefIn, yRefW)
	c.seeWidth(chosen, l, d.Confidence)
	return d
}

// betterLine says whether a line of total score t, from a chroma
// channel when chroma is set, beats the best so far, of total bt (from
// chroma when bestChroma): a higher total, or the same total within
// 0.01 % (two channels' fits of one line, scored alike in every channel,
// differ by the rounding of their sums) and the colour channel's fit. A
// lamp's glare or reflection beside coloured tape breaks its luminance
// crossings, not its colour ones: the luminance fit of the same line
// then has gaps that bridges reads as a row of dashes (reflections, 4.2 m
// on at 320×240, frame 58: run out at confidence 0.75 over the missing
// stretch of tape when the luminance fit won the tie; dashed-long at
// 320×240 fell from 0.917 to 0.890 recall the same way).
func betterLine(t, bt float64, chroma, bestChroma bool) bool {
	if math.Abs(t-bt) > 1e-4*math.Max(t, bt) {
		return t > bt
	}
	return chroma && !bestChroma
}

// totalScore is the support of curve q summed over the channels chans
// (only gated candidates when gatedOnly).
func (c *Classical) totalScore(q curve, l bandLayout, ww int, byBand [][2]int, chans []selector, gatedOnly bool) float64 {
	if cap(c.fit.trial) < l.n {
		c.fit.best, c.fit.trial = make([]int, l.n), make([]int, l.n)
	}
	out := c.fit.trial[:l.n]
	c.primeScores(ww)
	t := 0.0
	for _, sel := range chans {
		sel.gatedOnly = gatedOnly
		s, _ := c.evaluate(q, l, ww, byBand, sel, out)
		t += s
	}
	return t
}

// reachWithin is how far beyond its measured stretch a line may be run
// out to the reference row: a tenth of the ROI height; for a line with
// gaps of its own along the measured stretch (dashes), also up to a
// quarter of the measured span, since the unseen near end is then most
// likely one more gap. A solid line that starts far ahead (the tape
// resuming after a missing stretch) is not stretched down to the vehicle.
// report's confidence factor reaches zero there.
func reachWithin(r *fitResult, l bandLayout) float64 {
	reach := 0.1 * float64(l.y1-l.y0)
	if r.dashed(l) {
		reach = math.Max(reach, 0.25*(r.yHi-r.yLo))
	}
	return reach
}

// bridgeFactor is the confidence factor of a line bridged to the
// reference row (see Classical.bridges).
const bridgeFactor = 0.75

// priorPickedFactor scales bridgeFactor for a run-out the prediction
// chose between two bounds that disagree: 0.75 × 0.6 = 0.45, between the
// tracker's hold confidence (0.4) and its acquisition confidence (0.5),
// so that such a frame can keep a locked track, never start one.
const priorPickedFactor = 0.6

// bridges says whether line r may be run out across an unseen stretch
// between its near end and the reference row: a dashed or dotted line
// whose nearest mark lies beyond the reference row (a dash gap at the
// vehicle). All of these must hold:
//   - the line is a row of marks with a gap to judge the unseen stretch
//     by: at least three marks (runs of two or more bands) with gaps of
//     their own (see dashed), so the unseen stretch is most likely one
//     more gap of a pattern seen twice; with a prediction (hint valid)
//     that the line must also agree with (below), two marks; and with a
//     prediction, a single mark when a dashed line was chosen on a recent
//     frame (see dashMemory): its remembered gap stands in for the one
//     the single dash cannot show (a wide or low camera sees one dash at
//     a time);
//   - the unseen stretch, measured along the floor (see floorLen), is no
//     longer than that gap: a missing stretch of the marking, or a line
//     that resumes after one, is longer and is not bridged (the
//     fail-safe must sound there);
//   - two estimates of the unseen stretch agree within 1.5 % of the
//     width at the reference row (the scoring tolerance, 10 px at 640).
//     The nearest marks are those from the near end up to 15 % of the
//     ROI height (see nearMarksTop; the RANSAC sample spread). Three
//     pairs are tried:
//     (a) the straight line through the nearest marks alone (nearLine)
//     and the perspective curve through every mark (perspLine: a bend of
//     constant curvature on the floor), run out along that curve; this
//     holds where the near marks are too few or too short to show a bend
//     of their own (dots);
//     (b) two bounds from the perspective curve through the nearest
//     marks alone: their bend kept up to the reference row, and the line
//     straightening where they end (the curve's tangent at the near
//     end). A path whose bend neither grows nor turns back over the
//     unseen stretch lies between the two; the run-out goes straight
//     through their middle at the reference row, with the mean of their
//     slopes. This holds where the bend changes beyond the near marks (a
//     weaving cart, an S-bend: the far marks tilt a curve through every
//     mark at the vehicle);
//     (c) where there are marks beyond the nearest ones, the nearest
//     marks' bend kept (as in (b)) and the perspective curve through
//     every mark (as in (a)), through the middle of the two: a steady
//     bend, seen at the near marks and confirmed by the far ones, over
//     an unseen stretch too long for the straight bounds of (a) and (b)
//     to agree across.
//     Of the pairs that agree, the one whose estimates land closest
//     together is taken. Where none agrees and there is a prediction,
//     the two bounds of (b) are each held against its gate (below): when
//     it admits exactly one, that one is the run-out, at a lower
//     confidence (priorPickedFactor). A single far dash seen by a 16:9
//     frame (dashed-long at 1280×720) shows too little of the bend to
//     say whether it goes on; the two bounds then land 20-45 px apart at
//     the reference row, and the tracker's predicted heading, kept from
//     the dashes seen before, is within 1σ of the right one and 4σ or
//     more from the other (frames 84, 229 and 265: the bend kept twice,
//     the straight line once). Where none agrees otherwise the stretch
//     stays unseen. The run-out must lie inside the region of interest;
//   - with a prediction (hint valid), the run-out agrees with it in
//     offset and heading at the reference row: the squared distance in
//     units of the prediction's σ (which holds the measurement noise,
//     see Hint) is within the χ² 2-DOF 99 % quantile 9.21, the tracker's
//     own gate, so a bridged measurement never steps the track. The
//     offset and heading measured are the image's, not the prior's.
//
// On success r is marked bridged, its line beyond yHi is the run-out,
// and r.bridgeSpread is how far apart the estimates land at the
// reference row (for (a) with the fitted curve's own tangent too), in
// units of the agreement required (report lowers the confidence with
// it).
func (c *Classical) bridges(r *fitResult, l bandLayout, fr frameGeom, hint Hint, yRefW float64) bool {
	if r == nil || !r.ok || yRefW <= r.yHi {
		return false
	}
	gap := 0.0
	switch m := r.marks(2); {
	case r.dashed(l) && (m >= 3 || (m >= 2 && hint.Valid)):
		gap = r.longestGap(l)
	case hint.Valid && m == 1 && c.dashes.ok:
		gap = c.dashes.gap
	}
	if gap <= 0 || r.floorLen(r.yHi+float64(l.step)/2, yRefW) > gap {
		return false
	}
	yTop, ok := c.nearMarksTop(r, 0.15*float64(l.y1-l.y0))
	if !ok {
		return false
	}
	tol := 0.015 * float64(fr.ww)
	type runout struct{ x, s, spread float64 }
	var est [3]runout
	n := 0
	all, okAll := c.perspLine(r, l, math.Inf(-1))
	near, okNear := c.perspLine(r, l, yTop)
	xa, sa := all.x(yRefW), all.slope(yRefW) // every mark's bend (when okAll)
	// (a) Every mark on one bend, the nearest marks' straight line
	// agreeing.
	if x0, s0, ok := c.nearLine(r, l, yTop); ok && okAll {
		xn, xt := x0+s0*(yRefW-r.yHi), r.xAt(yRefW)
		if math.Abs(xn-xa) <= tol {
			spread := (math.Max(xn, math.Max(xa, xt)) - math.Min(xn, math.Min(xa, xt))) / tol
			est[n], n = runout{xa, sa, spread}, n+1
		}
	}
	if okNear {
		xb, sb := near.x(yRefW), near.slope(yRefW)
		// (b) The nearest marks' bend kept, or ending where they end.
		st := near.slope(r.yHi)
		xs := near.x(r.yHi) + st*(yRefW-r.yHi)
		if math.Abs(st) <= maxSlope && math.Abs(xb-xs) <= tol {
			est[n], n = runout{(xb + xs) / 2, (sb + st) / 2, math.Abs(xb-xs) / tol}, n+1
		}
		// (c) The nearest marks' bend kept, and every mark's.
		if okAll && r.yLo < yTop && math.Abs(xb-xa) <= tol {
			est[n], n = runout{(xb + xa) / 2, (sb + sa) / 2, math.Abs(xb-xa) / tol}, n+1
		}
	}
	slices.SortStableFunc(est[:n], func(p, q runout) int { return cmp.Compare(p.spread, q.spread) })
	for _, e := range est[:n] {
		if c.runOut(r, l, fr, hint, yRefW, e.x, e.s, e.spread) {
			return true
		}
	}
	if hint.Valid && okNear {
		// No pair agrees: the prediction decides between the two bounds
		// of (b) when it admits exactly one.
		st := near.slope(r.yHi)
		xs := near.x(r.yHi) + st*(yRefW-r.yHi)
		xb, sb := near.x(yRefW), near.slope(yRefW)
		okB, okS := c.admits(l, fr, hint, xb, sb), c.admits(l, fr, hint, xs, st)
		if okB != okS {
			if okS {
				xb, sb = xs, st
			}
			r.priorPicked = c.runOut(r, l, fr, hint, yRefW, xb, sb, 0)
			return r.priorPicked
		}
	}
	return false
}

// runOut bridges r (see bridges) with the run-out through x at row yRefW
// with slope s, when that lies inside the region of interest and, with a
// prediction, agrees with it; spread is r.bridgeSpread.
func (c *Classical) runOut(r *fitResult, l bandLayout, fr frameGeom, hint Hint, yRefW, x, s, spread float64) bool {
	if !c.admits(l, fr, hint, x, s) {
		return false
	}
	r.bridged, r.nearX, r.nearSlope = true, x-s*(yRefW-r.yHi), s
	r.bridgeSpread = spread
	return true
}

// admits says whether a run-out through x at the reference row with
// slope s lies inside the region of interest and, with a prediction,
// agrees with it: the squared distance in units of the prediction's σ
// (which holds the measurement noise, see Hint) within the χ² 2-DOF 99 %
// quantile 9.21, the tracker's own gate.
func (c *Classical) admits(l bandLayout, fr frameGeom, hint Hint, x, s float64) bool {
	if math.Abs(s) > maxSlope || x < float64(l.x0) || x > float64(l.x1) {
		return false
	}
	if !hint.Valid {
		return true
	}
	off := fr.toInX(x) - fr.inW/2
	head := math.Atan(-s*fr.sy/fr.sx) * 180 / math.Pi
	so := math.Max(hint.OffsetSigma, 0.5)
	sh := math.Max(hint.HeadingSigma, 0.1)
	do, dh := (off-hint.OffsetPx)/so, (head-hint.HeadingDeg)/sh
	return do*do+dh*dh <= 9.21
}

// reaches says whether line r comes near enough to the reference row to
// measure the offset there. A line seen only far up the image (a rack
// upright above the horizon, a stripe ahead across the aisle) cannot
// guide the vehicle, and must not hide the one that can.
func reaches(r *fitResult, l bandLayout, yRefW float64) bool {
	step := float64(l.step)
	e := math.Max(yRefW-(r.yHi+step), (r.yLo-step)-yRefW)
	return e < reachWithin(r, l)
}

// hiddenNearEnd says whether the stretch between line r's near end and the
// bottom of the region of interest, at most limit rows long, could not
// have been seen in any band (unobservable along r's tangent: lost in
// glare, or off the side of the picture). The line is then run out to the
// bottom, as across a short worn patch: where nothing can be seen, the
// stripe seen right up to the hidden stretch is the best evidence.
func (c *Classical) hiddenNearEnd(r *fitResult, l bandLayout, limit float64) bool {
	if float64(l.y1)-r.yHi > limit {
		return false
	}
	hidden := false
	for k := 0; k < l.n; k++ {
		y := l.centre(k)
		if y <= r.yHi {
			break
		}
		if !c.unobservable(l, k, r.xAt(y), r.width.x(math.Min(y, r.yHi))) {
			return false
		}
		hidden = true
	}
	return hidden
}

// nearMarkEnd finds the near mark of line r (the supporting bands from
// its near end up to the first run of two or more observed bands without
// support) and the unsupported stretch beyond it inside the measured
// line: top is the row of the mark's far edge, gap the observed rows of
// the stretch (bands where the line could not have been seen, lost in
// glare or off the frame's side, are missing evidence and count for
// neither). ok is false when the line has no such stretch (the mark is
// the whole line).
func (c *Classical) nearMarkEnd(r *fitResult, l bandLayout) (top, gap float64, ok bool) {
	k := 0
	for k < len(r.bands) && r.bands[k] < 0 {
		k++
	}
	if k == len(r.bands) {
		return 0, 0, false
	}
	kTop, run := k, 0
	for k++; k < len(r.bands); k++ {
		if r.bands[k] >= 0 {
			if run >= 2 {
				return float64(l.y1 - (kTop+1)*l.step), float64(run * l.step), true
			}
			kTop, run = k, 0
			continue
		}
		y := l.centre(k)
		if !c.unobservable(l, k, r.xAt(y), r.width.x(math.Max(y, r.yLo))) {
			run++
		}
	}
	return 0, 0, false
}

// floorLike says whether line r can lie on the same floor as the chosen
// line. On a flat floor seen in perspective every line's image width
// shrinks towards the horizon at the same rate (it is proportional to the
// row's distance below the horizon), so the chosen line's width profile
// predicts how much r must narrow between its ends. A line that does not
// narrow as predicted (a rack upright, a wall edge, a window frame), or
// lies where the chosen line's width has already run out (above the
// horizon), or lies mostly above the chosen line's own horizon (see
// nearHorizon), is not on the floor. Without perspective to judge by (a
// camera looking straight down, or a short line) every line is.
func floorLike(chosen, r *fitResult) bool {
	if chosen.yh-r.yLo > 0.5*(r.yHi-r.yLo) {
		return false
	}
	eTop, eBot := chosen.width.x(r.yLo), chosen.width.x(r.yHi)
	if eBot <= 0 {
		return true
	}
	if eTop <= 0 {
		return false
	}
	want := eTop / eBot
	if want > 0.8 {
		return true
	}
	wTop, wBot := r.width.x(r.yLo), r.width.x(r.yHi)
	if wBot <= 0 {
		return true
	}
	// Generous: widths are measured to a pixel or so on thin far lines.
	return wTop/wBot <= 1.5*want+0.1
}

// support fills perBand[k] with curve q's support in band k summed over
// the channels chans, scored as in evaluate (only gated candidates when
// gatedOnly; only candidates off the chosen line when freeOnly).
func (c *Classical) support(q curve, l bandLayout, ww int, byBand [][2]int, chans []selector, gatedOnly, freeOnly bool, perBand []float64) {
	for k := range perBand {
		perBand[k] = 0
	}
	for _, sel := range chans {
		sel.gatedOnly = gatedOnly
		for k := 0; k < l.n; k++ {
			lo, hi := byBand[k][0], byBand[k][1]
			xq := q.x(l.centre(k))
			bestD, bestI := math.Inf(1), -1
			for i := lo; i < hi; i++ {
				cd := &c.cands[i]
				if !sel.ok(cd) {
					continue
				}
				if d := math.Abs(cd.x - xq); d <= tolerance(cd, ww) && d < bestD {
					bestD, bestI = d, i
				}
			}
			if bestI < 0 || (freeOnly && c.cands[bestI].taken) {
				continue
			}
			cd := &c.cands[bestI]
			r := bestD / tolerance(cd, ww)
			perBand[k] += c.weight(cd, l) * (1 - 0.5*r*r)
		}
	}
}

// channels lists the evidence the fit tries: luminance lighter and darker
// than the floor as wanted, and chroma when this frame has it (see
// Classical.prepare). The list lives in c.chans.
func (c *Classical) channels(wantLight, wantDark bool) []selector {
	s := c.chans[:0]
	if wantLight {
		s = append(s, selector{})
	}
	if wantDark {
		s = append(s, selector{dark: true})
	}
	if c.chromaOn {
		s = append(s, selector{chroma: true})
	}
	c.chans = s
	return s
}

// extract lays out the bands of the region of interest and finds every
// band's candidates (c.cands; byBand[k] is band k's index range). A
// non-empty reason says why there is nothing to fit.
func (c *Classical) extract(fr frameGeom) (l bandLayout, byBand [][2]int, wantLight, wantDark bool, reason string) {
	l = c.layout(fr)
	if l.n < 6 || l.x1-l.x0 < 16 {
		return l, nil, false, false, "region of interest too small for this frame"
	}
	sigma := c.noiseSigma(l, fr.ww)
	for _, g := range [...]*nearMedian{&c.medBase, &c.medC1, &c.medC2, &c.medNoise} {
		g.forget()
	}
	c.hairline = 0.006 * float64(fr.ww)
	c.widths = c.ridgeWidths(fr, l, c.widths)
	wantLight = c.cfg.Polarity != PolarityDark || c.hasTape
	wantDark = c.cfg.Polarity != PolarityLight && !c.hasTape
	c.cands = c.cands[:0]
	if cap(c.byBand) < l.n {
		c.byBand = make([][2]int, l.n)
	}
	byBand = c.byBand[:l.n]
	for k := 0; k < l.n; k++ {
		lo := len(c.cands)
		c.bandCandidates(k, l, fr, sigma, c.widths, wantLight, wantDark, c.chromaOn)
		byBand[k] = [2]int{lo, len(c.cands)}
	}
	if len(c.cands) == 0 {
		return l, byBand, wantLight, wantDark, "no candidates"
	}
	return l, byBand, wantLight, wantDark, ""
}

// gate marks the candidates inside the prediction's gate (all of them
// stay ungated when the hint is not valid). The prediction, in working
// pixels: x(y) = xr − tan(h)·(y − yr) (the far end, smaller y, leans right
// for positive heading).
func (c *Classical) gate(fr frameGeom, hint Hint, yRefW float64) {
	if !hint.Valid {
		for i := range c.cands {
			c.cands[i].gated = false
		}
		return
	}
	xr := fr.toWorkX(fr.inW/2 + hint.OffsetPx)
	th := math.Tan(hint.HeadingDeg * math.Pi / 180)
	sec2 := 1 + th*th
	// Uncertainties no smaller than 2 % of the width and 2°.
	so := math.Max(hint.OffsetSigma, 0.02*fr.inW) * fr.sx
	sh := math.Max(hint.HeadingSigma, 2) * math.Pi / 180
	for i := range c.cands {
		cd := &c.cands[i]
		dy := (cd.y - yRefW) / fr.sy * fr.sx // in x-scaled working pixels
		pred := xr - th*dy
		sig := math.Hypot(so, sh*sec2*dy)
		cd.gated = math.Abs(cd.x-pred) <= 3*sig+0.5*cd.w
	}
}

// acceptable: a fit that spans at least MinSpan of the ROI with support
// in at least a third of the bands along it where it could be seen
// (fitResult.observedBands: bands lost in glare or off the frame's side
// are left out), or, for a dotted or dashed line, in a fifth of them
// spread over at least three separate marks
// (runs of two or more bands). Round dots every few times their size
// cover a quarter to a third of the rows, and their ends, narrow and
// faint, less; support scattered over single bands (clutter a line
// happens to cross) is not a row of marks.
func (c *Classical) acceptable(r *fitResult, l bandLayout) bool {
	if r == nil || !r.ok || r.inliers < 5 {
		return false
	}
	span := (r.yHi - r.yLo + float64(l.step)) / float64(l.y1-l.y0)
	bands := r.observedBands(l)
	if span < c.cfg.MinSpan {
		return false
	}
	return float64(r.inliers) >= bands/3 || (r.marks(2) >= 3 && float64(r.inliers) >= bands/5)
}

func (c *Classical) whyNot(l bandLayout) string {
	bands := 0
	seen := -1
	for i := range c.cands {
		if c.cands[i].band != seen {
			seen = c.cands[i].band
			bands++
		}
	}
	if float64(bands) < c.cfg.MinSpan*float64(l.n) {
		return fmt.Sprintf("too few rows with candidates (%d of %d)", bands, l.n)
	}
	return "no consistent line through the candidates"
}

// widthHintIn is the configured stripe width at the reference row in
// input pixels, 0 when unknown.
func (c *Classical) widthHintIn(fr frameGeom) float64 {
	if c.cfg.WidthHintFrac > 0 {
		return c.cfg.WidthHintFrac * fr.inW
	}
	return c.cfg.WidthHintPx
}

func clamp01(v float64) float64 { return math.Min(1, math.Max(0, v)) }

// guidedSpan is the share of the floor seen in the region of interest
// that line r covers, for the "short line" factor: the floor runs from
// the bottom of the region up to the line's own horizon where one was
// found (a low camera sees floor only below it; above are walls and
// racks, see nearHorizon), else over the whole region. A bridged line
// covers the rows it guides over, its run-out down to the reference row
// yRefW included: the unseen stretch is judged by the bridge's own
// factor (a single dash on a 16:9 frame spans a quarter of the region,
// and its run-out lies on the prediction, see bridges).
func guidedSpan(r *fitResult, l bandLayout, yRefW float64) float64 {
	floorH := float64(l.y1 - l.y0)
	if yh := r.yh; !math.IsInf(yh, -1) && yh > float64(l.y0) && yh < float64(l.y1) {
		floorH = float64(l.y1) - yh
	}
	near := r.yHi
	if r.bridged {
		near = math.Max(near, yRefW)
	}
	return (near - r.yLo + float64(l.step)) / floorH
}

// report turns fit r into a Detection. ambig is the other line's strength
// against r's where the two differ (0: none); dark is unused (kept for
// callers in lane.go).
func (c *Classical) report(fr frameGeom, l bandLayout, r *fitResult, dark, fromPrior bool, ambig float64, hint Hint, yRefIn, yRefW float64) Detection {
	roiH := float64(l.y1 - l.y0)
	step := float64(l.step)
	spanBands := r.observedBands(l)

	// Geometry in input pixels.
	xRefW := r.xAt(yRefW)
	slopeIn := r.slopeAt(yRefW) * fr.sy / fr.sx // dx/dy in input pixels
	heading := math.Atan(-slopeIn) * 180 / math.Pi
	widthIn := math.Max(r.width.x(yRefW), 0) / fr.sx * math.Cos(heading*math.Pi/180)

	d := Detection{
		Found:      true,
		Method:     MethodClassical,
		RefRow:     yRefIn,
		OffsetPx:   fr.toInX(xRefW) - fr.inW/2,
		HeadingDeg: heading,
		WidthPx:    widthIn,
	}
	yBot := math.Min(r.yHi+step/2, float64(l.y1))
	// An unseen stretch at the near end (a gap between dashes, a worn
	// patch) is bridged down to the bottom of the ROI when it is short
	// against the measured line: at most 15 % of the ROI height, or for a
	// dashed line half the measured span (a line measured across several
	// dashes is well determined beyond them).
	reach := 0.15 * roiH
	if r.dashed(l) {
		reach = math.Max(reach, 0.5*(r.yHi-r.yLo))
	}
	// Near-half bands the line runs through unseen (lost in glare, off the
	// frame's side), along its measured stretch or run out below it.
	hiddenNear := float64(r.nearUnseen)
	if float64(l.y1)-yBot <= reach || r.bridged {
		yBot = float64(l.y1)
	} else if c.hiddenNearEnd(r, l, 0.3*roiH) {
		hiddenNear += (float64(l.y1) - yBot) / step
		yBot = float64(l.y1)
	}
	yTop := math.Max(r.yLo-step/2, float64(l.y0))
	// The points follow the line's perspective curve where it has one
	// (perspFit); offset and heading above stay the quadratic's, which
	// the near rows fix as well.
	c.perspFit(r, l, fr.ww)
	n := min(max(r.inliers, 8), 32)
	d.Points = make([]Point, n)
	for i := range d.Points {
		y := yBot + (yTop-yBot)*float64(i)/float64(n-1)
		d.Points[i] = Point{X: fr.toInX(r.xAt(y)), Y: fr.toInY(y)}
	}

	// Confidence: each factor in [0, 1], named for the Reason.
	type factor struct {
		v    float64
		name string
	}
	fs := []factor{
		// Half the bands along the line supporting it is full marks, so a
		// dashed line (dashes longer than gaps) is not penalised.
		{clamp01(2 * float64(r.inliers) / spanBands), "gaps along the line"},
		{clamp01(guidedSpan(r, l, yRefW) / 0.5), "short line"},
		{clamp01(1 - 0.5*r.rms*r.rms), "poor fit"},
		{0.3 + 0.7*clamp01((r.meanSNR-c.cfg.MinSNR)/(2*c.cfg.MinSNR)), "low contrast"},
		{1 - clamp01((ambig-0.3)/0.6), "ambiguous: another line nearly as strong"},
		{r.satFactor(), "saturated (glare or reflection)"},
		{r.nearSatFactor(), "near part saturated (a mirrored lamp?)"},
		// Unseen bands are no evidence against the line, but the line is
		// interpolated across them: across most of the near half, where
		// guidance measures, it is a guess (none up to 40 %, zero at all).
		{1 - clamp01((hiddenNear/math.Max(float64(l.n/2), 1)-0.4)/0.6), "near part hidden (glare or the frame's side)"},
	}
	// Near the vehicle a stripe is wide: a hairline there (under 1.2 % of
	// the frame width, or under half the configured width) is more likely
	// a joint or a crack than tape.
	minW := 2 * c.hairline / fr.sx
	if hw := c.widthHintIn(fr); hw > 0 {
		minW = 0.5 * hw
	}
	fs = append(fs, factor{clamp01(widthIn / minW), "too narrow for a stripe"})
	// The reference row should lie on or near the measured stretch.
	if e := math.Max(yRefW-(r.yHi+step), (r.yLo-step)-yRefW); e > 0 {
		// Extrapolating the offset beyond the seen stretch is a guess: the
		// factor reaches 0 a tenth of the ROI height away, or a quarter of
		// the measured span for a long line.
		v := clamp01(1 - e/reachWithin(r, l))
		if r.bridged {
			// Across a gap no longer than the line's own: bridgeFactor
			// when the estimates of the unseen stretch (the perspective
			// curve, the nearest marks' line, the fitted curve's
			// tangent) land together, down to 0.375 of it as they spread
			// over the agreement required, and below beyond.
			s := r.bridgeSpread
			if r.priorPicked {
				// Chosen by the prediction between two bounds that
				// disagree (see bridges).
				v = math.Max(v, bridgeFactor*priorPickedFactor)
			} else {
				v = math.Max(v, bridgeFactor*clamp01(1-0.5*s*s))
			}
		}
		fs = append(fs, factor{v, "reference row off the measured stretch"})
	}
	// The near mark ending just beyond the reference row, with a stretch
	// beyond it longer than the line is run out across (a missing stretch
	// of tape arriving): in a frame or two the reference row lies in it,
	// where nothing is measured. The factor falls to zero as the mark's
	// far end comes down to the reference row (from a tenth of the ROI
	// height above it; at the default reference row 0.8, half-way is
	// where the mark covers half the lower half of the frame), so that
	// the fail-safe counts from when the line is going, not from when it
	// has gone. With the reference row inside the stretch the line is
	// judged as any line across a gap (bridges, the gaps factor).
	if top, gap, ok := c.nearMarkEnd(r, l); ok && gap > reach && top < yRefW {
		fs = append(fs, factor{clamp01((yRefW - top) / (0.1 * roiH)), "line ends just beyond the reference row"})
		// The guidance reach is the near mark's: frame by frame its end
		// comes down to the reference row, and when the mark is gone the
		// tracker knows the line ended rather than coasting over it as
		// over an unreadable frame (guidance/reach.go).
		d.ReachPx, d.HasReach = (yRefW-top)/fr.sy, true
	}
	if hint.Valid {
		// A line found without the prior is far from the prediction,
		// unless it was bridged: bridges holds its run-out to the
		// prediction's gate (runOut) whichever fit found it, and it is
		// judged by its distance as a line from the prior is.
		if !fromPrior && !r.bridged {
			fs = append(fs, factor{0.5, "far from the prediction"})
		} else {
			so := math.Max(hint.OffsetSigma, 0.02*fr.inW)
			sh := math.Max(hint.HeadingSigma, 2)
			do := (d.OffsetPx - hint.OffsetPx) / so
			dh := (d.HeadingDeg - hint.HeadingDeg) / sh
			fs = append(fs, factor{0.5 + 0.5*math.Exp(-(do*do+dh*dh)/18), "far from the prediction"})
		}
	}
	conf, worst := 1.0, 0
	for i, f := range fs {
		conf *= f.v
		if f.v < fs[worst].v {
			worst = i
		}
	}
	d.Confidence = clamp01(conf)
	if d.Confidence < 0.5 {
		d.Reason = fs[worst].name
	}
	return d
}
