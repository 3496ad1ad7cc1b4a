package synth

import "math"

// Tube is a ceiling luminaire: a straight luminous bar from (X1, Y1) to
// (X2, Y2) at height Z (world metres), WidthM wide. A glossy floor
// (Floor.Gloss > 0) mirrors it.
//
// The reflection is rendered by the law of reflection on the floor plane
// z = 0: the ray from the camera centre C to a floor point P leaves P with
// its horizontal direction kept and its vertical component reversed, so it
// reaches height Z at Q = P + (P − C)·Z/C.z (horizontal components). The
// pixel sees the lamp when Q lies on the bar. Equivalently the streak lies
// on the floor at P = C + (L − C)·C.z/(C.z + Z) for each lamp point L: it
// is tied to the camera, not to the floor, and moves with the camera.
type Tube struct {
	X1, Y1, X2, Y2, Z float64
	WidthM            float64
	// Strength is the lamp's radiance seen in the mirror, in units of a
	// full-white floor at gain 1, before Floor.Gloss scales it; a few
	// units saturate the sensor.
	Strength float64
	// BlurM softens the bar's edges at lamp height (floor roughness: a
	// real epoxy floor is not a perfect mirror); 0 is a sharp mirror.
	BlurM float64
}

// tubeGlow is the mirrored light of the tubes reaching the camera from
// floor point (x, y), for a pixel whose floor footprint is fp metres.
func (r *Renderer) tubeGlow(st *cartState, x, y, fp float64) float64 {
	tubes := r.sc.Light.Tubes
	if len(tubes) == 0 || r.sc.Floor.Gloss <= 0 {
		return 0
	}
	c := st.pose.c
	var s float64
	for i := range tubes {
		tb := &tubes[i]
		if i < len(r.tubeBox) {
			// outside the floor box of this lamp's mirror image: dark
			if b := &r.tubeBox[i]; x < b[0] || x > b[2] || y < b[1] || y > b[3] {
				continue
			}
		}
		k := tb.Z / c.z
		qx, qy := x+(x-c.x)*k, y+(y-c.y)*k
		// the pixel's footprint magnified to lamp height
		soft := math.Max(fp*(1+k), tb.BlurM)
		d := segDist(qx, qy, tb.X1, tb.Y1, tb.X2, tb.Y2)
		if v := clamp01(0.5 + (tb.WidthM/2-d)/soft); v > 0 {
			s += tb.Strength * v
		}
	}
	return r.sc.Floor.Gloss * s
}

// boxTubes computes each lamp's floor box for the rows' camera states
// sts (one, or one per row with a rolling shutter): where its mirror image
// can show, P = C + (L − C)·C.z/(C.z + Z) for the lamp's points L, over
// the first and last row's camera (the camera moves straight within a
// frame), grown by its half width and blur and a margin for the pixels'
// footprint (10 cm). Call before shading a frame's rows.
func (r *Renderer) boxTubes(sts []cartState) {
	tubes := r.sc.Light.Tubes
	r.tubeBox = r.tubeBox[:0]
	if len(tubes) == 0 || r.sc.Floor.Gloss <= 0 || len(sts) == 0 {
		return
	}
	for i := range tubes {
		tb := &tubes[i]
		b := [4]float64{math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)}
		for _, st := range []*cartState{&sts[0], &sts[len(sts)-1]} {
			c := st.pose.c
			k := c.z / (c.z + tb.Z)
			m := (tb.WidthM/2+tb.BlurM)*k + 0.1
			for _, p := range [][2]float64{{tb.X1, tb.Y1}, {tb.X2, tb.Y2}} {
				x, y := c.x+(p[0]-c.x)*k, c.y+(p[1]-c.y)*k
				b[0], b[1] = math.Min(b[0], x-m), math.Min(b[1], y-m)
				b[2], b[3] = math.Max(b[2], x+m), math.Max(b[3], y+m)
			}
		}
		r.tubeBox = append(r.tubeBox, b)
	}
}

// segDist is the distance from (x, y) to the segment (x1, y1)–(x2, y2).
func segDist(x, y, x1, y1, x2, y2 float64) float64 {
	ex, ey := x2-x1, y2-y1
	l2 := ex*ex + ey*ey
	t := 0.0
	if l2 > 0 {
		t = clamp01(((x-x1)*ex + (y-y1)*ey) / l2)
	}
	return hypot2(x-x1-t*ex, y-y1-t*ey)
}

// tubesAlong lays luminaires along path p from s0 to s1 every spacingM:
// each lengthM long, parallel to the path, at lateral offsets lats (metres,
// positive left, taken in turn), at height z.
func tubesAlong(p Path, s0, s1, spacingM, lengthM, z float64, lats []float64, strength float64) []Tube {
	g := newGeom(p)
	var out []Tube
	for i, s := 0, s0; s < s1; i, s = i+1, s+spacingM {
		lat := lats[i%len(lats)]
		x1, y1, psi1 := g.at(s)
		x2, y2, psi2 := g.at(s + lengthM)
		out = append(out, Tube{
			X1: x1 - lat*math.Sin(psi1), Y1: y1 + lat*math.Cos(psi1),
			X2: x2 - lat*math.Sin(psi2), Y2: y2 + lat*math.Cos(psi2),
			Z: z, WidthM: 0.12, Strength: strength, BlurM: 0.02,
		})
	}
	return out
}

// epoxy is a glossy grey epoxy floor: it mirrors the tubes.
func epoxy() Floor {
	return Floor{Colour: RGB{0.42, 0.44, 0.45}, Texture: 0.05, Gloss: 1}
}

func init() {
	add(stripeReflections)
	add(laneReflections)
}

// stripeReflections: twin-tube luminaires 4 m up along the aisle, to
// either side of the tape and over it, on a glossy epoxy floor. Their
// mirror images are saturated streaks parallel to the tape that slide
// along with the cart; the tape has a gap from 5.0 to 6.6 m where only
// the streaks remain, so the fail-safe must fire there.
func stripeReflections() Scenario {
	sc := weave()
	sc.Name = "reflections"
	sc.Notes = "glossy epoxy floor mirroring 1.2 m ceiling luminaires 4 m up (beside and over the tape) as saturated streaks that move with the cart; the tape is missing from 5.0 to 6.6 m"
	sc.Floor = epoxy()
	sc.Stripe.Gaps = []Span{{From: 5.0, To: 6.6}}
	sc.Light.Tubes = tubesAlong(sc.Stripe.Path, 1, sc.Stripe.Path.Length()+4, 1.6, 1.2, 4, []float64{0.9, -0.6, 0.05, -1.2, 0.5}, 3)
	sc.Tags = []string{"reflection"}
	return sc
}

// laneReflections: the lane cart on glossy epoxy under luminaires along
// the lane; the streaks fall between and across the boundaries.
func laneReflections() Scenario {
	sc := laneBase()
	sc.Name = "lane-reflections"
	sc.Notes = "lane mode on a glossy epoxy floor mirroring 1.2 m ceiling luminaires 4 m up as saturated streaks inside and across the lane; both lines worn away from 7 to 8.5 m"
	sc.Floor = epoxy()
	sc.Lane.Left.Gaps = []Span{{From: 7, To: 8.5}}
	sc.Lane.Right.Gaps = []Span{{From: 7, To: 8.5}}
	sc.Light.Tubes = tubesAlong(sc.Stripe.Path, 1, sc.Stripe.Path.Length()+4, 1.6, 1.2, 4, []float64{1.5, -2.0, 0.2, -3.0, 2.4}, 3)
	sc.Tags = append(sc.Tags, "reflection")
	return sc
}
