package vision

import (
	"iter"
	"math"
)

// curve is x = a + b·t + c·t² with t = (y − y0)/scale, in working pixels.
type curve struct {
	a, b, c   float64
	y0, scale float64
}

func (q curve) x(y float64) float64 {
	t := (y - q.y0) / q.scale
	return q.a + q.b*t + q.c*t*t
}

// slope is dx/dy at y.
func (q curve) slope(y float64) float64 {
	t := (y - q.y0) / q.scale
	return (q.b + 2*q.c*t) / q.scale
}

// fitResult is the best line found among a set of candidates.
type fitResult struct {
	ok       bool
	centre   curve
	width    curve // width across rows (c = 0: a straight width profile)
	score    float64
	inliers  int
	bands    []int // inlier candidate index per band, −1 if none
	yLo, yHi float64
	rms      float64 // residual in units of the inlier tolerance
	meanSNR  float64
	satShare float64
	// nearSat is satShare over the inliers in the near (lower) half of
	// the ROI: a line whose near part is all clipped pixels is more likely
	// a mirrored lamp bridging to a line farther on than tape.
	nearSat float64
	// bridged: a dashed line seen only beyond the reference row, run out
	// across the near gap (see Classical.bridges).
	bridged bool
	// nearX, nearSlope: the run-out's straight line at row yHi (x and
	// dx/dy), used below yHi when bridged.
	nearX, nearSlope float64
	// yh is the line's own horizon row (see nearHorizon), −Inf when none
	// was found; no inlier lies above it.
	yh float64
	// bridgeSpread is how far apart the estimates of a bridged line
	// land at the reference row, in units of the agreement required
	// (see Classical.bridges).
	bridgeSpread float64
	// priorPicked: of the bridge's two bounds, which disagree, the
	// prediction admitted one (see bridges).
	priorPicked bool
	// unseen counts the bands along the measured stretch without support
	// where the line could not have been seen (unobservable: clipped by
	// glare, or off the side of the frame).
	unseen int
	// nearUnseen is unseen over the near (lower) half of the ROI.
	nearUnseen int
	// persp, when perspOK, is the centreline as the image of a path on
	// the floor (see perspFit), used in place of centre from row
	// perspTop down; above perspTop it runs out along its tangent there.
	persp    perspCurve
	perspOK  bool
	perspTop float64
}

// satFactor is the confidence factor for clipped inliers: a line of
// clipped pixels may be a lamp's reflection rather than tape.
func (r *fitResult) satFactor() float64 { return 1 - 0.7*r.satShare }

// nearSatFactor is the confidence factor for a clipped near half: most of
// it clipped is a reflection streak in line with a farther stretch of
// line, not tape (glare saturates only spots).
func (r *fitResult) nearSatFactor() float64 { return 1 - clamp01(2*(r.nearSat-0.4)) }

// observedBands is the number of bands along the measured stretch in
// which the line could have been seen: every band from yLo to yHi less
// the unseen ones, but at least half of them, so that a line mostly lost
// in glare still needs support of its own.
func (r *fitResult) observedBands(l bandLayout) float64 {
	bands := (r.yHi-r.yLo)/float64(l.step) + 1
	return math.Max(bands-float64(r.unseen), bands/2)
}

// nearLine fits a straight line x = x0 + s·(y − yHi), by weighted least
// squares, to the inliers of r at rows yTop and below (the nearest
// marks, see nearMarksTop). ok is false when they are too few.
func (c *Classical) nearLine(r *fitResult, l bandLayout, yTop float64) (x0, s float64, ok bool) {
	var sw, sy, sx, syy, sxy float64
	n := 0
	for _, i := range r.bands {
		if i < 0 || c.cands[i].y < yTop {
			continue
		}
		cd := &c.cands[i]
		wt := c.weight(cd, l)
		y := cd.y - r.yHi
		sw += wt
		sy += wt * y
		sx += wt * cd.x
		syy += wt * y * y
		sxy += wt * y * cd.x
		n++
	}
	det := sw*syy - sy*sy
	if n < 3 || det <= 1e-9*sw*sw {
		return 0, 0, false
	}
	s = (sw*sxy - sy*sx) / det
	x0 = (sx - s*sy) / sw
	return x0, s, true
}

// nearMarksTop is the far end of the nearest marks of r: from the near
// end up, mark by mark, until they span at least minRows rows. A dashed
// line's parabola is fitted across the gaps and its tangent at the near
// end can be bent by a far dash on a curve; the near marks alone say
// where the line goes next. ok is false when fewer than three inliers
// span fewer rows.
func (c *Classical) nearMarksTop(r *fitResult, minRows float64) (yTop float64, ok bool) {
	n := 0
	yTop = math.Inf(1)
	gapped := false
	for _, i := range r.bands {
		if i < 0 {
			if n > 0 {
				gapped = true
			}
			continue
		}
		if gapped && r.yHi-yTop >= minRows {
			break // a mark ended and the marks so far span enough rows
		}
		gapped = false
		yTop = math.Min(yTop, c.cands[i].y)
		n++
	}
	return yTop, n >= 3 && r.yHi-yTop >= minRows
}

// xAt is the centreline at row y: the fitted curve over the measured
// stretch [yLo, yHi], and its tangent beyond the ends (a parabola run out
// past its data bends ever faster; the tangent is the cautious guess
// across a gap between dashes).
func (r *fitResult) xAt(y float64) float64 {
	switch {
	case y > r.yHi && r.bridged:
		return r.nearX + r.nearSlope*(y-r.yHi)
	case y > r.yHi && r.perspOK:
		return r.persp.x(r.yHi) + r.persp.slope(r.yHi)*(y-r.yHi)
	case r.perspOK && y < r.perspTop:
		return r.persp.x(r.perspTop) + r.persp.slope(r.perspTop)*(y-r.perspTop)
	case r.perspOK:
		// A path on the floor bends in the image towards its horizon:
		// its perspective curve runs on beyond the far inlier.
		return r.persp.x(y)
	}
	return r.stretch().x(y)
}

// stretch is a quadratic over the rows lo to hi it was fitted on, run
// on along its end tangents beyond them.
type stretch struct {
	q      curve
	lo, hi float64
}

// stretch is r's quadratic over its inliers' rows (xAt without bridges
// and perspective curve).
func (r *fitResult) stretch() stretch { return stretch{q: r.centre, lo: r.yLo, hi: r.yHi} }

func (s stretch) x(y float64) float64 {
	e := math.Min(math.Max(y, s.lo), s.hi)
	return s.q.x(e) + s.q.slope(e)*(y-e)
}

func (s stretch) slope(y float64) float64 { return s.q.slope(math.Min(math.Max(y, s.lo), s.hi)) }

// dashed says whether the measured stretch has gaps of its own: a run of
// bands without support, inside the stretch, at least 5 % of the ROI
// height long.
func (r *fitResult) dashed(l bandLayout) bool {
	run, longest := 0, 0
	seen := false
	for _, i := range r.bands {
		if i >= 0 {
			if seen {
				longest = max(longest, run)
			}
			seen, run = true, 0
			continue
		}
		run++
	}
	return float64(longest*l.step) >= 0.05*float64(l.y1-l.y0)
}

// perspCurve is x = A + B·u + C/u, u = y − yh: on a flat floor a path
// of constant curvature seen in perspective, with yh the horizon row
// (see TestPerspLine).
type perspCurve struct{ yh, a, b, c float64 }

// x is the curve at row y (below the horizon).
func (p perspCurve) x(y float64) float64 {
	u := y - p.yh
	return p.a + p.b*u/100 + p.c*100/u
}

// slope is dx/dy at row y.
func (p perspCurve) slope(y float64) float64 {
	u := y - p.yh
	return p.b/100 - p.c*100/(u*u)
}

// perspLine fits a perspCurve by weighted least squares to r's inliers
// at rows yTop and below (−Inf: all of them), with the horizon row yh
// where r's width profile runs out. ok is false without a horizon above
// the inliers or with fewer than six of them.
func (c *Classical) perspLine(r *fitResult, l bandLayout, yTop float64) (p perspCurve, ok bool) {
	wc := r.width
	if wc.b <= 0 {
		return p, false
	}
	yh := wc.y0 - wc.scale*wc.a/wc.b
	if yh >= r.yLo-float64(l.step) {
		return p, false
	}
	return c.perspAt(r, l, yh, yTop, false)
}

// perspAt fits a perspCurve with horizon row yh by weighted least squares
// to r's inliers at rows yTop and below, the clipped ones left out when
// unclippedOnly. ok is false with fewer than six of them.
func (c *Classical) perspAt(r *fitResult, l bandLayout, yh, yTop float64, unclippedOnly bool) (p perspCurve, ok bool) {
	p.yh = yh
	var A [3][3]float64
	var B [3]float64
	n := 0
	for _, i := range r.bands {
		if i < 0 || c.cands[i].y < yTop || (unclippedOnly && c.cands[i].sat) {
			continue
		}
		cd := &c.cands[i]
		u := cd.y - p.yh
		v := [3]float64{1, u / 100, 100 / u}
		wt := c.weight(cd, l)
		addNormal(&A, &B, v, wt, cd.x)
		n++
	}
	if n < 6 {
		return p, false
	}
	sol, ok := solve3(A, B)
	if !ok {
		return p, false
	}
	p.a, p.b, p.c = sol[0], sol[1], sol[2]
	return p, true
}

// perspFit makes r's centreline the image of a path on the floor where
// that fits r's inliers decisively better than the quadratic. On a flat
// floor seen by a camera without roll, a path whose lateral position is
// a quadratic in the distance ahead (a constant bend, or a straight
// line) is exactly x = A + B·u + C/u in the image, u = y − yh
// (perspCurve): the bend grows without bound towards the horizon, where
// a quadratic in the image hardly bends. A low camera sees that: the
// near marks a gentle curve, the far ones swinging across the image.
//
// The horizon is the line's own, from its widths (r.yh, or widthHorizon
// where no inlier lay above it to drop), and must lie in the region: a
// camera looking down sees no horizon, and far above the frame the two
// models agree. Close to the horizon a row's error grows as 1/u²: the
// curve is fitted to the inliers more than a tenth of the near inlier's
// height below the horizon, and used from the near end up to perspTop:
// no nearer the horizon than that, and only while it stays within a
// quarter frame width of the image and within 4·maxSlope of the vertical
// (about 86°); beyond perspTop, its tangent there. Both models have
// three parameters; the curve is taken when its weighted squared
// residuals over the same inliers (the unclipped ones when there are
// three or more, as in refine) are under half the quadratic's. With
// lens distortion neither model is exact; fisheye-tight's lines mostly
// fall short of that margin.
func (c *Classical) perspFit(r *fitResult, l bandLayout, ww int) {
	r.perspOK = false
	yh := r.yh
	if math.IsInf(yh, -1) {
		// No inlier above the horizon to drop: the line ends below it.
		var ok bool
		if yh, _, _, ok = c.widthHorizon(r, l); !ok {
			return
		}
	}
	if yh < float64(l.y0) || yh >= r.yHi {
		return
	}
	nu := 0
	for _, i := range r.bands {
		if i >= 0 && !c.cands[i].sat {
			nu++
		}
	}
	unclipped := nu >= 3
	top := yh + 0.1*(r.yHi-yh)
	p, ok := c.perspAt(r, l, yh, top, unclipped)
	if !ok {
		return
	}
	var ssQ, ssP float64
	for _, i := range r.bands {
		if i < 0 || c.cands[i].y < top || (unclipped && c.cands[i].sat) {
			continue
		}
		cd := &c.cands[i]
		wt := c.weight(cd, l)
		dq, dp := cd.x-r.centre.x(cd.y), cd.x-p.x(cd.y)
		ssQ += wt * dq * dq
		ssP += wt * dp * dp
	}
	if ssP >= 0.5*ssQ {
		return
	}
	y := r.yHi
	for ; y > top; y-- {
		x := p.x(y)
		if math.Abs(p.slope(y)) > 4*maxSlope || x < -0.25*float64(ww) || x > 1.25*float64(ww) {
			break
		}
	}
	r.persp, r.perspOK, r.perspTop = p, true, math.Min(y+1, r.yHi)
}

// longestGap is the longest unsupported stretch between two supporting
// bands of r, as a floor length (see floorLen).
func (r *fitResult) longestGap(l bandLayout) float64 {
	g, last := 0.0, -1
	for k, i := range r.bands {
		if i < 0 {
			continue
		}
		if last >= 0 && k-last > 1 {
			// Unsupported rows: from band k's near edge to band last's far edge.
			g = math.Max(g, r.floorLen(float64(l.y1-k*l.step), float64(l.y1-(last+1)*l.step)))
		}
		last = k
	}
	return g
}

// floorLen is the length along the floor between rows yFar < yNear, in
// arbitrary units shared by every stretch of the same line: on a flat
// floor seen in perspective a row's image width w of the stripe is
// proportional to the row's distance below the horizon and the distance
// along the floor to the inverse of it, so a row spans a floor length
// proportional to 1/w² (and a constant length without perspective). The
// fitted width profile gives w; widths under half a pixel count as half
// a pixel.
func (r *fitResult) floorLen(yFar, yNear float64) float64 {
	if yNear <= yFar {
		return 0
	}
	const steps = 16
	h := (yNear - yFar) / steps
	s := 0.0
	for i := 0; i < steps; i++ {
		w := math.Max(r.width.x(yFar+(float64(i)+0.5)*h), 0.5)
		s += h / (w * w)
	}
	return s
}

// marks counts the stretches of at least minLen consecutive supporting
// bands along the line (a dash or a dot each, on a marked line).
func (r *fitResult) marks(minLen int) int {
	n, run := 0, 0
	for _, i := range r.bands {
		if i < 0 {
			run = 0
			continue
		}
		run++
		if run == minLen {
			n++
		}
	}
	return n
}

// slopeAt is dx/dy of xAt at row y.
func (r *fitResult) slopeAt(y float64) float64 {
	switch {
	case y > r.yHi && r.bridged:
		return r.nearSlope
	case r.perspOK:
		return r.persp.slope(math.Min(math.Max(y, r.perspTop), r.yHi))
	}
	return r.stretch().slope(y)
}

// fitter holds the fit's scratch memory.
type fitter struct {
	best, trial []int
	res         [9]fitResult // up to three channels × (full, gated, second)
	idx         []int
	// bandTable's cache
	tabT, tabF      []float64
	tabL            bandLayout
	tabY0, tabScale float64
	tabOK           bool
}

// selector picks the candidates one fit may use.
type selector struct {
	dark      bool // the polarity (luminance channels)
	chroma    bool // the chroma channel instead (dark is then false)
	gatedOnly bool // only candidates inside the prediction gate
	// sampleFree: draw hypotheses only from candidates off the line
	// already found (they may still gain support from its candidates, so
	// a branch sharing the stripe's near end is scored in full).
	sampleFree bool
	// freeOnly: use no candidate of a line already found, not even for
	// support (the second boundary of a lane is a line of its own).
	freeOnly bool
}

func (s selector) ok(cd *candidate) bool {
	return cd.dark == s.dark && cd.chroma == s.chroma && (!s.gatedOnly || cd.gated) && (!s.freeOnly || !cd.taken)
}

func (s selector) sample(cd *candidate) bool {
	return s.ok(cd) && (!s.sampleFree || !cd.taken)
}

// maxSlope bounds |dx/dy| along the line: 75° from the image vertical.
var maxSlope = math.Tan(75 * math.Pi / 180)

func (c *Classical) nextRand(n int) int {
	// xorshift64*: a fixed seed per frame keeps Detect deterministic.
	c.rng ^= c.rng >> 12
	c.rng ^= c.rng << 25
	c.rng ^= c.rng >> 27
	return int((c.rng * 2685821657736338717) >> 33 % uint64(n))
}

// tolerance is how far from the line a candidate may lie and still
// support it: half its width, at least 0.6 % of the working width.
func tolerance(cd *candidate, ww int) float64 {
	return math.Max(0.5*cd.w, 0.006*float64(ww))
}

// weight of a supporting candidate: contrast in noise units (capped, so a
// single glaring streak does not outvote a long dim stripe), reduced when
// saturated, a little more near the bottom of the ROI, where the floor
// right ahead of the vehicle is, and less for hairlines: a joint, crack or
// grout line a pixel or two wide counts about a third of a stripe
// (w/(w + 0.6 % of the working width)).
func (c *Classical) weight(cd *candidate, l bandLayout) float64 {
	return c.weightPart(cd) * bandFactor(cd.band, l)
}

// weightPart is weight without the factor for the band's place.
func (c *Classical) weightPart(cd *candidate) float64 {
	w := math.Min(cd.snr, 20) / 20
	w *= cd.w / (cd.w + c.hairline)
	if cd.sat {
		w *= 0.3
	}
	return w
}

// bandFactor is weight's factor for band k's place in layout l.
func bandFactor(k int, l bandLayout) float64 {
	return 1 - 0.4*float64(k)/float64(max(l.n, 1))
}

// primeScores fills every candidate's tol and wpart (tolerance and
// weightPart, for working width ww), which the inner loops of the fit
// read instead of recomputing them for every hypothesis. Called before
// each fit and scoring pass over c.cands, so that candidates added or
// changed since (tests build their own) are never scored stale.
func (c *Classical) primeScores(ww int) {
	for i := range c.cands {
		cd := &c.cands[i]
		cd.tol, cd.wpart = tolerance(cd, ww), c.weightPart(cd)
	}
}

// bandTable returns, for layout l and a curve's y0 and scale, each band's
// curve parameter t = (centre − y0)/scale and weight factor (bandFactor),
// as curve.x and weight compute them; kept in the fitter while l, y0 and
// scale stay the same (all hypotheses of one fit share them).
func (f *fitter) bandTable(l bandLayout, y0, scale float64) (ts, fs []float64) {
	if !f.tabOK || f.tabL != l || f.tabY0 != y0 || f.tabScale != scale {
		f.tabT, f.tabF = f.tabT[:0], f.tabF[:0]
		for k := 0; k < l.n; k++ {
			f.tabT = append(f.tabT, (l.centre(k)-y0)/scale)
			f.tabF = append(f.tabF, bandFactor(k, l))
		}
		f.tabOK, f.tabL, f.tabY0, f.tabScale = true, l, y0, scale
	}
	return f.tabT[:l.n], f.tabF[:l.n]
}

// evaluate scores curve q against the candidates of one polarity: per
// band the closest candidate within tolerance supports it.
//
// It reads the candidates' cached tol and wpart (primeScores must have
// run since c.cands last changed) and computes what curve.x, tolerance
// and weight would, in the same order, so the score is the same to the
// bit.
func (c *Classical) evaluate(q curve, l bandLayout, ww int, byBand [][2]int, sel selector, out []int) (score float64, count int) {
	ts, fs := c.fit.bandTable(l, q.y0, q.scale)
	for k := 0; k < l.n; k++ {
		out[k] = -1
		lo, hi := byBand[k][0], byBand[k][1]
		if lo == hi {
			continue
		}
		t := ts[k]
		xq := q.a + q.b*t + q.c*t*t
		bestD, bestI := math.Inf(1), -1
		for i := lo; i < hi; i++ {
			cd := &c.cands[i]
			if !sel.ok(cd) {
				continue
			}
			d := math.Abs(cd.x - xq)
			if d <= cd.tol && d < bestD {
				bestD, bestI = d, i
			}
		}
		if bestI >= 0 {
			cd := &c.cands[bestI]
			r := bestD / cd.tol
			score += cd.wpart * fs[k] * (1 - 0.5*r*r)
			out[k] = bestI
			count++
		}
	}
	return score, count
}

// plausible rejects curves that lean more than 75° or bend more than 60°
// over the ROI.
func plausible(q curve, l bandLayout) bool {
	return plausibleBetween(q, float64(l.y0), float64(l.y1))
}

// plausibleBetween is plausible over rows y0 to y1.
func plausibleBetween(q curve, y0, y1 float64) bool {
	s0, s1 := q.slope(y0), q.slope(y1)
	if math.Abs(s0) > maxSlope || math.Abs(s1) > maxSlope {
		return false
	}
	return math.Abs(math.Atan(s0)-math.Atan(s1)) <= 60*math.Pi/180
}

// plausibleOver is plausible judged over the rows of q's inliers (bands,
// indices into cands, −1 for none) instead of the whole ROI: a refit
// through a short stretch of a tight bend, or through marks at one end
// of the region, may lean or bend beyond the limits when run out to the
// ROI's far edge, where nothing was measured (see Classical.tangentEnds).
func plausibleOver(q curve, bands []int, cands []candidate) bool {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, i := range bands {
		if i >= 0 {
			lo, hi = math.Min(lo, cands[i].y), math.Max(hi, cands[i].y)
		}
	}
	return lo < hi && plausibleBetween(q, lo, hi)
}

// ransac finds the best-supported curve among the candidates accepted by
// use. byBand gives each band's candidate index range.
func (c *Classical) ransac(l bandLayout, ww int, byBand [][2]int, sel selector, slot int) *fitResult {
	f := &c.fit
	res := &f.res[slot]
	*res = fitResult{bands: res.bands[:0]}
	f.idx = f.idx[:0]
	c.primeScores(ww)
	for i := range c.cands {
		if sel.sample(&c.cands[i]) {
			f.idx = append(f.idx, i)
		}
	}
	if len(f.idx) < 3 {
		return res
	}
	if cap(f.best) < l.n {
		f.best, f.trial = make([]int, l.n), make([]int, l.n)
	}
	best, trial := f.best[:l.n], f.trial[:l.n]
	y0 := float64(l.y1)
	sc := float64(l.y1 - l.y0)
	minSpread := 0.15 * sc
	bestScore, bestN := 0.0, 0
	for it := 0; it < c.cfg.Iterations; it++ {
		i1 := f.idx[c.nextRand(len(f.idx))]
		i2 := f.idx[c.nextRand(len(f.idx))]
		p1, p2 := &c.cands[i1], &c.cands[i2]
		if math.Abs(p1.y-p2.y) < minSpread {
			continue
		}
		var q curve
		q.y0, q.scale = y0, sc
		if it%2 == 0 {
			// A straight line through two candidates.
			t1, t2 := (p1.y-y0)/sc, (p2.y-y0)/sc
			q.b = (p2.x - p1.x) / (t2 - t1)
			q.a = p1.x - q.b*t1
		} else {
			i3 := f.idx[c.nextRand(len(f.idx))]
			p3 := &c.cands[i3]
			if math.Abs(p3.y-p1.y) < minSpread/2 || math.Abs(p3.y-p2.y) < minSpread/2 {
				continue
			}
			var ok bool
			if q, ok = parabola3(p1, p2, p3, y0, sc); !ok {
				continue
			}
		}
		if !plausible(q, l) {
			continue
		}
		s, n := c.evaluate(q, l, ww, byBand, sel, trial)
		if s > bestScore {
			bestScore, bestN = s, n
			res.centre = q
			copy(best, trial)
		}
	}
	if bestScore == 0 {
		return res
	}
	res.bands = append(res.bands[:0], best...)
	res.score, res.inliers = bestScore, bestN
	c.refine(res, l, ww, byBand, sel)
	return res
}

func parabola3(p1, p2, p3 *candidate, y0, sc float64) (curve, bool) {
	t1, t2, t3 := (p1.y-y0)/sc, (p2.y-y0)/sc, (p3.y-y0)/sc
	d := (t1 - t2) * (t1 - t3) * (t2 - t3)
	if math.Abs(d) < 1e-9 {
		return curve{}, false
	}
	// Lagrange form collected into a + b·t + c·t².
	c := (t3*(p2.x-p1.x) + t2*(p1.x-p3.x) + t1*(p3.x-p2.x)) / d
	b := (t3*t3*(p1.x-p2.x) + t2*t2*(p3.x-p1.x) + t1*t1*(p2.x-p3.x)) / d
	a := p1.x - b*t1 - c*t1*t1
	return curve{a: a, b: b, c: c, y0: y0, scale: sc}, true
}

// widthSel says which inliers a width profile is fitted to. A cut
// crossing's width is the remembered one, not a measurement: none takes
// it.
type widthSel int

const (
	widthAll       widthSel = iota // every measured crossing
	widthUnclipped                 // the unclipped ones
	widthClean                     // the unclipped ones with no glare beside them (nearClip)
)

// keeps says whether sel takes candidate cd.
func (sel widthSel) keeps(cd *candidate) bool {
	return !cd.cut && !(sel >= widthUnclipped && cd.sat) && !(sel == widthClean && cd.nearClip)
}

// widthFit fits the width profile w(t) = a + b·t, t = (y − y0)/sc, to
// the inliers of r that sel keeps and returns it with the number of
// inliers used.
//
// The fit is robust. A weighted least-squares line comes first; when
// some crossing lies more than widthOutlier off it and there are at
// least six, the line is taken again as the repeated-median line of
// Siegel (A. F. Siegel, "Robust regression using repeated medians",
// Biometrika 69(1), 1982, pp. 242-244; cited from memory): for each
// crossing the median of the slopes to all the others, the median of
// those as the slope, and the median intercept; it holds while fewer
// than half the crossings are off. The least-squares fit is then redone
// over the crossings within widthOutlier of that line, when they are
// at least three quarters of all.
//
// A marking's width changes smoothly with the row, so a stretch that
// is wider (a tyre mark or a patch merged with the stripe, glare beside
// it) or narrower (worn edges) pulls a least-squares line towards
// itself, and its crossings then pass refine's width test of the
// line's own inliers. Where the repeated-median line explains fewer
// than three quarters of the crossings, the widths disagree too much to
// say which are the line's own: a line made of unrelated marks (the rim
// of a wide lens's image circle and rack posts, fisheye-tight at
// 320×240, frame 280 of TestSynthImageCircleRim, reached confidence 0.54
// without the rule), or a
// branch merged with the stripe over much of the near half (branch at
// 320×240, frame 107: 24 of 62 crossings, 34 px against the 24 px the
// others lead to). There the least-squares line stands.
//
// Scratch memory lives in c.rmT, c.rmW, c.rmS and c.rmS2; the fit
// allocates only while those grow.
func (c *Classical) widthFit(r *fitResult, l bandLayout, y0, sc float64, sel widthSel) (curve, int) {
	wc, n := c.widthLSQ(r, l, y0, sc, sel, curve{})
	if n < 6 {
		return wc, n
	}
	ts, ws := c.rmT[:0], c.rmW[:0]
	off := false
	for cd := range c.widthInliers(r, sel) {
		ts, ws = append(ts, (cd.y-y0)/sc), append(ws, cd.w)
		off = off || widthOff(cd.w, wc.x(cd.y))
	}
	c.rmT, c.rmW = ts, ws
	if !off {
		return wc, n
	}
	rm, ok := c.repeatedMedian(ts, ws)
	if !ok {
		return wc, n
	}
	rm.y0, rm.scale = y0, sc
	if wc2, n2 := c.widthLSQ(r, l, y0, sc, sel, rm); n2 >= 3 && 4*n2 >= 3*n {
		return wc2, n2
	}
	return wc, n
}

// widthOutlier is the factor by which a crossing's width may differ
// from the line's width profile before widthFit leaves it out.
const widthOutlier = 1.3

// widthOff says whether width w differs from the expected ew by more
// than the factor widthOutlier (never when ew is not positive).
func widthOff(w, ew float64) bool {
	return ew > 0 && (w > widthOutlier*ew || w < ew/widthOutlier)
}

// repeatedMedian returns Siegel's repeated-median line w = a + b·t
// through the points (ts[i], ws[i]) (as a curve with y0 0 and scale 1),
// ok false when no two points differ in t. A median of an even count is
// the upper middle value (quickMedian). Scratch memory in c.rmS, c.rmS2.
func (c *Classical) repeatedMedian(ts, ws []float64) (curve, bool) {
	med, sl := c.rmS[:0], c.rmS2[:0]
	for i := range ts {
		med = med[:0]
		for j := range ts {
			if dt := ts[j] - ts[i]; math.Abs(dt) > 1e-9 {
				med = append(med, (ws[j]-ws[i])/dt)
			}
		}
		if len(med) > 0 {
			sl = append(sl, quickMedian(med))
		}
	}
	if len(sl) == 0 {
		c.rmS, c.rmS2 = med, sl
		return curve{}, false
	}
	b := quickMedian(sl)
	med = med[:0]
	for i := range ts {
		med = append(med, ws[i]-b*ts[i])
	}
	a := quickMedian(med)
	c.rmS, c.rmS2 = med, sl
	return curve{a: a, b: b, scale: 1}, true
}

// widthInliers yields the inliers of r that sel keeps, nearest band
// first.
func (c *Classical) widthInliers(r *fitResult, sel widthSel) iter.Seq[*candidate] {
	return func(yield func(*candidate) bool) {
		for _, i := range r.bands {
			if i < 0 {
				continue
			}
			if cd := &c.cands[i]; sel.keeps(cd) && !yield(cd) {
				return
			}
		}
	}
}

// widthLSQ is widthFit's weighted least-squares line over the inliers
// sel keeps and, when prev is set (its scale not zero), lie within
// widthOutlier of prev.
func (c *Classical) widthLSQ(r *fitResult, l bandLayout, y0, sc float64, sel widthSel, prev curve) (curve, int) {
	var sw, st, sw2, stt, stw float64
	n := 0
	for cd := range c.widthInliers(r, sel) {
		if prev.scale != 0 && widthOff(cd.w, prev.x(cd.y)) {
			continue
		}
		t := (cd.y - y0) / sc
		wt := c.weight(cd, l)
		sw += wt
		st += wt * t
		stt += wt * t * t
		sw2 += wt * cd.w
		stw += wt * t * cd.w
		n++
	}
	if sw == 0 {
		return curve{y0: y0, scale: sc}, 0
	}
	det := sw*stt - st*st
	wc := curve{y0: y0, scale: sc, a: sw2 / sw}
	if det > 1e-9*sw*sw {
		wc.b = (sw*stw - st*sw2) / det
		wc.a = (sw2 - wc.b*st) / sw
	}
	return wc, n
}

// refine fits the centre and width curves to the inliers by weighted least
// squares (curvature lightly damped, so noise does not bend a straight
// stripe), drops inliers whose width disagrees with the width profile by
// more than a factor 1.6, and re-collects inliers, twice.
func (c *Classical) refine(res *fitResult, l bandLayout, ww int, byBand [][2]int, sel selector) {
	sc := res.centre.scale
	y0 := res.centre.y0
	res.yh = math.Inf(-1)
	for pass := 0; pass < 2; pass++ {
		// Width profile: weighted straight line w(t), from the unclipped
		// inliers when there are three or more: a clipped crossing's
		// width is the clipped stretch's (a lamp's glare merged with the
		// stripe), not the stripe's.
		wc, nu := c.widthFit(res, l, y0, sc, widthUnclipped)
		if nu < 3 {
			var na int
			if wc, na = c.widthFit(res, l, y0, sc, widthAll); na == 0 {
				res.ok = false
				return
			}
		}
		res.width = wc
		// Off the floor: inliers above the line's own horizon, the row
		// where its near half's width runs out, are not on the floor
		// (rack uprights, door frames and people standing on the line's
		// far end seen by a low camera) and drop out.
		if c.ownHorizon {
			if yh, ok := c.nearHorizon(res, l); ok {
				for k, i := range res.bands {
					if i >= 0 && c.offFloor(c.cands[i], yh, l) {
						res.bands[k] = -1
					}
				}
				res.yh = yh
			}
		}
		// Centre: weighted quadratic (no damping of c: t and t² are nearly collinear over a short span, so any damping would straighten real curves).
		var A [3][3]float64
		var B [3]float64
		n := 0
		for k, i := range res.bands {
			if i < 0 {
				continue
			}
			cd := &c.cands[i]
			if ew := wc.x(cd.y); ew > 0 && (cd.w > 1.6*ew || cd.w < ew/1.6) {
				res.bands[k] = -1
				continue
			}
			// A clipped crossing's centre is the clipped stretch's, which
			// a lamp's glare beside or over the stripe widens and moves:
			// where the line has unclipped crossings of its own, they
			// alone place it. The clipped ones stay inliers where the
			// line passes through them.
			if cd.sat && nu >= 3 {
				continue
			}
			t := (cd.y - y0) / sc
			wt := c.weight(cd, l)
			v := [3]float64{1, t, t * t}
			addNormal(&A, &B, v, wt, cd.x)
			n++
		}
		if n < 3 {
			res.ok = false
			return
		}
		A[2][2] += 1e-6 * A[0][0] // keeps the system solvable when t² ≈ 0
		sol, ok := solve3(A, B)
		if !ok {
			res.ok = false
			return
		}
		q := curve{a: sol[0], b: sol[1], c: sol[2], y0: y0, scale: sc}
		// A refit is judged over the whole ROI, or (tangentEnds) over its
		// inliers' rows only, since beyond them the line is run out along
		// its end tangents (fitResult.xAt). An implausible first refit
		// refuses the line: its inliers were collected for the sampled
		// curve, not for one through them. A later one keeps the last.
		if !plausible(q, l) && !(c.tangentEnds && plausibleOver(q, res.bands, c.cands)) {
			if pass == 0 {
				res.ok = false
				return
			}
			break
		}
		res.centre = q
		res.score, res.inliers = c.evaluate(q, l, ww, byBand, sel, res.bands)
		if !math.IsInf(res.yh, -1) {
			res.score, res.inliers = c.cutAbove(res, l, ww, res.yh)
		}
	}
	// Summaries.
	res.yLo, res.yHi = math.Inf(1), math.Inf(-1)
	var r2, snr, sat, n, nearN, nearS float64
	for _, i := range res.bands {
		if i < 0 {
			continue
		}
		cd := &c.cands[i]
		if 2*cd.band < l.n {
			nearN++
			if cd.sat {
				nearS++
			}
		}
		res.yLo = math.Min(res.yLo, cd.y)
		res.yHi = math.Max(res.yHi, cd.y)
		d := (cd.x - res.centre.x(cd.y)) / tolerance(cd, ww)
		r2 += d * d
		snr += math.Min(cd.snr, 40)
		if cd.sat {
			sat++
		}
		n++
	}
	if n == 0 {
		res.ok = false
		return
	}
	res.unseen, res.nearUnseen = 0, 0
	for k, i := range res.bands {
		if i >= 0 {
			continue
		}
		if y := l.centre(k); y >= res.yLo && y <= res.yHi && c.unobservable(l, k, res.centre.x(y), res.width.x(y)) {
			res.unseen++
			if 2*k < l.n {
				res.nearUnseen++
			}
		}
	}
	res.rms = math.Sqrt(r2 / n)
	res.meanSNR = snr / n
	res.satShare = sat / n
	res.nearSat = 0
	if nearN > 0 {
		res.nearSat = nearS / nearN
	}
	res.ok = true
}

// solve3 solves A·x = b by Gaussian elimination with partial pivoting.
func solve3(A [3][3]float64, b [3]float64) ([3]float64, bool) {
	for col := 0; col < 3; col++ {
		p := col
		for r := col + 1; r < 3; r++ {
			if math.Abs(A[r][col]) > math.Abs(A[p][col]) {
				p = r
			}
		}
		if math.Abs(A[p][col]) < 1e-12 {
			return [3]float64{}, false
		}
		A[col], A[p] = A[p], A[col]
		b[col], b[p] = b[p], b[col]
		for r := col + 1; r < 3; r++ {
			f := A[r][col] / A[col][col]
			for s := col; s < 3; s++ {
				A[r][s] -= f * A[col][s]
			}
			b[r] -= f * b[col]
		}
	}
	var x [3]float64
	for r := 2; r >= 0; r-- {
		s := b[r]
		for k := r + 1; k < 3; k++ {
			s -= A[r][k] * x[k]
		}
		x[r] = s / A[r][r]
	}
	return x, true
}

// addNormal adds one weighted observation x ≈ v·c to the normal equations
// A c = B of a three-parameter least-squares fit.
func addNormal(A *[3][3]float64, B *[3]float64, v [3]float64, w, x float64) {
	for r := 0; r < 3; r++ {
		for s := 0; s < 3; s++ {
			A[r][s] += w * v[r] * v[s]
		}
		B[r] += w * v[r] * x
	}
}

// nearHorizon finds the horizon of line res on the floor from its own
// width: on a flat floor seen in perspective the image width of a stripe
// of constant width is proportional to the row's distance below the
// horizon, so a straight line fitted to the widths of the near half of
// the inliers (by rows; near the vehicle the line is surely on the floor)
// reaches zero at the horizon. ok is false without perspective to judge
// by (widths not narrowing away from the vehicle), when the near half's
// inliers span less than half of its rows (glare or the frame's edge
// hiding the rest: a short stretch says little of the narrowing), when
// the horizon
// lies above every inlier, or when the inliers above it narrow away too
// (the horizon misjudged: they are the line's own far stretch).
func (c *Classical) nearHorizon(res *fitResult, l bandLayout) (yh float64, ok bool) {
	yh, lo, b, ok := c.widthHorizon(res, l)
	if !ok || yh <= lo {
		return 0, false
	}
	// What lies above must not narrow away as the floor does (at a
	// quarter of the near half's rate or more): a far stretch of the line
	// whose near half's widths were misjudged (glare, wear) does, an
	// upright or a person standing on it does not.
	var sw, sy, syy, sx, sxy float64
	n := 0
	for _, i := range res.bands {
		if i < 0 || c.cands[i].y >= yh {
			continue
		}
		cd := &c.cands[i]
		y := cd.y - yh
		sw++
		sy += y
		syy += y * y
		sx += cd.w
		sxy += y * cd.w
		n++
	}
	if det := sw*syy - sy*sy; n >= 4 && det > 1e-9*sw*sw {
		if bUp := (sw*sxy - sy*sx) / det; bUp > 0.25*b {
			return 0, false
		}
	}
	return yh, true
}

// widthHorizon is the row where the width profile of res's near half
// runs out (see nearHorizon), with the row lo of its far inlier and the
// profile's narrowing b (dw/dy). ok is false without perspective to judge
// by or over too short a stretch.
func (c *Classical) widthHorizon(res *fitResult, l bandLayout) (yh, lo, b float64, ok bool) {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, i := range res.bands {
		if i >= 0 {
			lo, hi = math.Min(lo, c.cands[i].y), math.Max(hi, c.cands[i].y)
		}
	}
	mid := (lo + hi) / 2
	var sw, sy, syy, sx, sxy float64
	n := 0
	yTop := hi
	for _, i := range res.bands {
		if i < 0 || c.cands[i].y < mid || c.cands[i].sat {
			continue
		}
		cd := &c.cands[i]
		wt := c.weight(cd, l)
		y := cd.y - hi
		sw += wt
		sy += wt * y
		syy += wt * y * y
		sx += wt * cd.w
		sxy += wt * y * cd.w
		yTop = math.Min(yTop, cd.y)
		n++
	}
	// The widths must be measured over most of the near half to be run
	// out to a horizon: a short stretch left between glare and the
	// frame's edge says little of how the line narrows.
	det := sw*syy - sy*sy
	if n < 6 || det <= 1e-9*sw*sw || hi-yTop < 0.5*(hi-mid) {
		return 0, lo, 0, false
	}
	b = (sw*sxy - sy*sx) / det // dw/dy: positive when the line narrows away
	a := (sx - b*sy) / sw      // width at row hi
	if b <= 0 || a <= 0 {
		return 0, lo, 0, false
	}
	return hi - a/b, lo, b, true
}

// cutAbove drops res's inliers above row yh and returns its score and
// inlier count over those left.
func (c *Classical) cutAbove(res *fitResult, l bandLayout, ww int, yh float64) (score float64, n int) {
	for k, i := range res.bands {
		if i < 0 {
			continue
		}
		cd := &c.cands[i]
		if c.offFloor(*cd, yh, l) {
			res.bands[k] = -1
			continue
		}
		r := math.Abs(cd.x-res.centre.x(cd.y)) / tolerance(cd, ww)
		score += c.weight(cd, l) * (1 - 0.5*r*r)
		n++
	}
	return score, n
}

// offFloor says whether candidate cd lies off the floor of a line whose
// own horizon is row yh: above it by more than a tenth of the ROI
// height, or above it and wider than a hairline (twice c.hairline). The
// horizon is measured from widths, to a few rows: just above it a far
// stretch of the line itself, a pixel or two wide, may still be seen.
func (c *Classical) offFloor(cd candidate, yh float64, l bandLayout) bool {
	return cd.y < yh && (cd.w > 2*c.hairline || cd.y < yh-0.1*float64(l.y1-l.y0))
}
