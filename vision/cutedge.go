package vision

import "math"

// widthMemFrames is how many frames the stripe's width profile is
// remembered without being measured again: 45 frames, 1.5 s at 30
// frames/s. A stripe's width at a given row changes only with the
// camera's height and pitch and the line's angle, slowly on a vehicle.
const widthMemFrames = 45

// widthMemory remembers the width profile (working pixels against the
// row) of the last line the detector trusted (see seeWidth). A stripe
// half lost in a lamp's glare, or leaving the frame at the side, shows
// one edge only; the remembered width says where its other edge, and so
// its centre, lies (cutCandidates). The memory ages frame by frame and
// is dropped on a frame the detector cannot use.
type widthMemory struct {
	w      curve
	frames int
	ok     bool
}

// widthMemMin is the fewest clean two-sided crossings (see seeWidth) a
// width profile is remembered from.
const widthMemMin = 8

func (m *widthMemory) forget() { *m = widthMemory{} }

func (m *widthMemory) age() {
	if !m.ok {
		return
	}
	m.frames++
	if m.frames > widthMemFrames {
		m.forget()
	}
}

// at is the remembered width at working row y, ok false when none is
// remembered or it is not positive there.
func (m *widthMemory) at(y float64) (float64, bool) {
	if !m.ok {
		return 0, false
	}
	w := m.w.x(y)
	return w, w > 0
}

// seeWidth remembers the width profile of line r, chosen on this frame
// with confidence conf, when the detector trusts it (at least 0.5) and
// it was measured from at least widthMemMin two-sided crossings clear of
// glare (not clipped, no nearly clipped pixel beside them: nearClip)
// over a quarter of the ROI's height or more. Crossings beside glare
// are left out because washed-out colour narrows them: with them, the
// remembered width at the reference row shrank from 19.7 to 12 px over
// the ten frames a lamp's glare took to reach the stripe (glare at
// 320×240, frames 259-269; the truth's is 20.5).
func (c *Classical) seeWidth(r *fitResult, l bandLayout, conf float64) {
	if r == nil || !r.ok || conf < 0.5 {
		return
	}
	w, n := c.widthFit(r, l, r.centre.y0, r.centre.scale, widthClean)
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, i := range r.bands {
		if i < 0 {
			continue
		}
		if cd := &c.cands[i]; widthClean.keeps(cd) {
			lo, hi = math.Min(lo, cd.y), math.Max(hi, cd.y)
		}
	}
	if n < widthMemMin || hi-lo < 0.25*float64(l.y1-l.y0) {
		return
	}
	c.widthMem = widthMemory{w: w, ok: true}
}

// cutCandidates appends to c.cands the crossings of band k where the
// stripe shows one edge only, its other side lost in a clipped run of
// glare or beyond the side of the region of interest. Beside a lamp's
// reflection the stripe's near side is washed out to white, and the
// ridge filter, which wants the stripe to stand out from both sides,
// finds nothing, while the far edge is still sharp against the floor;
// a low or wide camera sees a bend's near end leave the frame. Such a
// crossing is placed half the remembered width W (working pixels) in
// from the visible edge, and marked cut.
//
// p is the band's profile (the chroma profile, whose floor is grey and
// whose glare is colourless), gm its brightest grey level per column,
// both from the ROI's left edge; noise is p's noise per column; from is
// the index in c.cands of the band's first candidate of this channel.
//
// Accepted only when (a) the clipped run is long enough to hold the
// hidden part of the stripe, (b) the visible part, at least 1.5 px and
// a seventh of W, no wider than W, stands out from the floor beyond the
// edge by the contrast and noise thresholds ridges applies, and (c) the
// edge is sharp: its 25 % and 75 % crossings lie no farther apart than
// one side of ridge's test allows (a glare halo fades over many pixels;
// tape has an edge). A crossing the ridge filter found for the visible
// part alone (nearClip, sharing the edge) is replaced; one it found for
// the whole stripe, near the cut one's place, keeps the band.
func (c *Classical) cutCandidates(p, gm []float64, l bandLayout, k int, yc, W, noise float64, from int) {
	n := len(p)
	if W < 3 || n < 8 {
		return
	}
	f := max(2, int(math.Round(W/2)))
	jmax := int(math.Ceil(W)) + 1
	for a := 0; a < n; {
		if gm[a] < satLevel {
			a++
			continue
		}
		b := a
		for b < n && gm[b] >= satLevel {
			b++
		}
		if b-a >= 2 {
			c.cutSide(p, gm, l, k, yc, W, noise, from, a, b, +1, f, jmax, false)
			c.cutSide(p, gm, l, k, yc, W, noise, from, a, b, -1, f, jmax, false)
		}
		a = b
	}
	// The sides of the region of interest hide the rest of a stripe that
	// leaves it (a low or wide camera sees the near end of a bend cut by
	// the frame's edge), as a clipped run of any length would.
	c.cutSide(p, gm, l, k, yc, W, noise, from, -n, 0, +1, f, jmax, true)
	c.cutSide(p, gm, l, k, yc, W, noise, from, n, 2*n, -1, f, jmax, true)
}

// cutSide tries the stripe edge beside clipped run [a, b) on side dir
// (+1: right of the run, −1: left of it); see cutCandidates. At the
// region's side (edge set) the stripe must reach it: its first column
// stands out from the floor by at least half the step (glare washes
// the colour out next to a clipped run, the frame's edge does not).
func (c *Classical) cutSide(p, gm []float64, l bandLayout, k int, yc, W, noise float64, from, a, b, dir, f, jmax int, edgeRun bool) {
	n := len(p)
	s, boundary := b, float64(b) // first visible column, and the run's edge
	if dir < 0 {
		s, boundary = a-1, float64(a)
	}
	pos := func(j int) int { return s + dir*j }
	far := pos(jmax + f - 1)
	if far < 0 || far >= n || s < 0 || s >= n {
		return
	}
	// Floor beyond the farthest edge the stripe can have, and the peak of
	// the visible part before it.
	fl, clipped := 0.0, 0
	for j := jmax; j < jmax+f; j++ {
		fl += p[pos(j)]
		if gm[pos(j)] >= satLevel {
			clipped++
		}
	}
	fl /= float64(f)
	if 2*clipped >= f {
		return
	}
	jp := 0
	for j := 1; j < jmax; j++ {
		if p[pos(j)] > p[pos(jp)] {
			jp = j
		}
	}
	pk := p[pos(jp)]
	step := pk - fl
	if step < c.cfg.MinContrast*(fl+8) || step < c.cfg.MinSNR*noise*math.Sqrt(1+1/float64(f)) {
		return
	}
	if edgeRun && p[s] < fl+0.5*step {
		return
	}
	limit := pos(jmax)
	edge := crossing(p, pos(jp), fl+0.5*step, 1, dir, limit)
	c25 := crossing(p, pos(jp), fl+0.25*step, 1, dir, limit)
	c75 := crossing(p, pos(jp), fl+0.75*step, 1, dir, limit)
	if math.Abs(c25-c75) > 1.5+0.225*W {
		return
	}
	vis := math.Abs(edge - boundary)
	if vis < math.Max(1.5, W/7) || vis > W+1 {
		return
	}
	if hidden := W - vis; float64(b-a) < hidden-1 {
		return
	}
	x := edge - float64(dir)*W/2 + float64(l.x0)
	xe := edge + float64(l.x0)
	for i := from; i < len(c.cands); i++ {
		cd := &c.cands[i]
		if cd.cut || cd.sat {
			continue
		}
		if cd.nearClip && math.Abs(cd.x+float64(dir)*cd.w/2-xe) < 1.5 {
			// The visible part's own crossing: its centre and width are
			// the part's, the cut crossing replaces it.
			c.cands = append(c.cands[:i], c.cands[i+1:]...)
			i--
			continue
		}
		if math.Abs(cd.x-x) < 0.25*W {
			return // measured from both sides already
		}
	}
	c.cands = append(c.cands, candidate{
		band: k, y: yc, x: x, w: W,
		contrast: step / (fl + 8), snr: step / noise,
		chroma: true, cut: true,
	})
}
