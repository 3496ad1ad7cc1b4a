package vision

import "math"

// candidate is one stripe crossing found in one row band, in working
// pixels (continuous coordinates).
type candidate struct {
	band     int     // band index, 0 at the bottom of the ROI
	y        float64 // band centre row
	x        float64 // centre, from the half-height edges
	w        float64 // width between the half-height edges (horizontal)
	contrast float64 // Weber contrast against the weaker side
	snr      float64 // contrast step in units of the profile noise
	sat      bool    // the stripe is saturated here (a lamp reflection?)
	dark     bool    // darker than the floor (luminance)
	chroma   bool    // found in the chroma channel (a colour ridge)
	cut      bool    // one edge seen, the other lost in glare or off the ROI (cutCandidates)
	// nearClip: nearly clipped pixels (glareLevel) on it or within 2 px
	// of its edges; its width and centre may be those of the part glare
	// left visible.
	nearClip bool
	gated    bool    // within the tracker's prediction gate
	taken    bool    // supports the line already found
	rank     float64 // ordering within the band, strongest first
	// tol and wpart cache tolerance and weight's band-independent part
	// for the fit's inner loops (Classical.primeScores).
	tol, wpart float64
}

// bandLayout is the row bands of the region of interest.
type bandLayout struct {
	x0, x1, y0, y1 int // ROI in working pixels, [x0, x1) × [y0, y1)
	step           int // rows per band
	n              int // number of bands
}

func (b bandLayout) rows(k int) (lo, hi int) {
	hi = b.y1 - k*b.step
	lo = max(hi-b.step, b.y0)
	return lo, hi
}

func (b bandLayout) centre(k int) float64 {
	lo, hi := b.rows(k)
	return float64(lo+hi) / 2
}

func (c *Classical) layout(fr frameGeom) bandLayout {
	r := c.cfg.ROI
	l := bandLayout{
		x0: int(math.Floor(r.Left * float64(fr.ww))),
		x1: int(math.Ceil(r.Right * float64(fr.ww))),
		y0: int(math.Floor(r.Top * float64(fr.wh))),
		y1: int(math.Ceil(r.Bottom * float64(fr.wh))),
	}
	l.x1, l.y1 = min(l.x1, fr.ww), min(l.y1, fr.wh)
	// About 80 bands whatever the size: a band is one row of a 240-row
	// working image's ROI in three, so a slanted stripe barely smears.
	l.step = max(1, int(math.Round(float64(l.y1-l.y0)/80)))
	l.n = (l.y1 - l.y0) / l.step
	return l
}

// noiseSigma estimates the evidence image's noise from the median absolute
// difference of horizontal neighbours (a robust estimate: edges are few,
// so the median sees the noise; σ = 1.4826·MAD/√2 for Gaussian noise).
func (c *Classical) noiseSigma(l bandLayout, ww int) float64 {
	var hist [512]int
	n := 0
	for y := l.y0; y < l.y1; y += 2 {
		row := c.evidence[y*ww : (y+1)*ww]
		for x := l.x0 + 1; x < l.x1; x += 2 {
			d := math.Abs(float64(row[x] - row[x-1]))
			i := min(int(d*4), len(hist)-1)
			hist[i]++
			n++
		}
	}
	if n == 0 {
		return 1
	}
	half, acc := n/2, 0
	med := 0.0
	for i, h := range hist {
		acc += h
		if acc > half {
			med = (float64(i) + 0.5) / 4
			break
		}
	}
	// Floor at the quantisation noise of 8-bit data (1/√12 ≈ 0.29).
	return math.Max(1.4826*med/math.Sqrt2, 0.29)
}

// ridgeWidths lists the centre-box widths tried, in working pixels: from
// 2 px to 22 % of the ROI width in steps of about 1.4×, or around the
// configured width hint.
func (c *Classical) ridgeWidths(fr frameGeom, l bandLayout, dst []int) []int {
	dst = dst[:0]
	lo, hi := 2.0, 0.22*float64(l.x1-l.x0)
	hintW := c.cfg.WidthHintPx * fr.sx
	if c.cfg.WidthHintFrac > 0 {
		hintW = c.cfg.WidthHintFrac * float64(fr.ww)
	}
	if hintW > 0 {
		// Far rows show the stripe narrower than at the reference row.
		lo, hi = math.Max(lo, 0.15*hintW), math.Min(hi, 2.5*hintW)
	}
	for w := lo; w <= hi; w *= 1.4 {
		iw := int(math.Round(w))
		if len(dst) == 0 || iw != dst[len(dst)-1] {
			dst = append(dst, iw)
		}
	}
	if len(dst) == 0 {
		dst = append(dst, int(math.Max(2, math.Round(hi))))
	}
	return dst
}

// bandCandidates appends to c.cands the stripe candidates of band k:
// luminance ridges of the wanted polarities, then (when the chroma channel
// is on) ridges of chroma distance from the band's floor colour.
func (c *Classical) bandCandidates(k int, l bandLayout, fr frameGeom, sigma float64, widths []int, wantLight, wantDark, chroma bool) {
	lo, hi := l.rows(k)
	n := l.x1 - l.x0
	p, gm := c.profile[:n], c.gmax[:n]
	q1, q2 := c.pc1[:n], c.pc2[:n]
	for i := range p {
		p[i], gm[i] = 0, 0
	}
	if chroma {
		for i := range q1 {
			q1[i], q2[i] = 0, 0
		}
	}
	for y := lo; y < hi; y++ {
		off := y*fr.ww + l.x0
		row := c.evidence[off : off+n]
		grow := c.grey[off : off+n]
		for i, v := range row {
			p[i] += float64(v)
			if g := float64(grow[i]); g > gm[i] {
				gm[i] = g
			}
		}
		if chroma {
			r1, r2 := c.cr1[off:off+n], c.cr2[off:off+n]
			for i := range q1 {
				q1[i] += float64(r1[i])
				q2[i] += float64(r2[i])
			}
		}
	}
	inv := 1 / float64(hi-lo)
	for i := range p {
		p[i] *= inv
	}
	c.recordSaturation(k, gm)
	yc := l.centre(k)
	c.prefixSums(p)
	c.ridges(p, gm, widths, l, k, yc, sigma*math.Sqrt(inv), wantLight, wantDark, false, nil)
	if !chroma {
		return
	}
	// Chroma distance from the floor's colour, the band's median
	// chromaticity (the stripe covers a small part of the band), turned
	// into a profile the same ridge filter reads: the band's luminance
	// level times (1 + chromaGain·distance), so that its Weber contrast is
	// chromaGain·distance whatever the light.
	base := c.medianStrided(p, 2, &c.medBase)
	for i := range q1 {
		q1[i] *= inv
		q2[i] *= inv
	}
	b1, b2 := c.medianStrided(q1, 2, &c.medC1), c.medianStrided(q2, 2, &c.medC2)
	pLo, pHi := math.Inf(1), math.Inf(-1)
	for i := range p {
		v := base * (1 + chromaGain*math.Hypot(q1[i]-b1, q2[i]-b2))
		p[i] = v
		if v < pLo {
			pLo = v
		}
		if v > pHi {
			pHi = v
		}
	}
	// No box can stand out by more than the profile's range: when nothing
	// reaches the contrast threshold over the lowest level, the band has
	// no colour ridge and the filters need not run (a grey floor and tape).
	thr := pLo + c.cfg.MinContrast*(pLo+8)
	if pHi < thr {
		return
	}
	// A light box passes only if its mean, so some pixel in it, reaches
	// thr (mean − side ≥ MinContrast·(side + 8) with side ≥ pLo): the
	// filters need only run around those pixels.
	runs := c.runs[:0]
	for i := 0; i < len(p); i++ {
		if p[i] < thr {
			continue
		}
		j := i
		for j < len(p) && p[j] >= thr {
			j++
		}
		runs = append(runs, [2]int{i, j})
		i = j
	}
	c.runs = runs
	c.prefixSums(p)
	from := len(c.cands)
	noise := c.profileNoise(p)
	c.ridges(p, gm, widths, l, k, yc, noise, true, false, true, runs)
	if w, ok := c.widthMem.at(yc); ok {
		c.cutCandidates(p, gm, l, k, yc, w, noise, from)
	}
}

// satLevel is the grey level from which a pixel counts as clipped.
const satLevel = 250

// glareLevel is the grey level from which a pixel counts as in glare,
// nearly clipped: a stripe's colour is washed out there.
const glareLevel = 240

// recordSaturation keeps band k's clipped columns and its columns outside
// the picture (from gm, the band's maximum grey level per column from the
// ROI's left edge) as running counts in c.satPrefix and c.voidPrefix, so
// that unobservable can ask about any stretch of the band.
func (c *Classical) recordSaturation(k int, gm []float64) {
	n := len(gm)
	need := (k + 1) * (n + 1)
	if len(c.satPrefix) < need {
		c.satPrefix = append(c.satPrefix, make([]uint16, need-len(c.satPrefix))...)
	}
	if len(c.voidPrefix) < need {
		c.voidPrefix = append(c.voidPrefix, make([]uint16, need-len(c.voidPrefix))...)
	}
	sp := c.satPrefix[k*(n+1) : need]
	vp := c.voidPrefix[k*(n+1) : need]
	sp[0], vp[0] = 0, 0
	for i, g := range gm {
		sp[i+1], vp[i+1] = sp[i], vp[i]
		if g >= satLevel {
			sp[i+1]++
		} else if g <= voidLevel {
			vp[i+1]++
		}
	}
}

// unobservable says whether a stripe of width w centred at x (working
// pixels) in band k could not have been measured: it or the side boxes the
// ridge filter compares it with (half its width on each side) lie partly
// outside the region of interest (a line leaving the frame at the side),
// a side box reaches a quarter into the black around a wide lens's image
// circle (voidLevel), or half of the stripe or of a side box is clipped, so that the stripe,
// or the floor it must stand out from, is lost in glare. Such a band is
// missing evidence, not evidence that the line is absent. A clipped
// streak that only crosses near the line leaves the band observed.
func (c *Classical) unobservable(l bandLayout, k int, x, w float64) bool {
	n := l.x1 - l.x0
	w = math.Max(w, 2)
	if x-w < float64(l.x0) || x+w > float64(l.x1) || len(c.satPrefix) < (k+1)*(n+1) {
		return x-w < float64(l.x0) || x+w > float64(l.x1)
	}
	sp := c.satPrefix[k*(n+1) : (k+1)*(n+1)]
	xs := x - float64(l.x0)
	edge := func(v float64) int { return min(max(int(math.Round(v)), 0), n) }
	a, b, cc, d := edge(xs-w), edge(xs-0.5*w), edge(xs+0.5*w), edge(xs+w)
	share := func(p []uint16, lo, hi int) float64 {
		if hi <= lo {
			return 0
		}
		return float64(p[hi]-p[lo]) / float64(hi-lo)
	}
	vp := c.voidPrefix[k*(n+1) : (k+1)*(n+1)]
	return share(sp, b, cc) >= 0.5 || share(sp, a, b) >= 0.5 || share(sp, cc, d) >= 0.5 ||
		share(vp, a, b) >= 0.25 || share(vp, cc, d) >= 0.25
}

// chromaGain scales chromaticity distance into Weber contrast: a tape
// whose chromaticity differs from the floor's by 0.1 (a faint tint) just
// passes MinContrast 0.05; yellow, green or blue tape on grey concrete
// differ by about 1 (measured on the nominal tape colours in config.go).
const chromaGain = 0.5

// prefixSums fills c.prefix and c.prefix2 with the running sums of p and p².
func (c *Classical) prefixSums(p []float64) {
	P, P2 := c.prefix[:len(p)+1], c.prefix2[:len(p)+1]
	P[0], P2[0] = 0, 0
	for i, v := range p {
		P[i+1] = P[i] + v
		P2[i+1] = P2[i] + v*v
	}
}

// medianStrided is the median of every stride-th value of v (scratch
// memory in c.scratch; v is not changed), with guess g (see nearMedian).
func (c *Classical) medianStrided(v []float64, stride int, g *nearMedian) float64 {
	s := c.scratch[:0]
	for i := 0; i < len(v); i += stride {
		s = append(s, v[i])
	}
	c.scratch = s
	return g.median(s)
}

// profileNoise estimates the noise of one band profile from the median
// absolute difference of neighbours (as noiseSigma does for the image).
func (c *Classical) profileNoise(p []float64) float64 {
	s := c.scratch[:0]
	for i := 1; i < len(p); i++ {
		s = append(s, math.Abs(p[i]-p[i-1]))
	}
	c.scratch = s
	if len(s) == 0 {
		return 1
	}
	return math.Max(1.4826*c.medNoise.median(s)/math.Sqrt2, 0.05)
}

// nearMedian finds the medians of a series of similar samples, such as
// the profiles of neighbouring bands, faster than selecting each from
// scratch: one pass counts the values below a window around the last
// median and collects those inside it; when the median's rank falls
// among them it is selected from those few, otherwise from the whole
// sample. Either way the result is the sample's exact median (as
// quickMedian's), so the guess changes the cost, never the result. The
// window widens after a miss and narrows while it holds more than a
// quarter of the sample.
type nearMedian struct {
	v, d float64 // last median and the window's half-width
	ok   bool    // v and d hold a guess
	buf  []float64
}

// forget drops the guess (a new frame).
func (g *nearMedian) forget() { g.ok = false }

// median returns the median of s (the upper one for an even count),
// reordering s when the guess misses.
func (g *nearMedian) median(s []float64) float64 {
	if len(s) == 0 {
		return 0
	}
	k := len(s) / 2
	if g.ok {
		lo, hi := g.v-g.d, g.v+g.d
		below := 0
		buf := g.buf[:0]
		for _, v := range s {
			b := 0
			if v < lo {
				b = 1
			}
			below += b
			if v >= lo && v <= hi {
				buf = append(buf, v)
			}
		}
		g.buf = buf
		if k >= below && k < below+len(buf) {
			m := quickSelect(buf, k-below)
			if 4*len(buf) > len(s) {
				g.d *= 0.5
			}
			g.d = math.Max(g.d, 2*math.Abs(m-g.v))
			g.v = m
			return m
		}
	}
	m := quickSelect(s, k)
	if g.ok {
		g.d = math.Max(2*g.d, 2*math.Abs(m-g.v))
	} else {
		g.d = 0.05*math.Abs(m) + 1e-9
	}
	g.v, g.ok = m, true
	return m
}

// quickMedian returns the median (the upper one for an even count) of s,
// reordering s.
func quickMedian(s []float64) float64 {
	if len(s) == 0 {
		return 0
	}
	return quickSelect(s, len(s)/2)
}

// quickSelect returns the k-th smallest value of s (from 0), reordering s
// (Hoare's selection).
func quickSelect(s []float64, k int) float64 {
	lo, hi := 0, len(s)-1
	for lo < hi {
		piv := s[(lo+hi)/2]
		i, j := lo, hi
		for i <= j {
			for s[i] < piv {
				i++
			}
			for s[j] > piv {
				j--
			}
			if i <= j {
				s[i], s[j] = s[j], s[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return s[k]
		}
	}
	return s[k]
}

// ridges runs the bank of box ridge filters over profile p (prefix sums
// in c.prefix, c.prefix2; per-element noise sigmaBand) and appends the
// strongest non-overlapping candidates, at most maxPerBand, to c.cands,
// marked as chroma candidates when chroma is set (p is then the chroma
// profile).
//
// runs, when not nil, are the stretches [a, b) of p high enough for a box
// over them to pass the light contrast test (see bandCandidates); boxes
// that touch none are skipped without changing the result, since each
// would take the filter's quick reject path.
func (c *Classical) ridges(p, gm []float64, widths []int, l bandLayout, k int, yc, sigmaBand float64, wantLight, wantDark, chroma bool, runs [][2]int) {
	n := len(p)
	P, P2 := c.prefix[:n+1], c.prefix2[:n+1]
	bc := c.bandCands[:0]
	minC, minSNR := c.cfg.MinContrast, c.cfg.MinSNR
	for _, w := range widths {
		f := max(1, (w+1)/2)
		st := max(1, w/4)
		noise := sigmaBand * math.Sqrt(1/float64(w)+1/float64(f))
		invW, invF := 1/float64(w), 1/float64(f)
		// Track the previous two evaluations for local-maximum tests.
		var prevL, prevD, prev2L, prev2D float64
		var prevPos int
		var prevSide float64
		var prevOKL, prevOKD bool
		ri := 0
		for c0 := f; c0+w+f <= n; c0 += st {
			if runs != nil {
				// Past run ri (and one step beyond it, where the last
				// local maximum is emitted): on to the next run.
				for ri < len(runs) && c0 >= runs[ri][1]+st {
					ri++
				}
				if ri == len(runs) {
					break
				}
				if a := runs[ri][0]; c0+w <= a {
					// The box touches no run before a−w+1: jump there on the
					// grid, in the quick-reject state.
					c0 = f + (a-w+1-f+st-1)/st*st
					if c0+w+f > n {
						break
					}
					prevL, prevD, prev2L, prev2D = 0, 0, 0, 0
					prevOKL, prevOKD = false, false
				}
			}
			if runs == nil && !prevOKL && !prevOKD {
				// The common case, kept cheap: positions where neither
				// polarity passes (as the quick reject below), scanned
				// without the local-maximum bookkeeping, which after them
				// holds only the last rejected position.
				i := c0
				for ; i+w+f <= n; i += st {
					mc := (P[i+w] - P[i]) * invW
					ml := (P[i] - P[i-f]) * invF
					mr := (P[i+w+f] - P[i+w]) * invF
					t := minC * ((ml+mr)*0.5 + 8)
					if (mc-ml >= t && mc-mr >= t) || (ml-mc >= t && mr-mc >= t) {
						break
					}
				}
				if i > c0 {
					if i-st > c0 {
						prevL, prevD = 0, 0
					}
					prev2L, prev2D = prevL, prevD
					prevL, prevD, prevPos = 0, 0, i-st
				}
				if c0 = i; c0+w+f > n {
					break
				}
			}
			pa, pb, pc, pd := P[c0-f], P[c0], P[c0+w], P[c0+w+f]
			mc := (pc - pb) * invW
			ml := (pb - pa) * invF
			mr := (pd - pc) * invF
			dl, dr := mc-ml, mc-mr
			// Light: the weaker of the two steps up; dark: of the two down.
			sL, sD := dl, -dl
			if dr < sL {
				sL = dr
			}
			if -dr < sD {
				sD = -dr
			}
			side := (ml+mr)*0.5 + 8 // +8 grey levels: no blow-up in the dark
			if !prevOKL && !prevOKD && sL < minC*side && sD < minC*side {
				// Nothing here nor just before: the common case, kept cheap.
				prev2L, prev2D = prevL, prevD
				prevL, prevD, prevPos = 0, 0, c0
				continue
			}
			cL, cD := sL/side, sD/side
			// Emit the previous position if it was a local maximum.
			if prevOKL && prevL >= prev2L && prevL > cL {
				bc = c.addCandidate(bc, p, gm, P, P2, prevPos, w, f, k, yc, prevL, prevL*prevSide/noise, false, chroma)
			}
			if prevOKD && prevD >= prev2D && prevD > cD {
				bc = c.addCandidate(bc, p, gm, P, P2, prevPos, w, f, k, yc, prevD, prevD*prevSide/noise, true, chroma)
			}
			prev2L, prev2D = prevL, prevD
			prevL, prevD, prevPos, prevSide = cL, cD, c0, side
			prevOKL = wantLight && cL >= minC && sL >= minSNR*noise
			prevOKD = wantDark && cD >= minC && sD >= minSNR*noise
		}
	}
	// Non-maximum suppression across widths: strongest first, drop any
	// candidate overlapping a kept one of the same channel.
	for i := range bc {
		bc[i].rank = bc[i].contrast * math.Sqrt(bc[i].snr)
	}
	for i := 1; i < len(bc); i++ { // insertion sort: a band has few candidates
		for j := i; j > 0 && bc[j].rank > bc[j-1].rank; j-- {
			bc[j], bc[j-1] = bc[j-1], bc[j]
		}
	}
	kept := 0
	for i := range bc {
		ok := true
		for j := 0; j < kept; j++ {
			if bc[j].dark == bc[i].dark && bc[j].chroma == bc[i].chroma && math.Abs(bc[j].x-bc[i].x) < 0.5*math.Max(bc[j].w, bc[i].w) {
				ok = false
				break
			}
		}
		if ok {
			bc[kept] = bc[i]
			kept++
			if kept == maxPerBand {
				break
			}
		}
	}
	x0 := float64(l.x0)
	for i := 0; i < kept; i++ {
		cd := bc[i]
		cd.x += x0
		c.cands = append(c.cands, cd)
	}
	c.bandCands = bc[:0]
}

const maxPerBand = 8

// voidLevel is the grey level up to which a column whose brightest pixel
// in the band is no brighter lies outside the picture: the black around a
// wide lens's image circle (8-bit black with compression noise). Lit
// floor, even dim and noisy, has a brighter pixel in every band column.
const voidLevel = 4

// voidShare is the share of columns in [a, b) of gm outside the picture.
func voidShare(gm []float64, a, b int) float64 {
	a, b = max(a, 0), min(b, len(gm))
	if a >= b {
		return 0
	}
	n := 0
	for _, g := range gm[a:b] {
		if g <= voidLevel {
			n++
		}
	}
	return float64(n) / float64(b-a)
}

// crossing walks from the peak pk in direction dir (±1) to the first
// pixel past level (in the stripe's sense sgn) and returns the
// interpolated position of the crossing; limit bounds the walk.
func crossing(p []float64, pk int, level, sgn float64, dir, limit int) float64 {
	for i := pk; i != limit; i += dir {
		j := i + dir
		if sgn*p[j] < sgn*level {
			u := (p[i] - level) / (p[i] - p[j])
			return float64(i) + 0.5 + float64(dir)*u
		}
	}
	return float64(limit) + 0.5
}

// addCandidate refines the ridge response at centre box [c0, c0+w) into a
// candidate (half-height edges), confirms it with the Sauvola threshold,
// and appends it to bc.
func (c *Classical) addCandidate(bc []candidate, p, gm, P, P2 []float64, c0, w, f, band int, yc, contrast, snr float64, dark, chroma bool) []candidate {
	n := len(p)
	sgn := 1.0
	if dark {
		sgn = -1
	}
	// A ridge whose side lies partly outside the picture (the black
	// beyond a wide lens's image circle) is the rim of the picture, not a
	// marking: the floor next to the rim is not lighter than the floor.
	if voidShare(gm, c0-f, c0) >= 0.25 || voidShare(gm, c0+w, c0+w+f) >= 0.25 {
		return bc
	}
	ml := (P[c0] - P[c0-f]) / float64(f)
	mr := (P[c0+w+f] - P[c0+w]) / float64(f)
	base := (ml + mr) / 2
	// Peak inside the centre box.
	pk := c0
	for i := c0; i < c0+w; i++ {
		if sgn*p[i] > sgn*p[pk] {
			pk = i
		}
	}
	half := (base + p[pk]) / 2
	// Walk out to the half-height crossings, at most one side box away.
	eL := float64(c0)
	for i := pk; i > max(c0-f, 0); i-- {
		if sgn*p[i-1] < sgn*half {
			eL = float64(i-1) + 0.5 + (half-p[i-1])/(p[i]-p[i-1])
			break
		}
	}
	eR := float64(c0 + w)
	for i := pk; i < min(c0+w+f, n-1); i++ {
		if sgn*p[i+1] < sgn*half {
			eR = float64(i) + 0.5 + (half-p[i])/(p[i+1]-p[i])
			break
		}
	}
	// A marking has sharp edges; light and shade vary smoothly. Compare
	// the widths at a quarter and at three quarters of the height: for tape
	// (a plateau, slightly blurred) they differ by the blur, for a smooth
	// band of light by about two thirds of its width. Reject when they
	// differ by more than 3 working px plus 45 % of the half-height width.
	lo0, hi0 := max(c0-f, 0), min(c0+w+f, n-1)
	// Each side is measured against its own level (light may fall off
	// across the stripe).
	lvl := func(side, q float64) float64 { return side + q*(p[pk]-side) }
	w25 := crossing(p, pk, lvl(mr, 0.25), sgn, +1, hi0) - crossing(p, pk, lvl(ml, 0.25), sgn, -1, lo0)
	w75 := crossing(p, pk, lvl(mr, 0.75), sgn, +1, hi0) - crossing(p, pk, lvl(ml, 0.75), sgn, -1, lo0)
	if w25-w75 > 3+0.45*(eR-eL) {
		return bc
	}
	if eR-eL < 1 {
		m := (eL + eR) / 2
		eL, eR = m-0.5, m+0.5
	}
	x, width := (eL+eR)/2, eR-eL
	// Sauvola confirmation on the profile normalised to a side level of
	// 128 and turned so that the stripe is the dark foreground: most
	// pixels inside the edges must fall below T = m·(1 + k·(s/R − 1)),
	// with m and s taken over a window three stripe widths wide.
	a := 128 / math.Max(base, 1)
	wlo := max(0, int(x-1.5*width))
	whi := min(n, int(x+1.5*width)+1)
	cnt := float64(whi - wlo)
	m := (P[whi] - P[wlo]) / cnt
	v := math.Max((P2[whi]-P2[wlo])/cnt-m*m, 0)
	s := a * math.Sqrt(v)
	mt := a * m
	if !dark {
		mt = 255 - mt
	}
	thr := mt * (1 + c.cfg.SauvolaK*(s/c.cfg.SauvolaR-1))
	ilo, ihi := max(0, int(math.Ceil(eL-0.5))), min(n-1, int(math.Floor(eR-0.5)))
	fg, tot, satN := 0, 0, 0
	for i := ilo; i <= ihi; i++ {
		vv := a * p[i]
		if !dark {
			vv = 255 - vv
		}
		if vv < thr {
			fg++
		}
		if gm[i] >= satLevel {
			satN++
		}
		tot++
	}
	if tot == 0 || float64(fg) < 0.6*float64(tot) {
		return bc
	}
	// Glare at or next to the crossing: washed-out colour narrows a
	// chroma crossing before its pixels clip.
	glared := false
	for i := max(int(math.Floor(eL))-2, 0); i < min(int(math.Ceil(eR))+2, n); i++ {
		if gm[i] >= glareLevel {
			glared = true
			break
		}
	}
	return append(bc, candidate{
		band: band, y: yc, x: x, w: width,
		contrast: contrast, snr: snr,
		sat:      !dark && float64(satN) >= 0.5*float64(tot),
		dark:     dark,
		chroma:   chroma,
		nearClip: glared,
	})
}
