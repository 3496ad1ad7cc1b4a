package synth

import (
	"math"

	"github.com/hewline/hewline/capture/truth"
)

// truthStepM is the spacing of centreline samples used for truth; the
// chord error of a 1.5 m radius at this step is about 2 µm.
const truthStepM = 0.005

// projected is one centreline sample in the image.
type projected struct {
	s    float64
	x, y float64
	ok   bool
}

// crossing is where a projected polyline first meets an image row.
type crossing struct {
	x, s   float64
	dx, dy float64 // image direction of the polyline there, far-going
	ok     bool
}

// firstCrossings finds, for each row ys[i], the first place (in order of
// increasing s) where the polyline crosses it.
func firstCrossings(pts []projected, ys []float64) []crossing {
	out := make([]crossing, len(ys))
	left := len(ys)
	for k := 0; k+1 < len(pts) && left > 0; k++ {
		p, q := pts[k], pts[k+1]
		if !p.ok || !q.ok || p.y == q.y {
			continue
		}
		lo, hi := math.Min(p.y, q.y), math.Max(p.y, q.y)
		for i, y := range ys {
			if out[i].ok || y < lo || y >= hi {
				continue
			}
			u := (y - p.y) / (q.y - p.y)
			out[i] = crossing{x: lerp(p.x, q.x, u), s: lerp(p.s, q.s, u), dx: q.x - p.x, dy: q.y - p.y, ok: true}
			left--
		}
	}
	return out
}

// projectPath samples a lateral offset lat (metres, positive left) of the
// stripe's path from s0 to s1 through the camera.
func (r *Renderer) projectPath(st *cartState, lat, s0, s1 float64) []projected {
	return r.projectPathStep(st, lat, 0, s0, s1, truthStepM)
}

// projectPathStep samples the stripe's path from s0 to s1 every step
// metres through the camera at lateral offset lat plus side times the
// stripe's half-width at each s (side +1 its left edge, −1 its right).
func (r *Renderer) projectPathStep(st *cartState, lat, side, s0, s1, step float64) []projected {
	g := &r.stripe.g
	n := int((s1-s0)/step) + 1
	out := make([]projected, 0, n)
	for k := 0; k < n; k++ {
		s := s0 + float64(k)*step
		x, y, psi := g.at(s)
		l := lat
		if side != 0 {
			l += side * r.stripe.hwAt(s)
		}
		x += -math.Sin(psi) * l
		y += math.Cos(psi) * l
		u, v, ok := st.pose.project(&r.sc.Camera, vec3{x, y, 0})
		out = append(out, projected{s: s, x: u, y: v, ok: ok})
	}
	return out
}

// crossingsAt finds where the stripe's centreline (side 0) or an edge
// (side ±1) first crosses each image row ys for the frame at time t: with
// a rolling shutter each row is seen from the camera pose at its own
// exposure time, as the renderer draws it.
func (r *Renderer) crossingsAt(st *cartState, side, sNear, sFar float64, ys []float64) []crossing {
	if !r.sc.Light.RollingPose {
		return firstCrossings(r.projectPathStep(st, 0, side, sNear, sFar, truthStepM), ys)
	}
	// each row on its own: found on samples 50 mm apart, then refined on
	// the usual 5 mm samples within 50 mm of it
	const coarse = 10 * truthStepM
	out := make([]crossing, len(ys))
	for i, y := range ys {
		sr := r.cartAt(r.rowTime(st.t, y))
		c := firstCrossings(r.projectPathStep(&sr, 0, side, sNear, sFar, coarse), ys[i:i+1])[0]
		if !c.ok {
			continue
		}
		f := firstCrossings(r.projectPathStep(&sr, 0, side, math.Max(sNear, c.s-coarse), math.Min(sFar, c.s+coarse), truthStepM), ys[i:i+1])[0]
		if f.ok {
			c = f
		}
		out[i] = c
	}
	return out
}

// hidden reports whether a prop stands between the camera of the image row
// y (for the frame of st) and the stripe's centreline point at s.
func (r *Renderer) hidden(st *cartState, y, s float64) bool {
	if len(r.sc.Props) == 0 {
		return false
	}
	sr := *st
	if r.sc.Light.RollingPose {
		sr = r.cartAt(r.rowTime(st.t, y))
	}
	x, yy, _ := r.stripe.g.at(s)
	_, hit := r.propHit(&sr, nil, 0, vec3{x, yy, 0}.sub(sr.pose.c), 1)
	return hit
}

// truthAt computes frame i's truth from the same geometry the renderer
// draws with, for the cart at st (the middle of the exposure).
func (r *Renderer) truthAt(i int, st cartState) truth.Frame {
	w, h := float64(r.w), float64(r.h)
	f := truth.Frame{Frame: i, T: st.t, Points: [][2]float64{}}
	mg := &r.stripe
	// samples from a little behind the camera to the far limit, clipped
	// to where the path exists
	sNear := math.Max(0, st.s-1)
	sFar := math.Min(mg.g.total, st.s+r.sc.Backdrop.FarM)
	if sFar <= sNear {
		f.Tags = append(f.Tags, r.sc.Tags...)
		return f
	}
	var ys []float64
	for y := h - 2; y >= 0; y -= 2 {
		ys = append(ys, y)
	}
	ref := r.refRow()
	ys = append(ys, ref)
	cr := r.crossingsAt(&st, 0, sNear, sFar, ys)
	inView := func(c crossing) bool { return c.ok && c.x >= 0 && c.x <= w-1 }
	var near, seen int
	var inGap, atEnd bool
	for k, y := range ys[:len(ys)-1] {
		c := cr[k]
		present := inView(c) && mg.laid(c.s) >= 0 && !r.hidden(&st, y, c.s)
		if present {
			f.Points = append(f.Points, [2]float64{c.x, y})
		}
		if y >= h/2 {
			near++
			if present {
				seen++
			} else if inView(c) {
				if c.s >= mg.to {
					atEnd = true
				} else {
					inGap = true
				}
			}
		}
	}
	f.Visible = near > 0 && 2*seen >= near
	if c := cr[len(cr)-1]; c.ok {
		f.OffsetPx = c.x - w/2
		f.HeadingDeg = deg(math.Atan2(c.dx, -c.dy))
		if c.dy > 0 { // polyline runs downwards here: flip to far-going
			f.HeadingDeg = deg(math.Atan2(-c.dx, c.dy))
		}
		le := r.crossingsAt(&st, 1, sNear, sFar, []float64{ref})[0]
		ri := r.crossingsAt(&st, -1, sNear, sFar, []float64{ref})[0]
		if le.ok && ri.ok {
			f.WidthPx = math.Abs(ri.x - le.x)
		}
	}
	// floor values in the camera's floor frame: a forward, b right
	ax, ay := math.Cos(st.yaw), math.Sin(st.yaw)
	bx, by := ay, -ax
	gx, gy := st.pose.c.x, st.pose.c.y
	L := r.sc.LookaheadM
	prevF := math.NaN()
	var px, py float64
	for k := 0; ; k++ {
		s := sNear + float64(k)*truthStepM
		if s > sFar {
			break
		}
		x, y, psi := mg.g.at(s)
		fw := (x-gx)*ax + (y-gy)*ay
		if !math.IsNaN(prevF) && prevF < L && fw >= L {
			u := (L - prevF) / (fw - prevF)
			lx, ly := lerp(px, x, u), lerp(py, y, u)
			f.OffsetM = (lx-gx)*bx + (ly-gy)*by
			tx, ty := math.Cos(psi), math.Sin(psi)
			f.HeadingFloorDeg = deg(math.Atan2(tx*bx+ty*by, tx*ax+ty*ay))
			break
		}
		prevF, px, py = fw, x, y
	}
	if r.haveLane {
		r.laneTruth(&f, &st, sNear, sFar)
	}
	f.Tags = append(f.Tags, r.sc.Tags...)
	if inGap {
		f.Tags = append(f.Tags, "gap")
	}
	if atEnd {
		f.Tags = append(f.Tags, "end")
	}
	return f
}
