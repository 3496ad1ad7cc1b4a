package synth

// The built-in scenarios. Each is the "weave" base with parameter changes;
// the warehouse, its colours and its dimensions are invented.

func init() {
	add(weave)
	add(gap)
}

// base640 is the camera of the demo cart: 640×480, fx = fy = 500 px
// (about 65° across), 0.5 m above the floor, pitched 35° down.
func base640() Camera {
	return Camera{Fx: 500, Fy: 500, Cx: 320, Cy: 240, HeightM: 0.5, PitchDeg: 35}
}

// aisle is the demo route: a straight, a gentle right bend, a straight, a
// gentle left bend and a long straight (about 22 m).
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
