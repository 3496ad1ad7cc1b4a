package vision

// dashMemFrames is how many frames a dashed line's gap is remembered
// without being seen again: 45 frames, 1.5 s at 30 frames/s, or 3 m of
// travel at 2 m/s, several dash periods of the markings in use (dashes
// 0.1–0.5 m with gaps as long or longer, common practice).
const dashMemFrames = 45

// dashMemory remembers the longest gap of the last dashed line the
// detector chose, as a floor length (fitResult.floorLen, whose units are
// shared by stretches of the same line seen at the same range of rows).
// A wide or low camera sees a dashed marking one dash at a time on some
// frames: a single dash has no gap of its own to judge the unseen
// stretch at the vehicle by, but the pattern seen a moment ago does (see
// Classical.bridges). The memory ages frame by frame and is dropped on a
// frame the detector cannot use, and when a long solid line is seen (the
// marking changed).
type dashMemory struct {
	gap    float64
	frames int // frames since the gap was last measured
	ok     bool
}

// forget drops the remembered gap.
func (m *dashMemory) forget() { *m = dashMemory{} }

// age counts one more frame, forgetting the gap after dashMemFrames.
func (m *dashMemory) age() {
	if !m.ok {
		return
	}
	m.frames++
	if m.frames > dashMemFrames {
		m.forget()
	}
}

// see updates the memory with the line r chosen on this frame: a dashed
// line with at least two marks of its own is remembered; a solid line
// over at least half of the region of interest clears the memory.
func (m *dashMemory) see(r *fitResult, l bandLayout) {
	if r == nil || !r.ok {
		return
	}
	if r.dashed(l) {
		if r.marks(2) >= 2 {
			if g := r.longestGap(l); g > 0 {
				m.gap, m.frames, m.ok = g, 0, true
			}
		}
		return
	}
	if (r.yHi-r.yLo+float64(l.step))/float64(l.y1-l.y0) >= 0.5 {
		m.forget()
	}
}
