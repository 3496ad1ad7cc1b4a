package synth

import "math"

// The built-in scenarios. Each is the "weave" base with parameter changes;
// the warehouse, its colours and its dimensions are invented.

func init() {
	for _, f := range []func() Scenario{
		weave, gap, curves, rackShadows, walker, glare, worn, floorMarks, tiles,
		dim, flicker, exposureJumps, shake, fisheye, narrow, branch, wideTape,
		tape("tape-white", White, concrete(), "white 50 mm tape on concrete"),
		tape("tape-blue", Blue, concrete(), "blue 50 mm tape on concrete"),
		tape("tape-green", Green, concrete(), "green 50 mm tape on concrete"),
		tape("tape-black", Black, Floor{Colour: RGB{0.78, 0.78, 0.74}, Texture: 0.08},
			"black 50 mm tape on a light floor: dark-on-light"),
		tape("dark-floor", Yellow, Floor{Colour: RGB{0.16, 0.17, 0.18}, Texture: 0.2},
			"yellow 50 mm tape on dark epoxy: strongly light-on-dark"),
	} {
		add(f)
	}
}

// base640 is the camera of the demo cart: 640×480, fx = fy = 500 px
// (about 65° across), 0.5 m above the floor, pitched 35° down. The near
// half of the image sees the floor from about 0.28 to 0.71 m ahead.
func base640() Camera {
	return Camera{Fx: 500, Fy: 500, Cx: 320, Cy: 240, HeightM: 0.5, PitchDeg: 35}
}

// aisle is the demo route: a straight, a gentle right bend, a straight, a
// gentle left bend and a long straight (about 22.2 m).
func aisle() Path {
	return Path{Segments: []Segment{Straight(4), Arc(6, 25), Straight(3), Arc(6, -25), Straight(10)}}
}

func concrete() Floor {
	return Floor{Colour: RGB{0.50, 0.50, 0.48}, Texture: 0.15}
}

func weave() Scenario {
	return Scenario{
		Name:  "weave",
		Notes: "even light, concrete floor, yellow 50 mm tape, cart weaving ±12 cm at 1 m/s through two gentle bends",
		Width: 640, Height: 480, FPS: 30, Frames: 300, Seed: 1,
		Camera:     base640(),
		Stripe:     Mark{Name: "stripe", Path: aisle(), WidthM: 0.05, Colour: Yellow},
		Motion:     Motion{SpeedMps: 1, StartM: 1, WeaveAmpM: 0.12, WeaveWavelengthM: 6},
		Floor:      concrete(),
		Light:      Light{Gain: 1},
		Backdrop:   Backdrop{Wall: RGB{0.70, 0.72, 0.74}, Upright: RGB{0.15, 0.25, 0.55}},
		LookaheadM: 1,
	}
}

func gap() Scenario {
	sc := weave()
	sc.Name = "gap"
	sc.Notes = "as weave, but the tape is missing from 5.0 to 6.6 m and ends at 9.0 m: the fail-safe must fire in both places"
	sc.Stripe.Gaps = []Span{{From: 5.0, To: 6.6}}
	sc.Stripe.ToM = 9.0
	return sc
}

func curves() Scenario {
	sc := weave()
	sc.Name = "curves"
	sc.Notes = "tight bends down to 1.5 m radius (right 90° at 3 m, left 90° at 1.5 m, right 60° at 2 m) at 0.7 m/s, small weave"
	sc.Stripe.Path = Path{Segments: []Segment{Straight(2), Arc(3, 90), Straight(1.5), Arc(1.5, -90), Straight(1.5), Arc(2, 60), Straight(6)}}
	sc.Motion = Motion{SpeedMps: 0.7, StartM: 0.5, WeaveAmpM: 0.04, WeaveWavelengthM: 3}
	sc.Tags = []string{"curve"}
	return sc
}

// poseAt is the point and heading of p at arc length s.
func poseAt(p Path, s float64) Pose {
	g := newGeom(p)
	x, y, psi := g.at(s)
	return Pose{X: x, Y: y, HeadingDeg: deg(psi)}
}

// quadAlong is a floor polygon following p from s0 to s1 between lateral
// offsets lat0 and lat1 (metres, positive left of the path).
func quadAlong(p Path, s0, s1, lat0, lat1 float64) [][2]float64 {
	g := newGeom(p)
	n := int(math.Abs(s1-s0)/0.5) + 1 // 0.5 m chords: 5 mm sagitta at 6 m radius
	var a, b [][2]float64
	for i := 0; i <= n; i++ {
		s := s0 + (s1-s0)*float64(i)/float64(n)
		x, y, psi := g.at(s)
		nx, ny := -math.Sin(psi), math.Cos(psi)
		a = append(a, [2]float64{x + lat0*nx, y + lat0*ny})
		b = append(b, [2]float64{x + lat1*nx, y + lat1*ny})
	}
	for i := len(b) - 1; i >= 0; i-- {
		a = append(a, b[i])
	}
	return a
}

// skew shears a polygon along x by k·y, making bands cross at an angle.
func skew(poly [][2]float64, k float64) [][2]float64 {
	out := make([][2]float64, len(poly))
	for i, v := range poly {
		out[i] = [2]float64{v[0] + k*v[1], v[1]}
	}
	return out
}

func rackShadows() Scenario {
	sc := weave()
	sc.Name = "rack-shadows"
	sc.Notes = "hard shadows of rack beams across the aisle and a long rack shadow along one side that covers the tape in places"
	p := sc.Stripe.Path
	for i, s := range []float64{2.5, 3.6, 5.5, 7.2, 8.0, 10.5} {
		w := 0.25 + 0.15*float64(i%3)
		sc.Light.Shadows = append(sc.Light.Shadows, Shadow{
			Poly: skew(quadAlong(p, s, s+w, -3, 3), 0.3), Darkness: 0.65, SoftM: 0.01})
	}
	sc.Light.Shadows = append(sc.Light.Shadows,
		Shadow{Poly: quadAlong(p, 4, 9, 0.02, 2.5), Darkness: 0.55, SoftM: 0.03})
	sc.Tags = []string{"shadow"}
	return sc
}

func walker() Scenario {
	sc := weave()
	sc.Name = "walker"
	sc.Notes = "the shadow of a person walking across the aisle at 1.4 m/s passes over the tape three times, just ahead of the cart"
	p := sc.Stripe.Path
	g := newGeom(p)
	for _, sCross := range []float64{3, 6, 9.5} {
		x, y, psi := g.at(sCross)
		// the cart's camera reaches 0.6 m before sCross at time tc
		tc := (sCross - 0.6 - sc.Motion.StartM) / sc.Motion.SpeedMps
		nx, ny := -math.Sin(psi), math.Cos(psi) // left
		v := 1.4
		// body-and-legs shadow: an elongated hexagon 0.35 m × 0.9 m,
		// walking from the left; at tc it is centred on the tape
		cx, cy := x+nx*v*tc, y+ny*v*tc
		tx, ty := math.Cos(psi), math.Sin(psi)
		var poly [][2]float64
		for k := 0; k < 6; k++ {
			a := float64(k) * math.Pi / 3
			u, w := 0.45*math.Cos(a), 0.18*math.Sin(a) // long side along the path
			poly = append(poly, [2]float64{cx + u*tx + w*nx, cy + u*ty + w*ny})
		}
		sc.Light.Shadows = append(sc.Light.Shadows, Shadow{Poly: poly, Darkness: 0.6, SoftM: 0.06, VX: -nx * v, VY: -ny * v})
	}
	sc.Tags = []string{"moving-shadow"}
	return sc
}

func glare() Scenario {
	sc := weave()
	sc.Name = "glare"
	sc.Notes = "glossy floor reflecting ceiling lamps (every 2.5 m, 4 m up, along the aisle): highlights that move with the cart and saturate parts of the stripe"
	sc.Floor.Gloss = 1
	sc.Floor.Shininess = 400
	g := newGeom(sc.Stripe.Path)
	for s := 2.0; s < g.total+3; s += 2.5 {
		x, y, psi := g.at(s)
		off := 0.15 * math.Sin(s) // lamps not exactly over the tape
		sc.Light.Lamps = append(sc.Light.Lamps, Lamp{X: x - off*math.Sin(psi), Y: y + off*math.Cos(psi), Z: 4, Strength: 2.5})
	}
	sc.Tags = []string{"glare"}
	return sc
}

func worn() Scenario {
	sc := weave()
	sc.Name = "worn"
	sc.Notes = "worn tape with about a third missing in chunks, and dirt smears on and beside it"
	sc.Stripe.Wear = 0.35
	sc.Stripe.WearScaleM = 0.03
	g := newGeom(sc.Stripe.Path)
	for i, s := range []float64{2, 3.3, 5.1, 6.8, 8.4, 10.2} {
		p := poseAt(sc.Stripe.Path, s)
		lat := []float64{0.1, -0.05, 0.25, 0, -0.2, 0.08}[i]
		_, _, psi := g.at(s)
		p.X -= lat * math.Sin(psi)
		p.Y += lat * math.Cos(psi)
		p.HeadingDeg += 20 * float64(i%3-1)
		sc.Marks = append(sc.Marks, Mark{Name: "dirt", Path: Path{Start: p, Segments: []Segment{Straight(0.6)}},
			WidthM: 0.18, Colour: RGB{0.25, 0.22, 0.18}, Opacity: 0.35})
	}
	sc.Tags = []string{"worn", "dirt"}
	return sc
}

func floorMarks() Scenario {
	sc := weave()
	sc.Name = "floor-marks"
	sc.Notes = "tyre marks beside the stripe, saw-cut floor joints crossing it every 3 m, a joint along it and a meandering crack"
	p := sc.Stripe.Path
	g := newGeom(p)
	offset := func(lat float64) Pose {
		x, y, psi := g.at(0)
		return Pose{X: x - lat*math.Sin(psi), Y: y + lat*math.Cos(psi), HeadingDeg: deg(psi)}
	}
	// tyre marks follow the route (same segments, radii shifted)
	for _, lat := range []float64{0.32, -0.32, 0.12} {
		tp := Path{Start: offset(lat)}
		for _, s := range p.Segments {
			if s.Curvature == 0 {
				tp.Segments = append(tp.Segments, s)
				continue
			}
			r := 1/s.Curvature + lat // right-turn radius grows with left offset
			tp.Segments = append(tp.Segments, Segment{Length: s.Length * r * s.Curvature, Curvature: 1 / r})
		}
		sc.Marks = append(sc.Marks, Mark{Name: "tyre", Path: tp, WidthM: 0.07, Colour: RGB{0.1, 0.1, 0.1}, Opacity: 0.3, Gaps: []Span{{3, 5}, {9, 11}}})
	}
	for s := 1.5; s < g.total; s += 3 {
		q := poseAt(p, s)
		x, y, psi := g.at(s)
		q.X, q.Y = x+2*math.Sin(psi), y-2*math.Cos(psi) // start 2 m right
		q.HeadingDeg = deg(psi) + 90
		sc.Marks = append(sc.Marks, Mark{Name: "joint", Path: Path{Start: q, Segments: []Segment{Straight(4)}},
			WidthM: 0.006, Colour: RGB{0.2, 0.2, 0.2}, Opacity: 0.8})
	}
	sc.Marks = append(sc.Marks, Mark{Name: "joint", Path: Path{Start: offset(-0.45), Segments: []Segment{Straight(30)}},
		WidthM: 0.006, Colour: RGB{0.2, 0.2, 0.2}, Opacity: 0.8})
	crack := Path{Start: Pose{X: 5, Y: -1.2, HeadingDeg: 70}}
	for i := 0; i < 12; i++ {
		crack.Segments = append(crack.Segments, Segment{Length: 0.25, Curvature: 3 * math.Sin(float64(i)*2.1)})
	}
	sc.Marks = append(sc.Marks, Mark{Name: "crack", Path: crack, WidthM: 0.004, Colour: RGB{0.12, 0.12, 0.12}, Opacity: 0.9})
	sc.Tags = []string{"tyre-marks", "joints", "crack"}
	return sc
}

func tiles() Scenario {
	sc := weave()
	sc.Name = "tiles"
	sc.Notes = "light 300 mm floor tiles with 6 mm dark grout lines running along and across the tape"
	sc.Floor = Floor{Colour: RGB{0.72, 0.70, 0.66}, Texture: 0.06, TileM: 0.3, GroutM: 0.006, GroutColour: RGB{0.3, 0.3, 0.3}}
	sc.Tags = []string{"tiles"}
	return sc
}

func dim() Scenario {
	sc := weave()
	sc.Name = "dim"
	sc.Notes = "dim light, as in an unlit rack aisle (about a tenth of normal exposure), with sensor noise"
	sc.Light.Gain = 0.15
	sc.Light.NoiseSD = 4
	sc.Tags = []string{"dim", "noise"}
	return sc
}

func flicker() Scenario {
	sc := weave()
	sc.Name = "flicker"
	sc.Notes = "lamps flickering at 100 Hz (50 Hz mains) seen through a rolling shutter: dark and bright bands drifting across the image"
	sc.Light.FlickerAmp = 0.3
	sc.Light.FlickerHz = 100
	sc.Light.LineTimeS = 1.0 / (30 * 525) // rows read out over most of the frame time
	sc.Tags = []string{"flicker"}
	return sc
}

func exposureJumps() Scenario {
	sc := weave()
	sc.Name = "exposure-jumps"
	sc.Notes = "sudden exposure changes: ×1.8 (nearly saturated) at 2 s, ×0.35 at 4.5 s, back to normal at 7 s"
	sc.Light.GainSteps = []GainStep{{AtS: 2, Gain: 1.8}, {AtS: 4.5, Gain: 0.35}, {AtS: 7, Gain: 1}}
	sc.Tags = []string{"exposure"}
	return sc
}

func shake() Scenario {
	sc := weave()
	sc.Name = "shake"
	sc.Notes = "fast cart (2 m/s) on a rough floor: camera vibration of ±1.5° in pitch and roll and motion blur over a 1/60 s exposure"
	sc.Stripe.Path.Segments = append(sc.Stripe.Path.Segments, Straight(10))
	sc.Motion.SpeedMps = 2
	sc.Motion.WeaveWavelengthM = 10
	sc.Motion.ShakeDeg = 1.5
	sc.Light.BlurSamples = 5
	sc.Light.ExposureS = 1.0 / 60
	sc.Tags = []string{"shake", "blur"}
	return sc
}

func fisheye() Scenario {
	sc := weave()
	sc.Name = "fisheye"
	sc.Notes = "wide lens with strong barrel distortion (k1 −0.3, k2 0.08, fx 330 px) through the bends"
	sc.Camera.Fx, sc.Camera.Fy = 330, 330
	sc.Camera.K1, sc.Camera.K2 = -0.3, 0.08
	sc.Tags = []string{"distortion"}
	return sc
}

func narrow() Scenario {
	sc := weave()
	sc.Name = "narrow"
	sc.Notes = "a thin 5 mm painted line: 3–5 px wide in the near rows"
	sc.Stripe.WidthM = 0.005
	sc.Stripe.Colour = White
	sc.Tags = []string{"narrow"}
	return sc
}

func branch() Scenario {
	sc := weave()
	sc.Name = "branch"
	sc.Notes = "a branch leaves to the right at 4.5 m (2 m radius) and a crossing bar spans the tape at 8 m: the tracker must stay on the main path"
	start := poseAt(sc.Stripe.Path, 4.5)
	sc.Marks = append(sc.Marks, Mark{Name: "branch", Path: Path{Start: start, Segments: []Segment{Arc(2, 90), Straight(3)}},
		WidthM: 0.05, Colour: Yellow})
	g := newGeom(sc.Stripe.Path)
	x, y, psi := g.at(8)
	sc.Marks = append(sc.Marks, Mark{Name: "crossbar",
		Path:   Path{Start: Pose{X: x + 0.4*math.Sin(psi), Y: y - 0.4*math.Cos(psi), HeadingDeg: deg(psi) + 90}, Segments: []Segment{Straight(0.8)}},
		WidthM: 0.05, Colour: Yellow})
	sc.Tags = []string{"branch", "crossing"}
	return sc
}

func wideTape() Scenario {
	sc := weave()
	sc.Name = "tape-wide"
	sc.Notes = "yellow 100 mm tape, camera 0.9 m up pitched 45°"
	sc.Stripe.WidthM = 0.1
	sc.Camera.HeightM, sc.Camera.PitchDeg = 0.9, 45
	return sc
}

// tape makes a variant of weave with another tape colour or floor.
func tape(name string, c RGB, fl Floor, notes string) func() Scenario {
	return func() Scenario {
		sc := weave()
		sc.Name = name
		sc.Notes = notes
		sc.Stripe.Colour = c
		sc.Floor = fl
		return sc
	}
}
