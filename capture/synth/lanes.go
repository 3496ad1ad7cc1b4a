package synth

import (
	"math"

	"github.com/hewline/hewline/capture/truth"
)

// Follow modes of a Scenario: what the vehicle follows, and so what the
// truth's centreline is.
const (
	FollowStripe = "stripe" // one taped or painted stripe (the default)
	FollowLane   = "lane"   // the centre of a lane between two boundary lines
)

// Lane describes the two boundary lines of a lane scenario. The lane's
// centre is the Scenario's Stripe.Path (the cart drives along it; in lane
// mode the stripe itself is not drawn). Each boundary is a Mark whose Path
// is ignored: it runs parallel to the centre at WidthM/2 to its side. The
// boundary's FromM, ToM and Gaps are given in arc length along the centre
// path, so both sides' gaps line up with the same stretch of the aisle.
type Lane struct {
	// WidthM is the distance between the two boundaries' centrelines.
	WidthM      float64
	Left, Right Mark
}

// laneGeom is a Lane placed in the world: the two boundaries as marks,
// and the map from centre arc length to each boundary's arc length.
type laneGeom struct {
	left, right       markGeom
	toLeft, toRight   func(s float64) float64
	halfWidth         float64
	leftIdx, rightIdx int // the boundaries' indices in Renderer.marks
}

// offsetPath is p shifted lat metres to its left (negative: right), with
// every arc's radius changed to keep the shift constant, and a function
// mapping arc length along p to arc length along the shifted path. An arc
// turning towards the shift must keep a radius larger than |lat|.
func offsetPath(p Path, lat float64) (Path, func(s float64) float64) {
	g := newGeom(p)
	x, y, psi := g.at(0)
	out := Path{Start: Pose{X: x - lat*math.Sin(psi), Y: y + lat*math.Cos(psi), HeadingDeg: deg(psi)}}
	type piece struct{ s0, s1, t0, k float64 }
	var pieces []piece
	var s, t float64
	for _, sg := range p.Segments {
		if sg.Length <= 0 {
			continue
		}
		k := 1.0
		if sg.Curvature != 0 {
			// Curvature > 0 turns right; a left shift is then on the
			// outside and the radius grows by lat.
			r := 1/sg.Curvature + lat
			k = r * sg.Curvature
			out.Segments = append(out.Segments, Segment{Length: sg.Length * k, Curvature: 1 / r})
		} else {
			out.Segments = append(out.Segments, sg)
		}
		pieces = append(pieces, piece{s0: s, s1: s + sg.Length, t0: t, k: k})
		s += sg.Length
		t += sg.Length * k
	}
	m := func(sc float64) float64 {
		if len(pieces) == 0 || sc <= 0 {
			return sc
		}
		for _, pc := range pieces {
			if sc <= pc.s1 {
				return pc.t0 + (sc-pc.s0)*pc.k
			}
		}
		last := pieces[len(pieces)-1]
		return last.t0 + (last.s1-last.s0)*last.k + (sc - last.s1)
	}
	return out, m
}

// boundaryMark is the Mark of one lane boundary at lateral offset lat,
// with its extent and gaps moved from centre arc length to its own.
func boundaryMark(b Mark, centre Path, lat float64) (Mark, func(float64) float64) {
	p, m := offsetPath(centre, lat)
	b.Path = p
	if b.FromM > 0 {
		b.FromM = m(b.FromM)
	}
	if b.ToM > 0 {
		b.ToM = m(b.ToM)
	}
	gaps := make([]Span, len(b.Gaps))
	for i, gp := range b.Gaps {
		gaps[i] = Span{From: m(gp.From), To: m(gp.To)}
	}
	b.Gaps = gaps
	return b, m
}

// newLaneGeom places sc's lane; ok is false in stripe mode.
func newLaneGeom(sc *Scenario, seed uint64) (laneGeom, bool) {
	if sc.Follow != FollowLane {
		return laneGeom{}, false
	}
	hw := sc.Lane.WidthM / 2
	lm, lmap := boundaryMark(sc.Lane.Left, sc.Stripe.Path, hw)
	rm, rmap := boundaryMark(sc.Lane.Right, sc.Stripe.Path, -hw)
	return laneGeom{
		left: newMarkGeom(lm, splitmix64(seed+31)), right: newMarkGeom(rm, splitmix64(seed+37)),
		toLeft: lmap, toRight: rmap, halfWidth: hw,
	}, true
}

// laneTruth turns frame f, computed for the lane's centre path, into lane
// truth: Left and Right hold each boundary where it is laid and in view,
// Points the centre only on rows where at least one boundary is there (the
// centre can be inferred from one side and the lane width), Visible is
// recomputed from those rows, and WidthPx is the lane's width at the
// reference row in LaneWidthPx (the horizontal distance between the
// boundaries' centrelines; WidthPx is 0: no stripe is drawn). Near-half rows with one boundary missing are tagged
// "one-boundary"; with both missing "gap".
func (r *Renderer) laneTruth(f *truth.Frame, st *cartState, sNear, sFar float64) {
	lg := &r.lane
	w, h := float64(r.w), float64(r.h)
	var ys []float64
	for y := h - 2; y >= 0; y -= 2 {
		ys = append(ys, y)
	}
	ref := r.refRow()
	ys = append(ys, ref)
	inView := func(c crossing) bool { return c.ok && c.x >= 0 && c.x <= w-1 }
	centre := firstCrossings(r.projectPath(st, 0, sNear, sFar), ys)
	left := firstCrossings(r.projectPath(st, lg.halfWidth, sNear, sFar), ys)
	right := firstCrossings(r.projectPath(st, -lg.halfWidth, sNear, sFar), ys)
	f.Points = f.Points[:0]
	f.Left, f.Right = [][2]float64{}, [][2]float64{}
	var near, seen, oneSide, none int
	for k, y := range ys[:len(ys)-1] {
		// left and right were sampled at the same centre s as the centre
		// line: their own arc length comes through the lane's maps.
		lp := inView(left[k]) && lg.left.laid(lg.toLeft(left[k].s)) >= 0
		rp := inView(right[k]) && lg.right.laid(lg.toRight(right[k].s)) >= 0
		if lp {
			f.Left = append(f.Left, [2]float64{left[k].x, y})
		}
		if rp {
			f.Right = append(f.Right, [2]float64{right[k].x, y})
		}
		c := centre[k]
		present := c.ok && c.x >= 0 && c.x <= w-1 && (lp || rp)
		if present {
			f.Points = append(f.Points, [2]float64{c.x, y})
		}
		if y >= h/2 {
			near++
			if present {
				seen++
			}
			lLaid := left[k].ok && lg.left.laid(lg.toLeft(left[k].s)) >= 0
			rLaid := right[k].ok && lg.right.laid(lg.toRight(right[k].s)) >= 0
			switch {
			case !lLaid && !rLaid:
				none++
			case !lLaid || !rLaid:
				oneSide++
			}
		}
	}
	f.Visible = near > 0 && 2*seen >= near
	f.WidthPx = 0
	f.LaneWidthM = 2 * lg.halfWidth
	if l, rr := left[len(ys)-1], right[len(ys)-1]; l.ok && rr.ok {
		f.LaneWidthPx = math.Abs(rr.x - l.x)
	}
	if 2*oneSide >= near && near > 0 {
		f.Tags = append(f.Tags, "one-boundary")
	}
	if none > 0 {
		f.Tags = append(f.Tags, "gap")
	}
}

// The lane scenarios. The camera of the lane cart sits higher than the
// stripe cart's so that both boundaries of a 0.9 m lane are in view:
// 1.0 m up, pitched 30° down, fx = fy = 500 px at 640×480; the bottom row
// sees the floor about 0.68 m ahead, about ±0.77 m to each side.

func init() {
	for _, f := range []func() Scenario{laneStraight, laneSCurve, laneOneSide, laneMixed, laneFisheye} {
		add(f)
	}
}

func laneCamera() Camera {
	return Camera{Fx: 500, Fy: 500, Cx: 320, Cy: 240, HeightM: 1.0, PitchDeg: 30}
}

func laneBase() Scenario {
	sc := weave()
	sc.Follow = FollowLane
	sc.Camera = laneCamera()
	sc.Stripe = Mark{Name: "centre", Path: aisle(), WidthM: 0.05, Colour: Yellow}
	sc.Lane = Lane{WidthM: 0.9,
		Left:  Mark{Name: "left", WidthM: 0.05, Colour: Yellow},
		Right: Mark{Name: "right", WidthM: 0.05, Colour: Yellow},
	}
	sc.Motion = Motion{SpeedMps: 1, StartM: 1, WeaveAmpM: 0.1, WeaveWavelengthM: 6}
	sc.LookaheadM = 1.5
	sc.Tags = []string{"lane"}
	return sc
}

func laneStraight() Scenario {
	sc := laneBase()
	sc.Name = "lane-straight"
	sc.Notes = "lane mode: a 0.9 m lane between two yellow 50 mm lines on a straight aisle, cart weaving ±10 cm at 1 m/s"
	sc.Stripe.Path = Path{Segments: []Segment{Straight(20)}}
	return sc
}

func laneSCurve() Scenario {
	sc := laneBase()
	sc.Name = "lane-s-curve"
	sc.Notes = "lane mode: an S-bend of 2 m radius (right 70°, left 70°), then 2.5 m radius (left 45°, right 45°), at 0.7 m/s"
	sc.Stripe.Path = Path{Segments: []Segment{Straight(1.5), Arc(2, 70), Arc(2, -70), Straight(1), Arc(2.5, -45), Arc(2.5, 45), Straight(6)}}
	sc.Motion = Motion{SpeedMps: 0.7, StartM: 0.5, WeaveAmpM: 0.04, WeaveWavelengthM: 3}
	sc.Tags = append(sc.Tags, "curve")
	return sc
}

func laneOneSide() Scenario {
	sc := laneBase()
	sc.Name = "lane-one-side"
	sc.Notes = "lane mode: the left line is worn away from 3.5 to 6.5 m and the right one from 8.5 to 10.5 m; the centre comes from the one line left and the learned width"
	sc.Lane.Left.Gaps = []Span{{From: 3.5, To: 6.5}}
	sc.Lane.Right.Gaps = []Span{{From: 8.5, To: 10.5}}
	return sc
}

func laneMixed() Scenario {
	sc := laneBase()
	sc.Name = "lane-mixed"
	sc.Notes = "lane mode: a white 50 mm line on the left and a yellow 100 mm line on the right, through the demo aisle's bends"
	sc.Lane.Left = Mark{Name: "left", WidthM: 0.05, Colour: White}
	sc.Lane.Right = Mark{Name: "right", WidthM: 0.1, Colour: Yellow}
	return sc
}

func laneFisheye() Scenario {
	sc := laneBase()
	sc.Name = "lane-fisheye"
	sc.Notes = "lane mode: a forward-looking wide lens (pitched 20°, 0.9 m up, fx 300 px, k1 −0.3, k2 0.08) with the wall above the horizon, through the bends"
	sc.Camera = Camera{Fx: 300, Fy: 300, Cx: 320, Cy: 240, K1: -0.3, K2: 0.08, HeightM: 0.9, PitchDeg: 20}
	sc.Tags = append(sc.Tags, "distortion", "horizon")
	return sc
}
