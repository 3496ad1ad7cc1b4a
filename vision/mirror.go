package vision

import "math"

// mirrorMotion tells a mirrored ceiling lamp from a mark on the floor by
// how it moves between frames. A floor mark moves down the image with the
// floor as the vehicle drives on. A glossy floor's mirror image of a lamp
// at height Z, seen by a camera at height h, lies where the ray to the
// lamp's mirror image (Z below the floor) meets the floor: it is tied to
// the camera, and as the camera moves by Δ it moves only Δ·Z/(h+Z) with
// it, that is Δ·h/(h+Z) relative to the camera, against Δ for the floor
// (the law of reflection; for lamps 4 m up and a camera 1 m up, a fifth).
// So the end of a streak of saturated candidates is followed from the
// last frame to this one and compared with the floor's texture beside it,
// at the same rows (where both map to the floor alike): a streak that
// moves less than half as far as the floor there is no floor mark, and
// its candidates are dropped. Ceiling lamps hang far higher than the
// camera of a floor vehicle (common practice), so a half holds with room.
//
// Only a streak's real ends are judged: where saturation merely stops
// along a line that goes on (unsaturated), the line moving along itself
// would show no move. Nothing is decided where the floor does not move (the vehicle stands),
// where its texture is too faint to follow, or where a streak's end is
// not in view (a bar crossing the patch matches at any shift along it).
//
// A mirrorMotion keeps the last frame's working luminance (its own copy).
type mirrorMotion struct {
	prev   []uint8
	pw, ph int
	// last is how many streaks the last call dropped, judged how many it
	// could compare with the floor
	last, judged int
	seg          []int // scratch: candidate indices of one streak
	assign       []bool
	gone         []bool
}

// Motion patches and search, in working pixels.
const (
	mirrorPatch    = 6    // half size of a patch
	mirrorMaxShift = 14   // largest vertical move between frames
	mirrorMinFloor = 2    // the floor must move at least this far
	mirrorRatio    = 0.5  // a floor mark moves at least this share as far
	mirrorDistinct = 0.75 // best match below this share of the mean misfit
	mirrorMinBands = 3    // a streak spans at least this many bands
)

// drop removes from c's candidates (and byBand) those of saturated
// streaks that do not move with the floor since the last frame, and
// keeps this frame's luminance for the next. It returns how many streaks
// were dropped.
func (m *mirrorMotion) drop(c *Classical, fr frameGeom, l bandLayout, byBand [][2]int) int {
	w, h := fr.ww, fr.wh
	m.last, m.judged = 0, 0
	defer func() {
		m.prev = append(m.prev[:0], c.grey[:w*h]...)
		m.pw, m.ph = w, h
	}()
	if m.pw != w || m.ph != h || len(m.prev) != w*h {
		return 0
	}
	n := len(c.cands)
	m.assign, m.gone = resetBools(m.assign, n), resetBools(m.gone, n)
	dropped := 0
	for k := 0; k < l.n; k++ {
		for i := byBand[k][0]; i < byBand[k][1]; i++ {
			if !c.cands[i].sat || m.assign[i] {
				continue
			}
			seg := m.chain(c, l, byBand, i)
			if len(seg) < mirrorMinBands {
				continue
			}
			if m.mirrored(c, l, seg, w, h) {
				for _, j := range seg {
					m.gone[j] = true
				}
				dropped++
			}
		}
	}
	m.last = dropped
	if dropped == 0 {
		return 0
	}
	// compact the candidates, band by band
	out := 0
	for k := 0; k < l.n; k++ {
		lo := out
		for i := byBand[k][0]; i < byBand[k][1]; i++ {
			if !m.gone[i] {
				c.cands[out] = c.cands[i]
				out++
			}
		}
		byBand[k] = [2]int{lo, out}
	}
	c.cands = c.cands[:out]
	return dropped
}

// chain follows saturated candidates up from candidate i, band by band
// (a band may be skipped), each within its width and a few pixels of the
// last; the indices, near end first, in m.seg.
func (m *mirrorMotion) chain(c *Classical, l bandLayout, byBand [][2]int, i int) []int {
	seg := append(m.seg[:0], i)
	m.assign[i] = true
	last := c.cands[i]
	for k := last.band + 1; k < l.n && k <= last.band+2; k++ {
		best, bd := -1, math.Inf(1)
		for j := byBand[k][0]; j < byBand[k][1]; j++ {
			cd := &c.cands[j]
			if !cd.sat || m.assign[j] {
				continue
			}
			if d := math.Abs(cd.x - last.x); d <= math.Max(last.w, cd.w)+3*float64(k-last.band) && d < bd {
				best, bd = j, d
			}
		}
		if best >= 0 {
			seg = append(seg, best)
			m.assign[best] = true
			last = c.cands[best]
		}
	}
	m.seg = seg
	return seg
}

// mirrored reports whether the streak seg (candidate indices, near end
// first) moved less than half as far as the floor beside it since the
// last frame, judged at its near or, failing that, its far end.
func (m *mirrorMotion) mirrored(c *Classical, l bandLayout, seg []int, w, h int) bool {
	st := float64(l.step)
	ends := [2]struct {
		cd  *candidate
		dir float64 // +1 down the image (the near end), −1 up
	}{{&c.cands[seg[0]], 1}, {&c.cands[seg[len(seg)-1]], -1}}
	for _, e := range ends {
		// only a real end: no candidate of any kind goes on from it in
		// the next two bands (where saturation merely stops along a
		// line, the line moving along itself shows no move)
		if m.continues(c, l, e.cd, int(e.dir)) {
			continue
		}
		// the patch holds the streak's end: half a band past the last
		// candidate and the bare floor beyond
		x := int(math.Round(e.cd.x))
		y := int(math.Round(e.cd.y + e.dir*st))
		vs, ok := m.shift(c.grey, x, y, w, h)
		if !ok {
			continue
		}
		// the floor beside it, on either side, clear of the streak
		off := int(math.Ceil(e.cd.w/2)) + 2*mirrorPatch + 2
		for _, xf := range [2]int{x - off, x + off} {
			if m.saturatedNear(c.grey, xf, y, w, h) {
				continue
			}
			vf, ok := m.shift(c.grey, xf, y, w, h)
			if !ok || vf < mirrorMinFloor {
				continue
			}
			m.judged++
			return vs < mirrorRatio*vf
		}
	}
	return false
}

// saturatedNear reports whether the patch at (x, y) holds clipped pixels
// (another streak) or leaves the image.
func (m *mirrorMotion) saturatedNear(cur []uint8, x, y, w, h int) bool {
	p := mirrorPatch
	if x-p-2 < 0 || x+p+2 >= w || y-p < 0 || y+p >= h {
		return true
	}
	for yy := y - p; yy <= y+p; yy++ {
		for xx := x - p - 2; xx <= x+p+2; xx++ {
			if cur[yy*w+xx] >= 250 {
				return true
			}
		}
	}
	return false
}

// shift is the vertical move v ≥ 0 (working rows, down the image) of the
// patch at (x, y) from the last frame to cur: the v (and a horizontal
// move of up to two pixels) whose patch in the last frame, v rows higher,
// matches best by the sum of absolute differences. ok false when the
// patch leaves the image or the best match is not distinct (a texture too
// faint, or a bar along the move).
func (m *mirrorMotion) shift(cur []uint8, x, y, w, h int) (v float64, ok bool) {
	p := mirrorPatch
	if x-p-2 < 0 || x+p+2 >= w || y-p-mirrorMaxShift < 0 || y+p >= h {
		return 0, false
	}
	best, bestV, sum, cnt := math.Inf(1), 0, 0.0, 0
	var costs [mirrorMaxShift + 1]float64
	for dv := 0; dv <= mirrorMaxShift; dv++ {
		cv := math.Inf(1)
		for du := -2; du <= 2; du++ {
			s := 0
			for yy := y - p; yy <= y+p; yy++ {
				a := cur[yy*w+x-p : yy*w+x+p+1]
				b := m.prev[(yy-dv)*w+x-p+du : (yy-dv)*w+x+p+1+du]
				for i := range a {
					d := int(a[i]) - int(b[i])
					if d < 0 {
						d = -d
					}
					s += d
				}
			}
			cv = math.Min(cv, float64(s))
		}
		costs[dv] = cv
		sum += cv
		cnt++
		if cv < best {
			best, bestV = cv, dv
		}
	}
	if cnt == 0 || !(best < mirrorDistinct*sum/float64(cnt)) {
		return 0, false
	}
	v = float64(bestV)
	if bestV > 0 && bestV < mirrorMaxShift {
		// parabola through the best and its neighbours
		c0, c1, c2 := costs[bestV-1], costs[bestV], costs[bestV+1]
		if d := c0 - 2*c1 + c2; d > 0 {
			v += math.Max(-0.5, math.Min(0.5, (c0-c2)/(2*d)))
		}
	}
	return v, true
}

// forget drops the last frame (a new clip, or a frame that could not be
// read: the next one is not its successor).
func (m *mirrorMotion) forget() { m.pw, m.ph = 0, 0 }

// continues reports whether a candidate (saturated or not) lies within
// cd's width and a few pixels of it in either of the two bands beyond it,
// down the image for dir > 0 (bands below), up for dir < 0, or whether
// those bands leave the ROI (the end is not in view).
func (m *mirrorMotion) continues(c *Classical, l bandLayout, cd *candidate, dir int) bool {
	for s := 1; s <= 2; s++ {
		k := cd.band - s*dir // band 0 is the bottom
		if k < 0 || k >= l.n {
			return true
		}
		for j := range c.cands {
			o := &c.cands[j]
			if o.band == k && math.Abs(o.x-cd.x) <= math.Max(o.w, cd.w)+3*float64(s) {
				return true
			}
		}
	}
	return false
}

// resetBools returns b (grown when needed) as n false values.
func resetBools(b []bool, n int) []bool {
	if cap(b) < n {
		return make([]bool, n)
	}
	b = b[:n]
	clear(b)
	return b
}
