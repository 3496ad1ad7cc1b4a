package vision

import (
	"fmt"
	"math"
)

// frameSeed seeds the RANSAC sampler afresh for every frame, so that the
// same frame always gives the same Detection.
const frameSeed = 0x9E3779B97F4A7C15

func (c *Classical) detect(fr frameGeom, hint Hint) Detection {
	l, byBand, wantLight, wantDark, why := c.extract(fr)
	if why != "" {
		return notFound(why)
	}
	yRefIn := c.cfg.RefRow * fr.inH
	yRefW := fr.toWorkY(yRefIn)
	c.gate(fr, hint, yRefW)

	c.rng = frameSeed
	slot := 0
	chans := c.channels(wantLight, wantDark)
	var bestFull, bestGated *fitResult
	var bestFullSel, bestGatedSel selector
	for _, sel := range chans {
		r := c.ransac(l, fr.ww, byBand, sel, slot)
		slot++
		if c.acceptable(r, l) && (bestFull == nil || r.score > bestFull.score) {
			bestFull, bestFullSel = r, sel
		}
		if hint.Valid {
			gs := sel
			gs.gatedOnly = true
			g := c.ransac(l, fr.ww, byBand, gs, slot)
			slot++
			if c.acceptable(g, l) && (bestGated == nil || g.score > bestGated.score) {
				bestGated, bestGatedSel = g, sel
			}
		}
	}
	chosen, chosenSel, fromPrior := bestFull, bestFullSel, false
	if bestGated != nil && (bestFull == nil || bestGated.score >= 0.6*bestFull.score) {
		chosen, chosenSel, fromPrior = bestGated, bestGatedSel, true
	}
	if chosen == nil {
		return notFound(c.whyNot(l))
	}

	// Ambiguity: the best other line, drawn from candidates off the chosen
	// one, under the same gate as the chosen line.
	for i := range c.cands {
		cd := &c.cands[i]
		cd.taken = math.Abs(cd.x-chosen.centre.x(cd.y)) <= math.Max(1.5*chosen.width.x(cd.y), 2*tolerance(cd, fr.ww))
	}
	second := 0.0
	for _, sel := range chans {
		sel.gatedOnly, sel.sampleFree = fromPrior, true
		r := c.ransac(l, fr.ww, byBand, sel, slot)
		slot++
		if c.acceptable(r, l) {
			second = math.Max(second, r.score)
		}
	}
	return c.report(fr, l, chosen, chosenSel.dark, fromPrior, second, hint, yRefIn, yRefW)
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
// in at least a third of the bands along it.
func (c *Classical) acceptable(r *fitResult, l bandLayout) bool {
	if r == nil || !r.ok || r.inliers < 5 {
		return false
	}
	span := (r.yHi - r.yLo + float64(l.step)) / float64(l.y1-l.y0)
	bands := (r.yHi-r.yLo)/float64(l.step) + 1
	return span >= c.cfg.MinSpan && float64(r.inliers) >= bands/3
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

func (c *Classical) report(fr frameGeom, l bandLayout, r *fitResult, dark, fromPrior bool, second float64, hint Hint, yRefIn, yRefW float64) Detection {
	roiH := float64(l.y1 - l.y0)
	step := float64(l.step)
	spanBands := (r.yHi-r.yLo)/step + 1
	span := (r.yHi - r.yLo + step) / roiH

	// Geometry in input pixels.
	xRefW := r.centre.x(yRefW)
	slopeIn := r.centre.slope(yRefW) * fr.sy / fr.sx // dx/dy in input pixels
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
	// A short unseen stretch at the near end (a gap between dashes, a worn
	// patch) is bridged down to the bottom of the ROI: at most 15 % of its
	// height, the same extrapolation the offset at the reference row uses.
	if float64(l.y1)-yBot <= 0.15*roiH {
		yBot = float64(l.y1)
	}
	yTop := math.Max(r.yLo-step/2, float64(l.y0))
	n := min(max(r.inliers, 8), 32)
	d.Points = make([]Point, n)
	for i := range d.Points {
		y := yBot + (yTop-yBot)*float64(i)/float64(n-1)
		d.Points[i] = Point{X: fr.toInX(r.centre.x(y)), Y: fr.toInY(y)}
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
		{clamp01(span / 0.5), "short line"},
		{clamp01(1 - 0.5*r.rms*r.rms), "poor fit"},
		{0.3 + 0.7*clamp01((r.meanSNR-c.cfg.MinSNR)/(2*c.cfg.MinSNR)), "low contrast"},
		{1 - clamp01((second/r.score-0.3)/0.6), "ambiguous: another line nearly as strong"},
		{1 - 0.7*r.satShare, "saturated (glare or reflection)"},
		// Most of the near half clipped: a reflection streak in line with
		// a farther stretch of line, not tape (glare saturates only spots).
		{1 - clamp01(2*(r.nearSat-0.4)), "near part saturated (a mirrored lamp?)"},
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
		// Extrapolating the offset beyond the seen stretch is a guess: a tenth
		// of the ROI height away the factor reaches 0.
		fs = append(fs, factor{clamp01(1 - e/(0.1*roiH)), "reference row off the measured stretch"})
	}
	if hint.Valid {
		if !fromPrior {
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
	_ = dark
	return d
}
